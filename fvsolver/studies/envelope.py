"""The climate envelope: one case over a grid of room temperature and relative humidity.

``fvsolver envelope CASE --temperature "linspace(288.15,308.15,10)" --humidity "linspace(0.3,0.98,10)"`` runs the grid
through :func:`fvsolver.sweeps.sweep` (so every room is validated before the first run and each
run keeps its folder under ``runs/``) and adds the operating map:

- ``envelope.csv``: one row per room: temperature, humidity, wet-bulb temperature, the outcome,
  whether the device runs there and the headline result;
- ``envelope.png``: the headline result as filled contours over the rooms where the device runs,
  the boundary where it stops, and each run's outcome as its own marker;
- ``envelope.md``: the range of rooms where it runs, per air temperature, and the cautions.

The device "runs" in a room when the run has a finite headline result there (a time to target,
a period); the headline is looked up by name (:mod:`fvsolver.studies.headline`).
"""
from __future__ import annotations

import json
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fvsolver.case.loader import Case
from fvsolver.errors import CaseError
from fvsolver.outputs.files import atomic_write_text
from fvsolver.studies import headline as hl
from fvsolver.sweeps import Vary, _table, parse_vary, sweep

TEMPERATURE_KEY = "room.air_temperature"
HUMIDITY_KEY = "room.relative_humidity"
ENVELOPE_REPORT_NAME = "envelope.md"


@dataclass(frozen=True)
class Envelope:
    """The operating map of a case.

    Attributes
    ----------
    temperatures : (n_t,) K, the room air temperatures
    humidities : (n_h,) the relative humidities
    values : (n_t, n_h) the headline result (NaN where the device does not run)
    outcomes : (n_t, n_h) the outcome of each run, in words
    rows : one dict per room, as in envelope.csv (temperature slowest)
    result : the headline
    """

    temperatures: np.ndarray
    humidities: np.ndarray
    values: np.ndarray
    outcomes: np.ndarray
    rows: list[dict]
    result: hl.Headline

    @property
    def completed(self) -> np.ndarray:
        """(n_t, n_h) bool, True where the run completed (it ran or it stopped; not failed)."""
        return np.array([r["status"] == "complete" for r in self.rows]).reshape(self.values.shape)

    @property
    def runs(self) -> np.ndarray:
        """(n_t, n_h) bool, True where the device runs."""
        return np.isfinite(self.values)


def parse_axis(key: str, spec: str, option: str) -> Vary:
    """``linspace(START,STOP,N)`` or ``V1,V2,...`` for one axis of the map (at least two values)."""
    try:
        vary = parse_vary(f"{key}={spec}")
    except CaseError as exc:
        raise CaseError(str(exc).replace(f"--vary '{key}={spec}'", f"{option} {spec!r}")) from None
    values = vary.values
    if len(values) < 2 or not all(isinstance(v, int | float) and not isinstance(v, bool) for v in values):
        raise CaseError(f"{option} {spec!r}: expected at least two numbers (linspace(START,STOP,N) or V1,V2,...) for a map")
    if len(set(values)) != len(values):
        raise CaseError(f"{option} {spec!r}: a value is given twice; give each once")
    return Vary(key, tuple(sorted(float(v) for v in values)))


def _summary_of(folder: Path | None, row: Mapping) -> Mapping:
    """The run's own summary.json where it was written (it carries every headline), else the row."""
    if folder is not None and row.get("folder"):
        path = folder / row["folder"] / "summary.json"
        if path.exists():
            return json.loads(path.read_text())
    return row


def build_envelope(rows: Sequence[Mapping], temperatures: Sequence[float], humidities: Sequence[float],
                   result: str, folder: Path | None = None) -> Envelope:
    """The map from a sweep's rows (temperature slowest, as :func:`fvsolver.sweeps.sweep` orders them)."""
    head = hl.headline(result)
    n_t, n_h = len(temperatures), len(humidities)
    if len(rows) != n_t * n_h:
        raise ValueError(f"expected {n_t * n_h} rows for a {n_t} x {n_h} map, got {len(rows)}")
    values = np.full((n_t, n_h), np.nan)
    outcomes = np.empty((n_t, n_h), dtype=object)
    table = []
    for k, row in enumerate(rows):
        i, j = divmod(k, n_h)
        summary = _summary_of(folder, row)
        v = hl.value(summary, result)
        outcomes[i, j] = hl.outcome(row if row.get("status") != "complete" else summary)
        if v is None and result == "period_s" and outcomes[i, j] == "running" and summary.get("last_period_s"):
            # still tipping at the end, its period not yet settled: mapped by its last period, marked
            v = hl.value(summary, "last_period_s")
            outcomes[i, j] = "running, not settled"
        values[i, j] = np.nan if v is None else v
        room = summary.get("room") or {}
        table.append({"run": row["run"], "air_temperature_k": float(temperatures[i]),
                      "air_temperature_c": round(float(temperatures[i]) - 273.15, 6),
                      "relative_humidity": float(humidities[j]),
                      "wet_bulb_temperature_k": room.get("wet_bulb_temperature_k"),
                      "outcome": outcomes[i, j], "runs": v is not None, result: v,
                      "status": row.get("status"), "reason": row.get("reason") or row.get("stall_reason"),
                      "folder": row.get("folder")})
    return Envelope(np.asarray(temperatures, float), np.asarray(humidities, float), values, outcomes, table, head)


def _spans(humidities: np.ndarray, runs: np.ndarray) -> list[tuple[float, float]]:
    """The humidity ranges (first, last) of consecutive grid points where the device runs."""
    spans, start = [], None
    for j, ok in enumerate(runs):
        if ok and start is None:
            start = j
        if start is not None and (not ok or j == len(runs) - 1):
            end = j if ok else j - 1
            spans.append((float(humidities[start]), float(humidities[end])))
            start = None
    return spans


def _show(head: hl.Headline, v: float) -> str:
    if head.unit == "s":
        from fvsolver.outputs.report import format_duration

        return format_duration(v)
    return f"{v + head.offset:.4g} {head.shown_unit}".strip()


def range_sentences(env: Envelope) -> list[str]:
    """The rooms where the device runs, in words: the overall count, then one line per air
    temperature with the humidity ranges and the headline's range there."""
    runs = env.runs
    n = runs.size
    lines = [f"The device runs in {int(runs.sum())} of {n} rooms "
             f"({env.temperatures[0] - 273.15:.1f} to {env.temperatures[-1] - 273.15:.1f} °C, "
             f"{100 * env.humidities[0]:.0f} to {100 * env.humidities[-1]:.0f} % relative humidity)."]
    if runs.any():
        fin = env.values[runs]
        lines.append(f"Its {env.result.label} there ranges from {_show(env.result, fin.min())} to "
                     f"{_show(env.result, fin.max())}.")
    return lines


def write_envelope_report(folder: Path, title: str, env: Envelope, plot: str | None, engine_text: str) -> Path:
    """``envelope.md``: where the device runs, per air temperature, the outcomes and the cautions."""
    from fvsolver.outputs.report import CAUTIONS

    head = env.result
    lines = [f"# {title}", "", "## Where it runs", "", " ".join(range_sentences(env)), "",
             f"| air temperature | runs at relative humidity | {head.label} there | outcomes elsewhere |",
             "|---|---|---|---|"]
    for i, t in enumerate(env.temperatures):
        runs = env.runs[i]
        spans = _spans(env.humidities, runs)
        where = ", ".join(f"{100 * a:.0f} %" if a == b else f"{100 * a:.0f}-{100 * b:.0f} %" for a, b in spans) or "nowhere"
        fin = env.values[i][runs]
        span = "" if not fin.size else (_show(head, fin.min()) if fin.min() == fin.max()
                                        else f"{_show(head, fin.min())} to {_show(head, fin.max())}")
        others = sorted({str(o) for o, ok in zip(env.outcomes[i], runs) if not ok})
        lines.append(f"| {t - 273.15:.1f} °C | {where} | {span} | {', '.join(others) or '-'} |")
    counts: dict[str, int] = {}
    for o in env.outcomes.ravel():
        counts[str(o)] = counts.get(str(o), 0) + 1
    lines += ["", "Outcomes: " + ", ".join(f"{k} {v}" for k, v in counts.items()) + ".", ""]
    failed = [r for r in env.rows if r["status"] != "complete"]
    if failed:
        lines += ["Failed runs (each kept as a row of envelope.csv):", ""]
        lines += [f"- run {r['run']} ({r['air_temperature_c']:.1f} °C, {100 * r['relative_humidity']:.0f} %): "
                  f"{r['reason']}" for r in failed]
        lines.append("")
    if plot:
        lines += ["## Map", "", f"![operating map]({plot})", ""]
    lines += ["## How it was made", "",
              f"Each room is one run of the case with `{TEMPERATURE_KEY}` and `{HUMIDITY_KEY}` changed "
              f"(other inputs as in the case), run on {engine_text}. The device counts as running where "
              f"its run has a {head.label} (`{head.name}`). The per-run table is `envelope.csv`; each run's "
              "outputs are in `runs/`; `sweep.md` has the safety figures over all runs.", "",
              "## Cautions", "", CAUTIONS]
    path = folder / ENVELOPE_REPORT_NAME
    atomic_write_text(path, "\n".join(lines))
    return path


def envelope(case: Case, temperatures: Vary, humidities: Vary, out: str | Path, result: str = hl.DEFAULT_HEADLINE,
             overwrite: bool = False, jobs: int = 1, engine=None,
             progress: Callable | None = None) -> Envelope:
    """Run ``case`` over every room of ``temperatures`` x ``humidities`` and write the map.

    Parameters
    ----------
    temperatures, humidities : the axes (see :func:`parse_axis`); temperatures in K
    out : the output folder
    result : the headline to map, by its summary key (see :mod:`fvsolver.studies.headline`)
    jobs : local worker processes (as ``fvsolver sweep --jobs``)
    engine : a :class:`fvsolver.studies.engine.DaskEngine`, or None to run on this machine
    progress : callable(index, count, changes, row) after each run
    """
    from fvsolver.plotting import envelope_plot

    hl.headline(result)  # a bad name fails before any run
    out = Path(out)
    rows = sweep(case, [temperatures, humidities], out, overwrite=overwrite, progress=progress, jobs=jobs,
                 engine=engine)
    env = build_envelope(rows, temperatures.values, humidities.values, result, out)
    atomic_write_text(out / "envelope.csv", _table(env.rows))
    name = case.path.name if case.path else "a case"
    envelope_plot(env.temperatures, env.humidities, env.values, env.outcomes, env.completed, out / "envelope.png",
                  label=f"{env.result.label} ({env.result.shown_unit})" if env.result.shown_unit else env.result.label,
                  offset=env.result.offset, title=f"operating map of {name}")
    engine_text = engine.description if engine is not None else (
        f"this machine ({jobs} worker processes)" if jobs > 1 else "this machine, one run after the other")
    write_envelope_report(out, f"Climate envelope of {name}", env, "envelope.png", engine_text)
    return env

