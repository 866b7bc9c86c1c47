"""A readable run report (``report.md``): result in plain words, inputs, plots, safety figures.

The report is Markdown so it reads as plain text and renders in any Markdown viewer.  It is
built only from what it is given: the run's summary, the case title, a table of inputs and
the file names of the plots; a key missing from the summary is said to be missing, never
guessed.
"""
from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from numbers import Real
from pathlib import Path

from fvsolver.outputs.files import atomic_write_text

__all__ = ["write_report", "format_duration", "format_pressure", "REPORT_NAME"]

REPORT_NAME = "report.md"
#: Standard atmospheric pressure, Pa (ISO 2533), the reference for over- and underpressure.
STANDARD_ATMOSPHERE_PA = 101_325.0
#: Relative balance error above which the report tells the reader to distrust the run.
BALANCE_ALERT = 1e-2


# --------------------------------------------------------------------------- formatting
def _number(value) -> float | None:
    """``value`` as a finite float, or None for anything else (None, NaN, text, bool)."""
    if isinstance(value, bool) or not isinstance(value, Real):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def format_duration(seconds: float | None) -> str:
    """A duration in readable units.

    Parameters
    ----------
    seconds : float or None, s

    Returns
    -------
    str
        ``"0.25 s"``, ``"42 s"``, ``"4 min 12 s"``, ``"2 h 5 min"``, ``"2 h"``, ``"3 d 4 h"``;
        ``"n/a"`` for None or a non-finite value.
    """
    s = _number(seconds)
    if s is None:
        return "n/a"
    sign = "-" if s < 0 else ""
    s = abs(s)
    if s < 59.5:
        text = f"{s:.2g} s" if s < 10 else f"{round(s):d} s"
        if s == 0.0:
            text = "0 s"
        return sign + text
    def two(big: int, big_unit: str, small: int, small_unit: str) -> str:
        # a zero second part says nothing: "2 h", not "2 h 0 min"
        return f"{sign}{big} {big_unit}" + (f" {small} {small_unit}" if small else "")

    total = round(s)
    if total < 3600:
        return two(total // 60, "min", total % 60, "s")
    total_min = round(s / 60.0)
    if total_min < 24 * 60:
        return two(total_min // 60, "h", total_min % 60, "min")
    total_h = round(s / 3600.0)
    return two(total_h // 24, "d", total_h % 24, "h")


def format_pressure(pa: float | None) -> str:
    """A pressure in Pa below 1 kPa, else kPa (MPa from 1 MPa); ``"n/a"`` when missing.

    Parameters
    ----------
    pa : float or None, Pa
    """
    p = _number(pa)
    if p is None:
        return "n/a"
    a = abs(p)
    if a < 1e3:
        return f"{p:.0f} Pa" if a >= 10 else f"{p:.3g} Pa"
    if a < 1e6:
        return f"{p / 1e3:.3g} kPa" if a < 1e5 else f"{p / 1e3:.1f} kPa"
    return f"{p / 1e6:.3g} MPa"


def _format_temperature(k: float | None) -> str:
    t = _number(k)
    return "n/a" if t is None else f"{t:.1f} K ({t - 273.15:.1f} °C)"


def _format_fraction(value: float | None) -> str:
    """A relative error as a percentage, with enough digits to be read."""
    v = _number(value)
    if v is None:
        return "n/a"
    pct = 100.0 * v
    if pct == 0.0:
        return "0 %"
    return f"{pct:.2g} %" if abs(pct) >= 1e-3 else f"{pct:.1e} %"


def _format_count(value) -> str | None:
    v = _number(value)
    return None if v is None else f"{int(round(v)):,d}"


def _format_value(value) -> str:
    """An input value as table text (numbers to 6 significant digits)."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, Real):
        v = float(value)
        return f"{v:.6g}" if math.isfinite(v) else str(v)
    if isinstance(value, Mapping):
        return ", ".join(f"{k}: {_format_value(v)}" for k, v in value.items())
    if isinstance(value, (list, tuple)):
        return ", ".join(_format_value(v) for v in value)
    if hasattr(value, "tolist"):  # numpy scalars and arrays
        return _format_value(value.tolist())
    return str(value)


def _cell(text: str) -> str:
    """Text safe inside a Markdown table cell."""
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


# ------------------------------------------------------------------------------ sections
def _target_reached(summary: Mapping) -> bool | None:
    reached = summary.get("target_reached")
    if isinstance(reached, bool):
        return reached
    if _number(summary.get("time_to_target_s")) is not None:
        return True
    return None


def _format_balance(value: float) -> str:
    """A relative balance error in plain words: its size, and whether it is round-off."""
    if value == 0.0:
        return "exactly"
    if value < 1e-8:  # never "6.4e-09 %": a percentage that small says round-off less plainly
        return f"at round-off ({value:.1e})"
    if value < 1e-6:
        return "to within 0.0001 %"
    return f"to within {100 * value:.2g} %"


def _balance_sentence(name: str, value) -> str | None:
    """One sentence on a balance error (a float or a dict of per-quantity errors)."""
    if isinstance(value, Mapping):
        parts = [(str(k), _number(v)) for k, v in value.items()]
        parts = [(k, abs(v)) for k, v in parts if v is not None]
        if not parts:
            return None
        worst = max(v for _, v in parts)
        text = ", ".join(f"{k.replace('_', ' ')} {_format_balance(v)}" for k, v in parts)
        sentence = f"The {name} balances closed, relative to the amounts exchanged: {text}."
    else:
        worst = _number(value)
        if worst is None:
            return None
        worst = abs(worst)
        sentence = f"The {name} balance closed {_format_balance(worst)}, relative to the {name} exchanged."
    if worst > BALANCE_ALERT:
        sentence += (
            f" That is more than {_format_fraction(BALANCE_ALERT)}: treat the results with "
            "caution and rerun with smaller time steps or a finer mesh."
        )
    return sentence


def result_paragraph(summary: Mapping) -> str:
    """The run's outcome in plain words, built from the keys that ``summary`` has.

    Parameters
    ----------
    summary : mapping
        Any of ``status``, ``target_reached``, ``time_to_target_s``,
        ``target_pressure_drop_pa``, ``max_pressure_drop_pa``, ``stall_reason``,
        ``energy_balance_relative_error``, ``mass_balance_relative_error`` (a float or a
        mapping of quantity to error), ``n_cells``, ``n_steps``, ``warnings``.

    Returns
    -------
    str
        One paragraph of Markdown.
    """
    sentences = []
    status = summary.get("status")
    if status:
        sentences.append(f"The run ended with status “{status}”.")
    target = _number(summary.get("target_pressure_drop_pa"))
    target_text = f"the target of {format_pressure(target)}" if target is not None else "the target"
    peak = _number(summary.get("max_pressure_drop_pa"))
    reached = _target_reached(summary)
    t_target = _number(summary.get("time_to_target_s"))
    device = summary.get("outcome") is not None  # a running device: the target is the difference that tips it
    first_tip = _number(summary.get("first_tip_s"))
    end = _number(summary.get("end_time_s"))
    if device:
        tips = (f"{format_pressure(target)}, " if target is not None else "") + \
            "the difference that brings its centre of mass to the pivot"
        if first_tip is not None:
            when = f"{first_tip:.2f} s" if first_tip < 60.0 else f"{format_duration(first_tip)} ({first_tip:.1f} s)"
            sentences.append(f"The device first tipped after {when} of simulated time, when "
                             f"the pressure difference between the body and the head reached {tips}.")
        else:
            text = f"The device never tipped: the pressure difference between the body and the head never reached {tips}"
            text += f"; the largest difference was {format_pressure(peak)}." if peak is not None else "."
            sentences.append(text)
        if end is not None:
            sentences.append(f"The run ended at {format_duration(end)} ({summary.get('n_cycles') or 0} tips); the "
                             "cycle's outcome is in the section below.")
        reached = None  # the cycle section says the rest
    elif reached is True:
        when = f" after {format_duration(t_target)} of simulated time" if t_target is not None else ""
        sentences.append(
            f"The pressure difference between the second bulb and the head reached {target_text}{when}."
        )
        if peak is not None:
            sentences.append(f"The largest pressure difference was {format_pressure(peak)}.")
    elif reached is False:
        text = f"The pressure difference between the second bulb and the head did not reach {target_text}"
        text += f"; the largest difference was {format_pressure(peak)}." if peak is not None else "."
        sentences.append(text)
        reason = summary.get("stall_reason")
        if reason:
            sentences.append(f"Why it stopped short: {str(reason).rstrip('.')}.")
        else:
            sentences.append("The run recorded no reason for stopping short.")
    elif not device and (target is not None or peak is not None):
        # a run that stopped early (interrupted, failed): the question is still open
        end = _number(summary.get("end_time_s"))
        at = f" at {format_duration(end)}" if end is not None else ""
        text = f"The run stopped{at} before the pressure difference reached {target_text}"
        text += f"; the largest difference until then was {format_pressure(peak)}." if peak is not None else "."
        sentences.append(text)
    # a case without a target (conduction only) has nothing to say about one
    skipped = summary.get("field_times_not_reached_s") or []
    if skipped:
        times = ", ".join(format_duration(t) for t in skipped)
        sentences.append(f"The run stopped before the field output times {times}, which were not written"
                         + ("; the field at the target crossing was written instead." if reached else
                            "; the field at the run's end was written instead." if device else "."))
    cells, steps = _format_count(summary.get("n_cells")), _format_count(summary.get("n_steps"))
    if cells and steps:
        sentences.append(f"The model had {cells} cells and took {steps} time steps.")
    elif cells:
        sentences.append(f"The model had {cells} cells.")
    elif steps:
        sentences.append(f"The run took {steps} time steps.")
    for name, key in (("energy", "energy_balance_relative_error"), ("mass", "mass_balance_relative_error")):
        sentence = _balance_sentence(name, summary.get(key))
        if sentence:
            sentences.append(sentence)
    for text in summary.get("input_warnings") or []:
        sentences.append(f"Check the input: {str(text).rstrip('.')}.")
    warnings = summary.get("warnings") or []
    if isinstance(warnings, str):
        warnings = [warnings]
    if warnings:
        n = len(warnings)
        sentences.append(f"The run raised {n} warning{'s' if n != 1 else ''}, listed under safety figures.")
    return " ".join(sentences)


def _inputs_table(inputs: Mapping) -> list[str]:
    if not inputs:
        return ["No inputs were passed to the report."]
    lines = ["| input | value |", "|---|---|"]
    lines += [f"| {_cell(str(k))} | {_cell(_format_value(v))} |" for k, v in inputs.items()]
    return lines


def _plot_links(folder: Path, plots: Sequence) -> list[str]:
    if not plots:
        return ["No plots were written for this run."]
    lines = []
    for plot in plots:
        p = Path(plot)
        target = p if p.is_absolute() else folder / p
        try:
            rel = os.path.relpath(target.resolve(), folder.resolve())
        except ValueError:  # another drive (Windows): the link has to stay absolute
            rel = str(target.resolve())
        rel = Path(rel).as_posix()
        link = f"<{rel}>" if any(c in rel for c in " ()") else rel
        alt = p.stem.replace("_", " ")
        lines.append(f"![{alt}]({link})")
        if not target.exists():
            lines.append(f"*(the file {rel} did not exist when this report was written)*")
        lines.append("")
    return lines[:-1]


def _safety_figures(summary: Mapping) -> list[str]:
    lines = []
    p = _number(summary.get("max_internal_pressure_pa"))
    if p is None:
        lines.append("- Largest internal pressure: not recorded in the summary.")
    else:
        diff = p - STANDARD_ATMOSPHERE_PA
        load = (
            "the glass is loaded by internal overpressure" if diff > 0
            else "the glass is loaded from outside, as under a partial vacuum"
        )
        lines.append(
            f"- Largest internal pressure: {format_pressure(p)} (absolute); "
            f"{format_pressure(abs(diff))} {'above' if diff > 0 else 'below'} standard atmospheric "
            f"pressure (101.325 kPa), so {load}. Check it against the rating of the glassware, "
            "with a margin, before any test."
        )
    t = _number(summary.get("max_glass_temperature_k"))
    lines.append(
        "- Largest glass temperature: not recorded in the summary." if t is None
        else f"- Largest glass temperature: {_format_temperature(t)}."
    )
    warnings = summary.get("warnings") or []
    if isinstance(warnings, str):
        warnings = [warnings]
    if warnings:
        lines.append("- Warnings raised by the run:")
        lines += [f"  - {str(w).strip()}" for w in warnings]
    else:
        lines.append("- Warnings raised by the run: none.")
    return lines


GENERAL_CAUTION = """\
This report is the output of a numerical model, not a safety assessment. Before anything is
built, filled or run, follow local codes and regulations and your organisation's procedures,
and have the design, the filling and the test plan reviewed under licensed professional
practice (a qualified chemist, pressure or glass specialist, or safety officer)."""

CAUTIONS = GENERAL_CAUTION + """ The notes
below are reminders, not a complete list.

**Toxic, volatile working fluid.** Working fluids such as dichloromethane evaporate quickly
and their vapour is harmful: it depresses the nervous system, dichloromethane is turned into
carbon monoxide in the body, and it is a suspected carcinogen. The vapour is heavier than air
and collects in low places.

- Read the fluid's safety data sheet (SDS) before handling it and keep it at hand.
- Fill, open and empty devices only in a working fume hood or with equivalent local exhaust
  ventilation; never in a closed room, a car or near sleeping or living spaces.
- Wear chemical splash goggles (a face shield as well when handling glass under pressure or
  vacuum) and gloves of a material that the SDS rates for the fluid: dichloromethane passes
  through common thin nitrile or latex gloves within minutes.
- Store and dispose of the fluid as the SDS and local rules require; never pour it down a drain.

**Sealed glass under pressure or vacuum.** A sealed bulb holds the fluid's vapour pressure,
which rises steeply with temperature; the head's vapour space can also fall below atmospheric
pressure. Either way the glass can burst or implode and throw fragments.

- Use only annealed glassware, inspected before every use for scratches, chips, stars and
  strain; discard any piece that is damaged.
- Keep the device behind a shield (for example a polycarbonate screen), and keep people out
  of its line of fire during tests.
- Never heat a sealed bulb with a flame, a heat gun or direct sunlight, and never warm it
  beyond the temperature the design was checked for; leave enough vapour space when filling.
- Avoid thermal shock: do not put a hot bulb into cold water or the reverse.

**Heaters, hot water and flames near the vapour.** Many volatile working fluids are
flammable; dichloromethane is hard to ignite, but on flames and hot surfaces it decomposes
into toxic and corrosive gases (hydrogen chloride, phosgene).

- Keep open flames, glowing elements and spark sources away from where vapour can collect.
- Use heaters and water baths with thermostatic control and an independent over-temperature
  cut-out, and keep electrical equipment away from spills.
- Keep hot water in stable containers, away from edges and cables, to avoid scalds.
"""


def uncertainty_paragraph(summary: Mapping) -> str | None:
    """The estimated numerical uncertainty of the time to target, from ``numerical_uncertainty``."""
    u = summary.get("numerical_uncertainty")
    if not isinstance(u, Mapping):
        return None
    if u.get("reason"):
        return f"Not estimated: {u['reason']}."
    t = _number(summary.get("time_to_target_s"))
    parts = []
    for key, what in (("time_steps", "time steps"), ("mesh", "mesh")):
        part = u.get(key)
        if isinstance(part, Mapping) and _number(part.get("estimate_s")) is not None:
            parts.append(f"{what} ±{format_duration(part['estimate_s'])} ({100 * part['relative']:.2g} %; "
                         f"{part['how']})")
    if not parts or t is None:
        return None
    total = u.get("total_relative")
    return (f"Estimated numerical uncertainty of the time to target ({format_duration(t)}): "
            + "; ".join(parts) + (f". Together about ±{100 * total:.2g} %." if total is not None else ".")
            + " These bound the discretisation only; the model's inputs (property data, transfer "
              "correlations, the accommodation coefficient) are usually far less certain.")


def write_report(
    folder: str | os.PathLike,
    summary: dict,
    case_title: str,
    inputs: dict,
    plots: list[str],
    scenario: str = "",
) -> Path:
    """Write ``report.md`` into ``folder`` atomically and return its path.

    Parameters
    ----------
    folder : path
        The run's output folder (created if missing).  Plot links are made relative to it.
    summary : dict
        The run's summary; the keys used are those of :func:`result_paragraph` and
        ``max_internal_pressure_pa`` (Pa, absolute), ``max_glass_temperature_k`` (K),
        ``warnings`` (list of str).  Missing keys are reported as not recorded.
    case_title : str
        The report's title.
    inputs : dict
        Input name with its unit in the name (e.g. ``"room air temperature (K)"``) to
        value, shown as a table in the given order.
    plots : list of str
        Image files, absolute or relative to ``folder``, embedded in the given order.
    scenario : str
        The scenario computed from the inputs, shown under the title (which is free text).

    Returns
    -------
    pathlib.Path
        ``folder / "report.md"``.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    summary = summary or {}
    title = (case_title or "").strip() or "Untitled case"
    lines = [f"# {title}", "", "## Result", "", result_paragraph(summary) or "The summary is empty.", ""]
    if summary.get("outcome"):
        lines += ["## The running device", "", *cycle_section(summary), ""]
    if scenario:
        lines[1:1] = ["", f"*Computed for: {scenario}*"]
    uncertainty = uncertainty_paragraph(summary)
    if uncertainty:
        lines += ["## Numerical uncertainty", "", uncertainty, ""]
    lines += ["## Inputs", "", *_inputs_table(inputs or {}), ""]
    lines += ["## Plots", "", *_plot_links(folder, plots or []), ""]
    device = (summary.get("target_pressure_drop_pa") is not None or "room" in summary
              or bool(summary.get("warnings")))
    if device:
        lines += ["## Safety figures", "", *_safety_figures(summary), ""]
        lines += ["## Cautions", "", CAUTIONS]
    else:  # conduction only: no working fluid, no sealed glass
        lines += ["## Caution", "", GENERAL_CAUTION, ""]
    path = folder / REPORT_NAME
    atomic_write_text(path, "\n".join(lines))
    return path


CYCLE_ROWS = (
    ("outcome", "outcome", "", None),
    ("first_tip_s", "first tip", "s", 4),
    ("period_s", "period (settled)", "s", 4),
    ("last_period_s", "last period", "s", 4),
    ("n_cycles", "tips", "", None),
    ("dips_per_hour", "dips per hour", "1/h", 4),
    ("water_per_dip_kg", "water evaporated per dip", "kg", 3),
    ("water_per_day_kg", "water per day", "kg", 3),
    ("evaporative_cooling_w", "evaporative cooling (cycle mean)", "W", 3),
    ("dip_heat_into_head_j", "heat a dip puts into the head", "J", 3),
    ("lift_work_per_dip_j", "lift work per dip", "J", 3),
    ("mechanical_power_w", "mechanical power", "W", 3),
    ("carnot_fraction", "fraction of the Carnot limit (body to head)", "", 3),
    ("head_body_temperature_difference_k", "pool minus head temperature (cycle mean)", "K", 3),
    ("column_at_tip_m", "column at the tip", "m", 4),
)


def cycle_section(summary: dict) -> list[str]:
    """A whole device's cycle in plain words and a table (the summary's cycle keys)."""
    lines = [f"Outcome: **{summary['outcome'].replace('_', ' ')}** - {summary.get('outcome_reason') or ''}", "",
             "| quantity | value | unit |", "|---|---:|---|"]
    for key, label, unit, digits in CYCLE_ROWS:
        value = summary.get(key)
        if value is None:
            text = "not reached" if key in ("period_s", "first_tip_s") else "-"
        elif digits is None or isinstance(value, str):
            text = str(value).replace("_", " ")
        else:
            text = f"{value:.{digits}g}"
        lines.append(f"| {label} | {text} | {unit} |")
    lines += ["", "The tip is decided by statics: the device tips when its centre of mass rises to the pivot "
              "(tilt and swinging are not modelled). The column follows the pressure difference "
              "quasi-statically. Per-cycle rows are in cycles.csv.",
              "",
              "Numerical uncertainty: not estimated for this run (a cycle run has no cheap companion runs). "
              "The mesh's cells through the cap matter most: on the running-device demo, 3 cells through the "
              "felt put the first tip 2.0 % early against 16 cells, 8 cells 0.2 %. Estimate it for this "
              "design with `fvsolver converge CASE --result period_s` (observed order, extrapolated value and "
              "GCI)."]
    return lines
