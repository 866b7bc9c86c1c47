"""Run the verification cases, fit observed orders, and report (table, JSON, plot)."""
from __future__ import annotations

import json
import time
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from fvsolver.verification.cases import CASES, VerificationCase

ORDER_TOLERANCE = 0.15
BALANCE_TOLERANCE = 1e-10


@dataclass(frozen=True)
class Check:
    """One row of the verification table."""

    case: str
    norm: str
    error: float
    observed_order: float | None
    expected_order: float | None
    requirement: str
    passed: bool
    source: str


@dataclass(frozen=True)
class CaseReport:
    case: str
    source: str
    h: list
    n_cells: list
    errors: dict
    checks: list
    seconds: float


def observed_order(h, errors) -> float:
    """Least-squares slope of log(error) against log(h)."""
    return float(np.polyfit(np.log(h), np.log(errors), 1)[0])


def run_case(case: VerificationCase, slow: bool = False) -> CaseReport:
    start = time.perf_counter()
    levels = case.levels + (case.slow_levels if slow else ())
    results = [case.run(level) for level in levels]
    h = [r.h for r in results]
    checks = []
    for norm in case.norms:
        errors = [r.errors[norm.name] for r in results]
        finest = errors[-1]
        if norm.order is None:
            ok = max(errors) <= norm.cap
            checks.append(Check(case.name, norm.name, finest, None, None, f"error <= {norm.cap:g} on every mesh",
                                bool(ok), case.source))
            continue
        p = observed_order(h, errors)
        order_ok = p >= norm.order if norm.at_least else abs(p - norm.order) < ORDER_TOLERANCE
        need = f"p >= {norm.order:g}" if norm.at_least else f"|p - {norm.order:g}| < {ORDER_TOLERANCE:g}"
        checks.append(Check(case.name, norm.name, finest, p, norm.order, f"{need}, error <= {norm.cap:g}",
                            bool(order_ok and finest <= norm.cap), case.source))
    balance = max(r.balance for r in results)
    checks.append(Check(case.name, "energy_balance", balance, None, None, f"<= {BALANCE_TOLERANCE:g} every step",
                        bool(balance <= BALANCE_TOLERANCE), "conservation (discrete identity)"))
    errors = {norm.name: [r.errors[norm.name] for r in results] for norm in case.norms}
    return CaseReport(case.name, case.source, h, [r.n_cells for r in results], errors, checks,
                      time.perf_counter() - start)


def run_all(names: list[str] | None = None, slow: bool = False) -> list[CaseReport]:
    """Run every case (or those whose name contains one of ``names``)."""
    chosen = [c for c in CASES if not names or any(n in c.name for n in names)]
    return [run_case(c, slow) for c in chosen]


def format_table(reports: list[CaseReport]) -> str:
    """A plain-text table: case, norm, finest error, observed order, requirement, pass."""
    header = ("case", "norm", "error", "order", "requirement", "pass")
    rows = []
    for rep in reports:
        for c in rep.checks:
            order = "-" if c.observed_order is None else f"{c.observed_order:.3f}"
            rows.append((c.case, c.norm, f"{c.error:.3e}", order, c.requirement, "yes" if c.passed else "NO"))
    widths = [max(len(str(r[i])) for r in rows + [header]) for i in range(len(header))]
    line = "  ".join(f"{{:<{w}}}" for w in widths)
    out = [line.format(*header), line.format(*("-" * w for w in widths))]
    out += [line.format(*r) for r in rows]
    n_fail = sum(not c.passed for rep in reports for c in rep.checks)
    n_all = sum(len(rep.checks) for rep in reports)
    out.append(f"{n_all - n_fail} passed, {n_fail} failed")
    return "\n".join(out)


def write_outputs(reports: list[CaseReport], folder: Path) -> tuple[Path, Path]:
    """Write ``verification.json`` and ``convergence.png`` into ``folder`` (atomically)."""
    from fvsolver.outputs.files import atomic_write_text
    from fvsolver.plotting import convergence_plot

    folder.mkdir(parents=True, exist_ok=True)
    payload = {
        "passed": all(c.passed for rep in reports for c in rep.checks),
        "order_tolerance": ORDER_TOLERANCE,
        "cases": [asdict(rep) for rep in reports],
    }
    json_path = folder / "verification.json"
    atomic_write_text(json_path, json.dumps(payload, indent=2))
    png_path = folder / "convergence.png"
    convergence_plot(reports, png_path)
    return json_path, png_path
