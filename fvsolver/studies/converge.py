"""Mesh and time-step studies: ``fvsolver converge CASE``.

The case is run on ``levels`` refinements in three studies: the mesh and the time tolerance
refined together (every cell count times ``ratio``, the tolerance divided by ``ratio**3``), the
mesh alone (the case's tolerance) and the time tolerance alone (the case's mesh).  The stepper
bounds each step's local error (BDF2: ~ dt^3), so its steps scale as tolerance^(1/3) and its
global error, ~ dt^2, as tolerance^(2/3): dividing the tolerance by ``ratio**3`` shortens the
steps by ``ratio`` with the cell size, and the spatial and time errors fall alike.  The time
study measures its order against the step size, taken as tolerance^(1/3).
Level 0 is the case itself, shared by the three studies. For every headline result the finest
three levels of each study give the apparent order, the extrapolated value and the grid
convergence index (:mod:`fvsolver.studies.gci`, Celik et al. 2008); with more levels, the
order of every consecutive three shows whether the results are in the asymptotic range.
"""
from __future__ import annotations

import json
import math
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path

from fvsolver.case.loader import Case, thaw, with_changes
from fvsolver.errors import CaseError
from fvsolver.outputs.files import atomic_write_text
from fvsolver.studies import headline as hl
from fvsolver.studies.gci import GridConvergence, grid_convergence

STUDIES = {"both": "mesh and time tolerance together", "mesh": "mesh alone", "time": "time tolerance alone"}
#: the results a study reports when they are in the runs' summaries
QUANTITIES = ("time_to_target_s", "period_s", "min_temperature_k", "max_temperature_k")
#: the formal spatial order of the finite-volume scheme (verified by the verification cases)
MESH_ORDER = 2.0
#: the tolerance falls by ratio**TIME_EXPONENT per level: the step then falls by ratio
TIME_EXPONENT = 3
#: consecutive apparent orders that differ by more than this fraction: not yet asymptotic
ORDER_SPREAD = 0.3
CONVERGE_REPORT_NAME = "converge.md"


@dataclass(frozen=True)
class Refinement:
    """One run of a study: mesh level and time level (0 is the case)."""

    mesh_level: int
    time_level: int
    changes: dict = field(hash=False, compare=False)

    @property
    def name(self) -> str:
        return f"mesh{self.mesh_level}_time{self.time_level}"


@dataclass(frozen=True)
class QuantityResult:
    """A quantity in one study: its values per level and the index of the finest three."""

    study: str
    quantity: str
    values: tuple
    sizes: tuple
    index: GridConvergence | None
    orders: tuple  # the apparent order of each consecutive three, coarsest first
    asymptotic: bool | None
    note: str


def mesh_keys(case: Case) -> dict[str, int]:
    """The case's cell counts that a refinement scales (those of its parametric shape)."""
    if "file" in case["geometry"]:
        raise CaseError(f"converge: the case reads its mesh from {case['geometry']['file']!r}; a refinement "
                        "study needs a parametric shape (geometry.shape) whose [mesh] cell counts it can scale")
    return {k: int(v) for k, v in case["mesh"].items() if k != "refinement" and isinstance(v, int)}


def plan(case: Case, levels: int = 3, ratio: float = 1.5, studies: Sequence[str] = tuple(STUDIES)) -> dict:
    """The runs of each study: ``{study: [Refinement, ...]}`` from coarsest to finest, each
    validated now (a bad refinement fails before any run)."""
    if not (isinstance(levels, int) and 3 <= levels <= 8):
        raise CaseError(f"--levels: got {levels!r}, expected a whole number from 3 to 8 (three levels at least "
                        "for an order and an index)")
    if not (isinstance(ratio, int | float) and 1.1 <= ratio <= 4.0):
        raise CaseError(f"--ratio: got {ratio!r}, expected a refinement ratio from 1.1 to 4 (the procedure asks "
                        "for more than 1.3)")
    unknown = [s for s in studies if s not in STUDIES]
    if unknown or not studies:
        raise CaseError(f"--study: got {unknown or list(studies)}, expected some of {', '.join(STUDIES)}")
    counts = mesh_keys(case)
    tolerance = float(case["numerics"]["tolerance"])

    def refinement(m: int, t: int) -> Refinement:
        changes = {f"mesh.{k}": max(int(round(v * ratio ** m)), v) for k, v in counts.items()} if m else {}
        if t:
            changes["numerics.tolerance"] = tolerance / ratio ** (TIME_EXPONENT * t)
        with_changes(case, changes)  # validated now
        return Refinement(m, t, changes)

    out = {}
    for study in studies:
        if study == "both":
            out[study] = [refinement(k, k) for k in range(levels)]
        elif study == "mesh":
            out[study] = [refinement(k, 0) for k in range(levels)]
        else:
            out[study] = [refinement(0, k) for k in range(levels)]
    return out


def analyse(study: str, quantity: str, summaries: Sequence[dict], tolerances: Sequence[float]) -> QuantityResult:
    """The convergence of ``quantity`` over a study's runs (coarsest first)."""
    values = [hl.value(s, quantity) for s in summaries]
    if study == "time":  # the step's size, ~ tolerance^(1/TIME_EXPONENT)
        sizes = tuple(float(t) ** (1.0 / TIME_EXPONENT) for t in tolerances)
        size_of = {"sizes": sizes[-3:]}
    else:
        sizes = tuple(float(s.get("n_cells") or math.nan) for s in summaries)
        size_of = {"cells": sizes[-3:]}
    if any(v is None for v in values):
        missing = [i for i, v in enumerate(values) if v is None]
        return QuantityResult(study, quantity, tuple(values), sizes, None, (), None,
                              f"no value at level(s) {missing} (a run failed or the result does not occur)")
    try:
        index = grid_convergence(values[-3:], **size_of)
    except CaseError as exc:
        return QuantityResult(study, quantity, tuple(values), sizes, None, (), None, str(exc))
    orders = []
    for k in range(len(values) - 2):
        key = "sizes" if study == "time" else "cells"
        try:
            orders.append(grid_convergence(values[k:k + 3], **{key: sizes[k:k + 3]}).order)
        except CaseError:
            orders.append(math.nan)
    notes = [index.note] if index.note else []
    asymptotic = None
    if math.isfinite(index.order):
        asymptotic = True
        if len(orders) >= 2 and all(math.isfinite(o) for o in orders[-2:]):
            a, b = orders[-2:]
            if abs(a - b) > ORDER_SPREAD * max(abs(a), abs(b)):
                asymptotic = False
                notes.append(f"the apparent order changes from {a:.2f} to {b:.2f} between the last two triplets: "
                             "not yet in the asymptotic range; refine further before trusting the index")
        if study != "time" and not (0.5 * MESH_ORDER <= index.order <= 2.0 * MESH_ORDER):
            asymptotic = False
            notes.append(f"the apparent order {index.order:.2f} is far from the scheme's {MESH_ORDER:g}: likely not "
                         "in the asymptotic range (or a time error mixed in); refine further before trusting the index")
    return QuantityResult(study, quantity, tuple(values), sizes, index, tuple(orders), asymptotic, "; ".join(notes))


def _fmt(v, digits: int = 6) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "n/a"
    return f"{v:.{digits}g}"


def table(results: Sequence[QuantityResult]) -> str:
    """A plain-text table of the results (one line per study and quantity)."""
    head = f"{'study':<6} {'quantity':<20} {'finest':>12} {'order p':>8} {'extrapolated':>13} {'e_a %':>7} " \
           f"{'GCI %':>8} {'+/-':>10}  convergence"
    lines = [head, "-" * len(head)]
    for r in results:
        g = r.index
        if g is None:
            lines.append(f"{r.study:<6} {r.quantity:<20} {'':>12} {'':>8} {'':>13} {'':>7} {'':>8} {'':>10}  {r.note}")
            continue
        kind = g.convergence + ("" if r.asymptotic in (None, True) else ", not asymptotic")
        lines.append(f"{r.study:<6} {r.quantity:<20} {_fmt(g.values[0], 8):>12} {_fmt(g.order, 3):>8} "
                     f"{_fmt(g.extrapolated, 8):>13} {_fmt(100 * g.relative_error, 3):>7} "
                     f"{_fmt(100 * g.gci_fine, 3):>8} {_fmt(g.uncertainty, 3):>10}  {kind}")
    return "\n".join(lines)


def write_converge_report(folder: Path, title: str, runs: list[dict], results: Sequence[QuantityResult],
                          ratio: float, quantities: Sequence[str] = QUANTITIES) -> Path:
    lines = [f"# {title}", "",
             f"Refinement ratio {ratio:g} per level in every cell count; the time tolerance divided by "
             f"{ratio ** TIME_EXPONENT:g} per level (the steps, which bound each step's local error, then "
             f"shorten by {ratio:g}). Grid convergence index by Celik et al., J. Fluids Eng. 130 (2008) "
             "078001 (safety factor 1.25, from the finest three levels of each study; representative cell "
             "size h = N^(-1/2) for the axisymmetric mesh; the step, as tolerance^(1/3), for the time "
             "study).", "",
             "## Results", "", "```", table(results), "```", ""]
    notes = [f"- {r.study} / {r.quantity}: {r.note}" for r in results if r.note]
    if notes:
        lines += ["Notes:", "", *notes, ""]
    shown = [q for q in quantities if any(r.get(q) is not None for r in runs)]
    lines += ["## Runs", "", "| run | cells | tolerance (K) | " + " | ".join(shown) + " | wall time (s) | status |",
              "|---" * (5 + len(shown)) + "|"]
    for r in runs:
        lines.append(f"| {r['run']} | {r['n_cells']} | {r['tolerance']:.4g} | "
                     + " | ".join(_fmt(r.get(q), 8) for q in shown)
                     + f" | {r['wall_time_s']:.1f} | {r['status']} |")
    lines += ["", "Orders of every consecutive three levels (coarsest first):", ""]
    lines += [f"- {r.study} / {r.quantity}: " + ", ".join(_fmt(o, 3) for o in r.orders) for r in results if r.orders]
    path = folder / CONVERGE_REPORT_NAME
    atomic_write_text(path, "\n".join(lines) + "\n")
    return path


def converge(case: Case, out: str | Path | None, levels: int = 3, ratio: float = 1.5,
             studies: Sequence[str] = tuple(STUDIES), quantities: Sequence[str] = QUANTITIES,
             overwrite: bool = False, engine=None, progress: Callable | None = None) -> tuple[list[dict], list]:
    """Run the refinement studies of ``case`` and analyse them.

    Parameters
    ----------
    out : output folder (runs/ with one folder per run, converge.csv, converge.json, converge.md)
    levels : refinements per study (3 or more), level 0 being the case
    ratio : refinement ratio of the cell counts per level
    engine : a LocalEngine or DaskEngine (default: one run after the other here)
    progress : callable(done, count, name, row) after each run

    Returns
    -------
    (runs, results) : one dict per distinct run, and one QuantityResult per study and quantity
    """
    from fvsolver.pipeline import prepare_output
    from fvsolver.studies.engine import LocalEngine
    from fvsolver.sweeps import _execute_in_worker, _table

    for q in quantities:
        hl.headline(q)
    runs_of = plan(case, levels, ratio, studies)
    distinct = {r.name: r for refs in runs_of.values() for r in refs}
    names = sorted(distinct, key=lambda n: (distinct[n].mesh_level + distinct[n].time_level, n))
    folder = prepare_output(Path(out), overwrite) if out is not None else None
    base = (case.path, case.text, None if case.text else thaw(case.data))
    calls = [(base, distinct[n].changes, None if folder is None else (folder / "runs" / n).resolve(), True, False)
             for n in names]
    tolerance = float(case["numerics"]["tolerance"])
    summaries: dict[str, dict] = {}
    rows: dict[str, dict] = {}

    def record(i: int, result) -> None:
        summary, reason, seconds = result
        name = names[i]
        ref = distinct[name]
        summaries[name] = summary
        rows[name] = {"run": name, "mesh_level": ref.mesh_level, "time_level": ref.time_level,
                      "n_cells": summary.get("n_cells"), "tolerance": tolerance / ratio ** (TIME_EXPONENT * ref.time_level),
                      **{q: hl.value(summary, q) for q in quantities}, "status": summary.get("status"),
                      "reason": reason or summary.get("reason"), "wall_time_s": round(seconds, 3)}
        if progress is not None:
            progress(len(rows), len(names), name, rows[name])

    engine = engine if engine is not None else LocalEngine(1)
    engine.map(_execute_in_worker, calls, record,
               lambda i, exc: ({"status": "failed"}, f"{type(exc).__name__}: {exc}", 0.0))
    runs = [rows[n] for n in names]
    results = []
    for study, refs in runs_of.items():
        for q in quantities:
            if all(hl.value(summaries[r.name], q) is None for r in refs):
                continue  # a result these runs do not have (a period of a device that only reaches a target)
            results.append(analyse(study, q, [summaries[r.name] for r in refs],
                                   [tolerance / ratio ** (TIME_EXPONENT * r.time_level) for r in refs]))
    if folder is not None:
        atomic_write_text(folder / "converge.csv", _table(runs))
        info = {"case_file": str(case.path) if case.path else None, "case_sha256": case.sha256, "levels": levels,
                "ratio": ratio, "runs": runs,
                "results": [{**{k: v for k, v in asdict(r).items() if k != "index"},
                             "index": None if r.index is None else asdict(r.index)} for r in results]}
        atomic_write_text(folder / "converge.json", json.dumps(info, indent=2, default=str))
        name = case.path.name if case.path else "a case"
        write_converge_report(folder, f"Refinement study of {name}", runs, results, ratio, quantities)
    return runs, results
