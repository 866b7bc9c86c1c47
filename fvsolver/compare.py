"""Regression checks: a run's outputs against a kept baseline, within stated tolerances.

``fvsolver compare NEW BASELINE`` reads the two output folders (as ``fvsolver run`` writes them)
and compares

* the outcome exactly: ``status``, ``target_reached`` and the kinds of stall reason (the room is
  too humid, the cap dried out, heat reaches the head, the end time came first);
* the key results within a relative tolerance: the time to target, the target and largest
  pressure differences, the largest internal pressure; for a running device also its outcome
  (exactly), the first tip, the settled and the last period, the column at the tip, the water
  per dip and the evaporative cooling;
* temperatures within an absolute tolerance in K: the extremes of the field and of the glass;
* the histories, interpolated in time onto the baseline's steps over the span both cover: the
  pressure difference within a tolerance relative to the baseline's largest value (or the
  target), and every ``*_temperature_k`` column within the temperature tolerance;
* the temperature field cell by cell at the latest output time both runs wrote, when both have
  the same mesh (a changed geometry has another mesh: then the field is reported as not
  compared). The largest pressure difference is not compared once both runs reached the target:
  past it, it is only the overshoot of the step that stopped the run.

Each check is a row (quantity, baseline, new, difference, tolerance, verdict); the comparison
passes when every compared row does. Two sweep folders (``fvsolver sweep``) are compared run by
run, once their grids (varied keys and values) are the same.
"""
from __future__ import annotations

import csv
import json
import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from fvsolver.errors import CaseError

RELATIVE_KEYS = ("time_to_target_s", "target_pressure_drop_pa", "max_pressure_drop_pa", "max_internal_pressure_pa",
                 # a running device's cycle (absent from both summaries otherwise, then skipped)
                 "first_tip_s", "period_s", "last_period_s", "column_at_tip_m", "water_per_dip_kg",
                 "evaporative_cooling_w")
TEMPERATURE_KEYS = ("min_temperature_k", "max_temperature_k", "max_glass_temperature_k")
EXACT_KEYS = ("status", "target_reached", "outcome")
STALL_KINDS = {"too humid": "humid room", "dried out": "cap dried out", "heat reaches the head": "heat reaches the head",
               "end time": "end time first"}


@dataclass
class Check:
    quantity: str
    baseline: object
    new: object
    difference: float | None
    tolerance: str
    passed: bool | None  # None: not compared (with the reason in note)
    note: str = ""


@dataclass
class Comparison:
    new: Path
    baseline: Path
    checks: list = field(default_factory=list)
    warnings: list = field(default_factory=list)  # e.g. the cases differ in kind

    @property
    def passed(self) -> bool:
        return all(c.passed is not False for c in self.checks)

    def table(self, width: int | None = None) -> str:
        """The checks as a table that fits ``width`` columns (default: the terminal's): quantity, unit,
        baseline, new, absolute and relative difference, tolerance, verdict; notes follow as
        numbered footnotes instead of widening the table."""
        import shutil
        import textwrap

        width = width or shutil.get_terminal_size((100, 24)).columns
        head = ("quantity", "unit", "baseline", "new", "abs diff", "rel diff", "tolerance", "verdict")
        rows, notes = [], []
        for c in self.checks:
            name, unit = _split_unit(c.quantity)
            verdict = "not compared" if c.passed is None else ("ok" if c.passed else "DIFFERS")
            if c.note:
                notes.append(c.note)
                verdict += f" [{len(notes)}]"
            absolute, relative = _differences(c)
            rows.append((name.replace("_", " "), unit, _fmt(c.baseline), _fmt(c.new), absolute, relative,
                         c.tolerance, verdict))
        widths = [max(len(r[i]) for r in [head, *rows]) for i in range(len(head))]
        rest = sum(widths[1:]) + (len(head) - 1)
        widths[0] = max(20, min(widths[0], width - rest))  # long names wrap onto more lines
        lines = []
        for r in [head, *rows]:
            first = textwrap.wrap(r[0], widths[0], break_long_words=False) or [""]
            lines.append(" ".join(v.ljust(w) for v, w in zip((first[0], *r[1:]), widths)).rstrip())
            lines += [part for part in first[1:]]
            if r is head:
                lines.append(" ".join("-" * w for w in widths))
        for k, text in enumerate(notes, 1):
            lines += textwrap.wrap(f"[{k}] {text}", width, subsequent_indent="    ")
        for text in self.warnings:
            lines += textwrap.wrap(f"WARNING: {text}", width, subsequent_indent="    ")
        return "\n".join(lines)

    def as_dict(self) -> dict:
        return {"new": str(self.new), "baseline": str(self.baseline), "passed": self.passed,
                "checks": [c.__dict__ for c in self.checks], "warnings": self.warnings}


UNITS = (("_s", "s"), ("_pa", "Pa"), ("_k", "K"), ("_kg_s", "kg/s"), ("_w", "W"), ("_kg", "kg"), ("_m", "m"))


def _split_unit(quantity: str) -> tuple[str, str]:
    """("history pressure_drop (largest)", "Pa") from "history pressure_drop_pa (largest)"."""
    head, sep, tail = quantity.partition(" (")
    for suffix, unit in sorted(UNITS, key=lambda u: -len(u[0])):
        if head.endswith(suffix):
            return head[: -len(suffix)] + (sep + tail if sep else ""), unit
    if quantity.startswith("temperature field"):
        return quantity, "K"
    return quantity, ""


def _differences(c: Check) -> tuple[str, str]:
    """Absolute and relative difference, new - baseline, each in its own column."""
    a, b = c.baseline, c.new
    if isinstance(a, int | float) and isinstance(b, int | float) and not isinstance(a, bool) \
            and not isinstance(b, bool):
        diff = b - a
        rel = f"{diff / abs(a):+.1e}" if a != 0 else ""
        return f"{diff:+.3g}", rel
    if c.difference is not None:  # a worst-step or cell difference: absolute unless marked relative
        return ("", f"{c.difference:.1e}") if c.tolerance.startswith("rel") else (f"{c.difference:.3g}", "")
    return "", ""


def kind_differences(new: Path, baseline: Path) -> list[str]:
    """What makes two runs different kinds of case (shape, fluid, cap water, second bulb, target,
    device or conduction only), from their case_resolved.toml; [] when alike or unknown."""
    import tomllib

    def read(folder):
        path = folder / "case_resolved.toml"
        try:
            return tomllib.loads(path.read_text())
        except (OSError, tomllib.TOMLDecodeError):
            return None

    cn, cb = read(new), read(baseline)
    if cn is None or cb is None:
        return []
    out = []
    kind = lambda d: "device" if "fluid" in d else "conduction only"  # noqa: E731
    if kind(cn) != kind(cb):
        return [f"the cases differ in kind: the baseline is a {kind(cb)} case, the new run a {kind(cn)} case; "
                "their results are not comparable"]
    for path in ("geometry.shape", "fluid.name", "cap_water.mode", "second_bulb.mode", "room.convection"):
        table, key = path.split(".")
        a, b = cb.get(table, {}).get(key), cn.get(table, {}).get(key)
        if a != b:
            out.append(f"{path}: baseline {a!r}, new {b!r}")
    targets = [("column_height" in c.get("target", {})) for c in (cb, cn)]
    if "target" in cb and targets[0] != targets[1]:
        out.append("target: one is a column height, the other a pressure difference")
    return [f"the cases differ in kind ({'; '.join(out)}): differences are expected, not regressions"] if out else []


def _fmt(v) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:.6g}"
    return str(v)


def _summary(folder: Path) -> dict:
    path = folder / "summary.json" if folder.is_dir() else folder
    if not path.exists():
        raise CaseError(f"{folder}: no summary.json (got {'a folder' if folder.is_dir() else 'no such path'}); "
                        "expected an output folder written by `fvsolver run`; run the case first")
    try:
        return json.loads(path.read_text())
    except json.JSONDecodeError as exc:
        raise CaseError(f"{path}: not valid JSON ({exc}); expected a summary written by `fvsolver run`") from exc


def _history(folder: Path) -> dict[str, np.ndarray]:
    path = folder / "history.csv"
    if not path.exists():
        return {}
    with path.open() as fh:
        rows = list(csv.DictReader(fh))
    out = {}
    for name in rows[0] if rows else []:
        try:
            out[name] = np.array([float(r[name]) if r[name] != "" else np.nan for r in rows])
        except ValueError:
            continue  # a text column
    return out


def _fields(folder: Path) -> list[tuple[float, Path]]:
    """(time, VTU path) of every entry of fields.pvd (none without the file)."""
    pvd = folder / "fields.pvd"
    if not pvd.exists():
        return []
    return [(float(d.get("timestep")), folder / d.get("file")) for d in ET.parse(pvd).iter("DataSet")]


def _stall_kinds(reason) -> tuple:
    if not reason:
        return ()
    return tuple(kind for key, kind in STALL_KINDS.items() if key in reason)


def compare(new: str | Path, baseline: str | Path, rtol: float = 1e-3, temperature_tol: float = 0.01,
            history_rtol: float = 1e-2) -> Comparison:
    """Compare the run in ``new`` against the one in ``baseline`` (output folders).

    Parameters
    ----------
    rtol : relative tolerance of the key results (times, pressure differences, pressures)
    temperature_tol : K, absolute tolerance of temperatures (summary, histories, field)
    history_rtol : tolerance of the pressure-difference history, relative to the baseline's
        largest value or the target, whichever is larger
    """
    for name, v in (("rtol", rtol), ("temperature_tol", temperature_tol), ("history_rtol", history_rtol)):
        if not (isinstance(v, int | float) and math.isfinite(v) and v >= 0.0):
            raise CaseError(f"compare: {name} = {v!r}, expected a finite number >= 0")
    new, baseline = Path(new), Path(baseline)
    if (new / "sweep.json").exists() and (baseline / "sweep.json").exists():
        return _compare_sweeps(new, baseline, rtol, temperature_tol, history_rtol)
    sn, sb = _summary(new), _summary(baseline)
    out = Comparison(new, baseline, warnings=kind_differences(new, baseline))
    add = out.checks.append
    for key in EXACT_KEYS:
        a, b = sb.get(key), sn.get(key)
        if key == "outcome" and a is None and b is None:
            continue  # not a running device
        add(Check(key, a, b, None, "equal", a == b))
    kb, kn = _stall_kinds(sb.get("stall_reason")), _stall_kinds(sn.get("stall_reason"))
    add(Check("stall reason (kinds)", ", ".join(kb) or None, ", ".join(kn) or None, None, "equal", kb == kn))
    both_reached = bool(sb.get("target_reached")) and bool(sn.get("target_reached"))
    relative = [(k, f"rel {rtol:g}") for k in RELATIVE_KEYS]
    absolute = [(k, f"{temperature_tol:g} K") for k in TEMPERATURE_KEYS]
    for key, tolerance in relative + absolute:
        a, b = sb.get(key), sn.get(key)
        if a is None and b is None:
            continue
        if key == "max_pressure_drop_pa" and both_reached:
            # a run stops on the step after its target: the largest value is that step's overshoot
            add(Check(key, a, b, None, tolerance, None, "past the target: the last step's overshoot"))
        elif a is None or b is None:
            add(Check(key, a, b, None, tolerance, False, "missing on one side"))
        elif key in RELATIVE_KEYS:
            diff = abs(b - a) / max(abs(a), 1e-300)
            add(Check(key, a, b, diff, tolerance, diff <= rtol))
        else:
            add(Check(key, a, b, abs(b - a), tolerance, abs(b - a) <= temperature_tol))
    _compare_histories(out, _history(baseline), _history(new), sb, history_rtol, temperature_tol)
    _compare_fields(out, baseline, new, temperature_tol)
    return out


def _compare_histories(out, hb, hn, sb, history_rtol, temperature_tol) -> None:
    if "time_s" not in hb or "time_s" not in hn:
        out.checks.append(Check("histories", None, None, None, "", None, "history.csv missing"))
        return
    tb, tn = hb["time_s"], hn["time_s"]
    span = (tb >= max(tb[0], tn[0])) & (tb <= min(tb[-1], tn[-1]))
    if span.sum() < 2:
        out.checks.append(Check("histories", None, None, None, "", None, "the runs cover no common time span"))
        return
    names = [n for n in hb if n in hn and (n == "pressure_drop_pa" or n.endswith("_temperature_k"))]
    for name in names:
        a = hb[name][span]
        b = np.interp(tb[span], tn, hn[name])
        worst = float(np.nanmax(np.abs(b - a)))
        if name == "pressure_drop_pa":
            scale = max(float(np.nanmax(np.abs(hb[name]))), abs(sb.get("target_pressure_drop_pa") or 0.0), 1e-300)
            # each side's own largest value over the common span (not the new run interpolated)
            own = (tn >= tb[span][0]) & (tn <= tb[span][-1])
            out.checks.append(Check(f"history {name} (largest)", float(np.nanmax(a)), float(np.nanmax(hn[name][own])),
                                    worst / scale, f"rel {history_rtol:g}", worst / scale <= history_rtol,
                                    "difference: the worst step, relative to the largest value or the target"))
        else:
            out.checks.append(Check(f"history {name} (worst step)", None, None, worst, f"{temperature_tol:g} K",
                                    worst <= temperature_tol))


def _compare_fields(out, baseline, new, temperature_tol) -> None:
    """The temperature field at the latest output time after the start that both runs wrote
    (a device run that stops at its target ends at a time of its own, so its last field is
    compared only when both stopped at the same time)."""
    from fvsolver.vtk_io import read_cell_field

    fb, fn = _fields(baseline), _fields(new)
    name = "temperature field"
    if not fb or not fn:
        out.checks.append(Check(name, None, None, None, "", None, "fields.pvd missing"))
        return
    common = [(t, pb, pn) for t, pb in fb for tn, pn in fn
              if t > 0.0 and abs(t - tn) <= 1e-9 * max(abs(t), 1.0)]
    if not common:
        out.checks.append(Check(name, None, None, None, "", None, "no output time after the start in common"))
        return
    t, pb, pn = max(common)
    name = f"temperature field at t = {t:.6g} s"
    Tb, Tn = read_cell_field(pb, "temperature"), read_cell_field(pn, "temperature")
    cb, cn = read_cell_field(pb, "cell_volume"), read_cell_field(pn, "cell_volume")
    if Tb.shape != Tn.shape or not np.allclose(cb, cn, rtol=1e-9, atol=0.0):
        out.checks.append(Check(name, f"{Tb.size} cells", f"{Tn.size} cells", None, "", None,
                                "the meshes differ (a geometry or mesh change)"))
        return
    worst = float(np.max(np.abs(Tn - Tb)))
    out.checks.append(Check(name + " (largest cell difference)", None, None, worst, f"{temperature_tol:g} K",
                            worst <= temperature_tol))


def _compare_sweeps(new: Path, baseline: Path, rtol, temperature_tol, history_rtol) -> Comparison:
    """Two sweep folders: the same grid, then every run against its baseline run (rows prefixed
    with the run's varied values)."""
    jn, jb = (json.loads((f / "sweep.json").read_text()) for f in (new, baseline))
    out = Comparison(new, baseline)
    same_grid = jn["vary"] == jb["vary"]
    out.checks.append(Check("sweep grid (varied keys and values)", json.dumps(jb["vary"]), json.dumps(jn["vary"]),
                            None, "equal", same_grid))
    if not same_grid:
        return out
    keys = list(jb["vary"])
    for rb, rn in zip(jb["rows"], jn["rows"]):
        label = ", ".join(f"{k} = {rb[k]}" for k in keys)
        if rb.get("folder") is None or rn.get("folder") is None:
            out.checks.append(Check(f"[{label}] run folder", None, None, None, "", None, "not written"))
            continue
        sub = compare(new / rn["folder"], baseline / rb["folder"], rtol, temperature_tol, history_rtol)
        for c in sub.checks:
            c.quantity = f"[{label}] {c.quantity}"
            out.checks.append(c)
    return out
