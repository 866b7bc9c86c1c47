"""Calibration to measurements: ``fvsolver fit CASE --data MEASURED.csv --fit KEY[=LOW:HIGH]``.

The measured history is a CSV with a ``time_s`` column and one or more columns named as in a
run's history.csv (``pressure_drop_pa``, ``mean_cap_temperature_k``, ...). Each trial runs the
case with the fitted keys changed, to the last measured time (a target does not stop it), and
compares the computed columns at the measured times (each trial's steps are no longer than the
measured spacing, so that the interpolated history moves smoothly with the keys). The keys are fitted by bounded nonlinear
least squares (``scipy.optimize.least_squares``, trust-region reflective); each column's
residuals are divided by the measured column's range so that columns in different units weigh
alike. Confidence intervals come from the Jacobian at the optimum:

.. math:: \\mathrm{cov} = s^2 (J^T J)^{-1}, \\quad s^2 = \\frac{\\sum r_i^2}{m - n}, \\quad
          x_k \\pm t_{0.975,\\, m-n} \\sqrt{\\mathrm{cov}_{kk}}

(linearised: fair when the residuals are small and the model near-linear over the interval).
"""
from __future__ import annotations

import csv
import json
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fvsolver.case.loader import Case, CaseErrors, with_changes
from fvsolver.errors import CaseError, FvsolverError
from fvsolver.outputs.files import atomic_write_text

FIT_REPORT_NAME = "fit.md"
#: relative finite-difference step of the Jacobian: large enough to step over the small
#: jumps that adaptive time stepping puts into a run's output
DIFF_STEP = 1e-2
#: relative change of the fitted values at which the fit stops (far below any interval)
XTOL = 1e-4


@dataclass(frozen=True)
class FitKey:
    """A fitted key: its dotted path and bounds."""

    path: str
    low: float
    high: float
    start: float


@dataclass(frozen=True)
class Measured:
    """A measured history: times (n,) s and columns name -> (n,) values."""

    time: np.ndarray
    columns: dict

    @property
    def size(self) -> int:
        return sum(len(v) for v in self.columns.values())


@dataclass(frozen=True)
class FitResult:
    """What a fit found.

    Attributes
    ----------
    keys : the fitted keys
    values : (n,) the fitted values
    intervals : (n, 2) the 95 % confidence intervals
    standard_errors : (n,)
    correlation : (n, n)
    residuals : name -> (m,) computed - measured, in the column's unit
    computed : name -> (m,) the model at the measured times, at the fitted values
    rms : name -> the root-mean-square residual of each column
    runs : model runs made
    status : scipy's message
    at_bound : (n,) bool, a value on its bound (its interval then means little)
    """

    keys: tuple
    values: np.ndarray
    intervals: np.ndarray
    standard_errors: np.ndarray
    correlation: np.ndarray
    residuals: dict
    computed: dict
    rms: dict
    runs: int
    status: str
    at_bound: np.ndarray


def parse_fit(text: str, case: Case) -> FitKey:
    """``KEY.PATH`` (bounds: a tenth and ten times the case's value) or ``KEY.PATH=LOW:HIGH``."""
    where = f"--fit {text!r}"
    path, _, spec = (s.strip() for s in text.partition("="))
    node = case.data
    for part in path.split("."):
        if not isinstance(node, Mapping) or part not in node:
            raise CaseError(f"{where}: the case has no value at {path!r} (after defaults); fit a number the "
                            "case holds, e.g. fluid.accommodation_coefficient or room.air_speed")
        node = node[part]
    if isinstance(node, bool) or not isinstance(node, int | float):
        raise CaseError(f"{where}: {path} is {node!r}, expected a number to fit")
    start = float(node)
    if spec:
        try:
            low, high = (float(v) for v in spec.split(":"))
        except ValueError:
            raise CaseError(f"{where}: bounds {spec!r}, expected LOW:HIGH with two numbers") from None
    elif start > 0:
        low, high = start / 10.0, start * 10.0
    else:
        raise CaseError(f"{where}: the case's value is {start:g}; give bounds as {path}=LOW:HIGH")
    if not low < high:
        raise CaseError(f"{where}: LOW {low:g} must be below HIGH {high:g}")
    for bound in (low, high):
        try:
            with_changes(case, {path: bound})
        except CaseErrors as exc:
            raise CaseError(f"{where}: the bound {bound:g} is not a valid value: {exc}") from None
    return FitKey(path, low, high, min(max(start, low), high))


def read_measured(path: str | Path) -> Measured:
    """A measured history CSV: ``time_s`` and one or more numeric columns (blank cells allowed
    in a column; each column is compared only where it has a value)."""
    path = Path(path)
    if not path.exists():
        raise CaseError(f"--data {path}: no such file; give a CSV with a time_s column and measured columns")
    with path.open(newline="") as fh:
        lines = [ln for ln in fh if not ln.lstrip().startswith("#")]  # comment lines say where data came from
    reader = csv.DictReader(lines)
    if reader.fieldnames is None or "time_s" not in reader.fieldnames:
        raise CaseError(f"--data {path}: no time_s column (columns: {reader.fieldnames}); the first row must "
                        "name the columns, e.g. time_s,pressure_drop_pa")
    names = [n for n in reader.fieldnames if n != "time_s"]
    if not names:
        raise CaseError(f"--data {path}: only a time_s column; add a measured column named as in history.csv")
    rows = list(reader)
    try:
        t = np.array([float(r["time_s"]) for r in rows])
        cols = {n: np.array([float(r[n]) if r[n] not in ("", None) else np.nan for r in rows]) for n in names}
    except ValueError as exc:
        raise CaseError(f"--data {path}: a value is not a number ({exc})") from None
    if len(t) < 2 or np.any(np.diff(t) <= 0) or t[0] < 0:
        raise CaseError(f"--data {path}: time_s must be >= 0 and increase from row to row (got {len(t)} rows)")
    return Measured(t, cols)


def _changes(keys: Sequence[FitKey], x: np.ndarray, measured: Measured, case: Case) -> dict:
    changes = {k.path: float(v) for k, v in zip(keys, x)}
    # a step no longer than the measured spacing: the history is read between steps by linear
    # interpolation, and long steps whose ends move with the keys would make the computed
    # values jump (no derivative, no interval)
    changes["numerics.max_step"] = min(float(case["numerics"]["max_step"]), float(np.min(np.diff(measured.time))))
    changes["time.end"] = float(measured.time[-1])
    changes["output.field_times"] = []  # a trial writes no fields (and the case's times may lie past the end)
    changes["output.field_count"] = 0
    if "target" in case.data:
        changes["target.stop_when_reached"] = False  # the whole measured history is wanted
    return changes


class Model:
    """The case as a function of the fitted keys: runs it and samples the measured columns."""

    def __init__(self, case: Case, keys: Sequence[FitKey], measured: Measured,
                 progress: Callable | None = None):
        self.case, self.keys, self.measured, self.progress = case, tuple(keys), measured, progress
        self.runs = 0
        self._cache: dict[tuple, dict] = {}
        self.scale = {n: max(float(np.nanmax(v) - np.nanmin(v)), 1e-12 * max(1.0, float(np.nanmax(np.abs(v)))))
                      for n, v in measured.columns.items()}

    def computed(self, x: np.ndarray) -> dict:
        """name -> (m,) the model's columns at the measured times."""
        from fvsolver.pipeline import run

        key = tuple(float(v) for v in x)
        if key not in self._cache:
            variant = with_changes(self.case, _changes(self.keys, x, self.measured, self.case))
            try:
                history = run(variant, None, plots=False).history
            except FvsolverError as exc:
                raise FvsolverError(f"fit: the run at {dict(zip((k.path for k in self.keys), key))} failed: {exc}") \
                    from exc
            missing = [n for n in self.measured.columns if n not in history]
            if missing:
                raise CaseError(f"--data: column(s) {missing} are not in a run's history; measured columns are "
                                f"named as in history.csv: {', '.join(k for k in history if k != 'time_s')}")
            self._cache[key] = {n: np.interp(self.measured.time, history["time_s"], history[n])
                                for n in self.measured.columns}
            self.runs += 1
            if self.progress is not None:
                self.progress(self.runs, dict(zip((k.path for k in self.keys), key)), self.residuals(x))
        return self._cache[key]

    def residuals(self, x: np.ndarray) -> np.ndarray:
        """(m,) scaled residuals, computed - measured over each column's range (blank cells left out)."""
        c = self.computed(x)
        parts = []
        for n, v in self.measured.columns.items():
            ok = np.isfinite(v)
            parts.append((c[n][ok] - v[ok]) / self.scale[n])
        return np.concatenate(parts)


def confidence(jac: np.ndarray, residuals: np.ndarray, level: float = 0.95) -> tuple[np.ndarray, np.ndarray, float]:
    """Standard errors (n,), the correlation matrix (n, n) and Student's t at ``level`` of a
    least-squares fit from its Jacobian (m, n) and residuals (m,); an interval's half-width is
    t times the standard error."""
    from scipy import stats

    m, n = jac.shape
    dof = m - n
    if dof <= 0:
        raise CaseError(f"fit: {m} measured values for {n} keys; give more measured points than fitted keys")
    s2 = float(residuals @ residuals) / dof
    cov = s2 * np.linalg.pinv(jac.T @ jac)
    se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(se, se)
    return se, corr, float(stats.t.ppf(0.5 + level / 2.0, dof))


def fit(case: Case, data: Measured, keys: Sequence[FitKey], max_runs: int = 60,
        progress: Callable | None = None) -> FitResult:
    """Fit ``keys`` of ``case`` to the measured history ``data`` (bounded least squares)."""
    from scipy.optimize import least_squares

    if len({k.path for k in keys}) != len(keys) or not keys:
        raise CaseError("--fit: give each key once, and at least one")
    model = Model(case, keys, data, progress)
    x0 = np.array([k.start for k in keys])
    low, high = np.array([k.low for k in keys]), np.array([k.high for k in keys])
    # a run costs seconds: stop once the values move by less than XTOL of themselves
    result = least_squares(model.residuals, x0, bounds=(low, high), method="trf", diff_step=DIFF_STEP,
                           x_scale=np.maximum(np.abs(x0), 1e-12), max_nfev=max_runs, xtol=XTOL, ftol=1e-6)
    r = model.residuals(result.x)
    se, corr, t = confidence(result.jac, r)
    intervals = np.column_stack([result.x - t * se, result.x + t * se])
    computed = model.computed(result.x)
    residuals = {n: computed[n] - v for n, v in data.columns.items()}
    rms = {n: float(np.sqrt(np.nanmean(v ** 2))) for n, v in residuals.items()}
    at_bound = (result.active_mask != 0) | np.isclose(result.x, low) | np.isclose(result.x, high)
    return FitResult(tuple(keys), result.x, intervals, se, corr, residuals, computed, rms, model.runs,
                     str(result.message), at_bound)


def write_fit_outputs(folder: Path, case_name: str, data_name: str, data: Measured, res: FitResult) -> None:
    """fit.json, fit.csv (measured, computed, residual per column), fit.png and fit.md."""
    from fvsolver.plotting import fit_plot
    from fvsolver.sweeps import _table

    info = {"case": case_name, "data": data_name, "runs": res.runs, "status": res.status,
            "keys": [{"path": k.path, "value": float(v), "low_95": float(lo), "high_95": float(hi),
                      "standard_error": float(s), "bounds": [k.low, k.high], "start": k.start, "at_bound": bool(b)}
                     for k, v, (lo, hi), s, b in zip(res.keys, res.values, res.intervals, res.standard_errors,
                                                     res.at_bound)],
            "correlation": [[None if not math.isfinite(c) else float(c) for c in row] for row in res.correlation],
            "rms_residual": res.rms}
    atomic_write_text(folder / "fit.json", json.dumps(info, indent=2))
    rows = []
    for i, t in enumerate(data.time):
        row = {"time_s": float(t)}
        for n, v in data.columns.items():
            row.update({f"measured_{n}": float(v[i]), f"computed_{n}": float(res.computed[n][i]),
                        f"residual_{n}": float(res.residuals[n][i])})
        rows.append(row)
    atomic_write_text(folder / "fit.csv", _table(rows))
    fit_plot(data.time, data.columns, res.computed, folder / "fit.png", title=f"{case_name} fitted to {data_name}")
    lines = [f"# Fit of {case_name} to {data_name}", "",
             f"Bounded nonlinear least squares (scipy.optimize.least_squares, trust-region reflective) over "
             f"{sum(np.isfinite(v).sum() for v in data.columns.values())} measured values; {res.runs} model runs; "
             f"{res.status}", "", "| key | fitted | 95 % interval | standard error | bounds |", "|---|---|---|---|---|"]
    for k, v, (lo, hi), s, b in zip(res.keys, res.values, res.intervals, res.standard_errors, res.at_bound):
        lines.append(f"| {k.path} | {v:.6g} | {lo:.6g} to {hi:.6g} | {s:.3g} | {k.low:g} to {k.high:g}"
                     + (" (fitted value on a bound: the interval means little)" if b else "") + " |")
    lines += ["", "Root-mean-square residuals: " + ", ".join(f"{n} {v:.4g}" for n, v in res.rms.items()) + ".", ""]
    if len(res.keys) > 1:
        lines += ["Correlation of the fitted values:", "", "```"]
        lines += ["  ".join(f"{c:6.3f}" for c in row) for row in res.correlation]
        lines += ["```", ""]
    lines += ["The intervals are linearised (from the Jacobian at the fit, scaled by the residual variance, "
              "Student t at 95 %): they hold while the residuals are small and random and the model is near "
              "linear over the interval; look at the residuals in fit.png before trusting them.", "",
              "![measured and computed](fit.png)", ""]
    atomic_write_text(folder / FIT_REPORT_NAME, "\n".join(lines))
