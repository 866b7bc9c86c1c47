"""``sweep.md``: a sweep's runs in one readable page, with the safety figures and cautions."""
from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path

from fvsolver.outputs.files import atomic_write_text
from fvsolver.outputs.report import CAUTIONS, format_duration, format_pressure

SWEEP_REPORT_NAME = "sweep.md"


def _value(v) -> str:
    if isinstance(v, float):
        return f"{v:.6g}"  # never float noise such as 0.6000000000000001
    return str(v)


def _cell(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def _outcome(row: Mapping) -> str:
    if row.get("status") != "complete":
        return f"{row.get('status')}: {row.get('reason') or 'no reason recorded'}"
    if row.get("target_reached") is None:
        return "complete (no target)"
    if row["target_reached"]:
        return f"target at {format_duration(row.get('time_to_target_s'))}"
    return f"not reached: {row.get('stall_reason') or 'no reason recorded'}"


def _summary_paragraph(rows: Sequence[Mapping], keys: Sequence[str]) -> str:
    reached = [r for r in rows if r.get("target_reached")]
    stalled = [r for r in rows if r.get("status") == "complete" and r.get("target_reached") is False]
    failed = [r for r in rows if r.get("status") != "complete"]
    text = f"{len(rows)} runs: {len(reached)} reached the target, {len(stalled)} did not, {len(failed)} failed."
    if reached:
        fast = min(reached, key=lambda r: r["time_to_target_s"])
        slow = max(reached, key=lambda r: r["time_to_target_s"])
        where = lambda r: ", ".join(f"{k} = {_value(r[k])}" for k in keys)  # noqa: E731
        text += (f" Fastest: {format_duration(fast['time_to_target_s'])} ({where(fast)}); slowest: "
                 f"{format_duration(slow['time_to_target_s'])} ({where(slow)}).")
    return text


def write_sweep_report(folder: str | os.PathLike, title: str, keys: Sequence[str], rows: Sequence[Mapping],
                       plot: str | None, units: Mapping[str, str] | None = None) -> Path:
    """Write ``sweep.md`` into ``folder`` (atomically) and return its path.

    Parameters
    ----------
    title : the page's title
    keys : the swept key paths, in the order of the grid
    rows : the sweep's rows (as :func:`fvsolver.sweeps.sweep` returns them)
    plot : the sweep plot's file name relative to ``folder``, or None
    units : key path -> unit, shown in the table's heading
    """
    folder = Path(folder)
    lines = [f"# {title}", "", "## Result", "", _summary_paragraph(rows, keys), ""]
    units = units or {}
    head = ["run", *(f"{k} ({units[k]})" if units.get(k) else k for k in keys), "outcome",
            "largest internal pressure", "largest glass temperature", "warnings", "folder"]
    lines += ["| " + " | ".join(_cell(h) for h in head) + " |", "|" + "---|" * len(head)]
    for r in rows:
        glass = r.get("max_glass_temperature_k")
        cells = [r["run"], *(_value(r[k]) for k in keys), _outcome(r),
                 format_pressure(r.get("max_internal_pressure_pa")),
                 "n/a" if glass is None else f"{glass - 273.15:.1f} °C", r.get("warnings") or "none",
                 r.get("folder") or ""]
        lines.append("| " + " | ".join(_cell(c) for c in cells) + " |")
    lines.append("")
    if plot:
        lines += ["## Plot", "", f"![time to target]({plot})", ""]
    pressures = [r["max_internal_pressure_pa"] for r in rows if r.get("max_internal_pressure_pa") is not None]
    glasses = [r["max_glass_temperature_k"] for r in rows if r.get("max_glass_temperature_k") is not None]
    warned = [r for r in rows if r.get("warnings")]
    lines += ["## Safety figures", ""]
    lines.append(f"- Largest absolute internal pressure over all runs: {format_pressure(max(pressures))}."
                 if pressures else "- Largest internal pressure: not recorded.")
    lines.append(f"- Largest glass temperature over all runs: {max(glasses) - 273.15:.1f} °C."
                 if glasses else "- Largest glass temperature: not recorded.")
    lines.append(f"- Runs with warnings against the safety limits: {len(warned)}"
                 + (f" (runs {', '.join(str(r['run']) for r in warned)})." if warned else "."))
    lines += ["", "## Cautions", "", CAUTIONS]
    path = folder / SWEEP_REPORT_NAME
    atomic_write_text(path, "\n".join(lines))
    return path
