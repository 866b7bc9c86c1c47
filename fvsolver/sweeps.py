"""Parameter sweeps: one case run over a grid of changed keys, one row per run.

``fvsolver sweep CASE --vary room.relative_humidity=0.3,0.5,0.7 --vary "room.air_temperature=linspace(293.15,303.15,3)"``
runs every combination (the full grid, first key slowest), each in its own folder under
``runs/``, and writes ``sweep.csv`` (the varied values and each run's key results), updated
after every run so that a killed sweep keeps the finished rows, ``sweep.json`` at the end,
``sweep.png`` (time to target against the first key, one line per value of the others) and
``sweep.md`` (the runs, the safety figures over all of them and the cautions).
"""
from __future__ import annotations

import contextlib
import csv
import importlib
import io
import itertools
import json
import math
import os
import re
import threading
import time as wall
import warnings
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from fvsolver.case.loader import Case, CaseErrors, _freeze, thaw, with_changes
from fvsolver.errors import CaseError, FvsolverError
from fvsolver.outputs.files import atomic_write_text

# the summary entries a sweep table carries for every run
RESULT_COLUMNS = ("status", "target_reached", "time_to_target_s", "target_pressure_drop_pa",
                  "max_pressure_drop_pa", "stall_reason", "min_temperature_k", "max_temperature_k",
                  "max_internal_pressure_pa", "max_glass_temperature_k", "warnings",
                  "energy_balance_relative_error", "n_steps")
# and, for a whole running device, its cycle
CYCLE_COLUMNS = ("outcome", "first_tip_s", "period_s", "last_period_s", "n_cycles", "dips_per_hour",
                 "water_per_day_kg", "outcome_reason")


@dataclass(frozen=True)
class Vary:
    """One swept key: its dotted path in the case and the values it takes."""

    path: str
    values: tuple


_LINSPACE = re.compile(r"linspace\(([^,()]*),([^,()]*),([^,()]*)\)")


def _clean(v: float) -> float:
    """A computed value without float noise (0.6000000000000001 -> 0.6): 12 significant digits."""
    return float(f"{v:.12g}")


def parse_vary(text: str) -> Vary:
    """``KEY.PATH=V1,V2,...`` (TOML values; bare words are strings) or
    ``KEY.PATH=linspace(START,STOP,N)``: N evenly spaced numbers, both ends included, as numpy's
    and MATLAB's linspace (whole numbers when START and STOP are written as whole numbers, for cell
    counts).  The older ``START:STOP:N`` still works, with a deprecation warning: it reads as
    start:step:stop to MATLAB users and as a slice to Python users."""
    where = f"--vary {text!r}"
    if "=" not in text:
        raise CaseError(f"{where}: expected KEY.PATH=VALUES, e.g. room.relative_humidity=0.3,0.5,0.7 "
                        "or room.air_temperature=linspace(293.15,303.15,3)")
    path, _, spec = (s.strip() for s in text.partition("="))
    if not path or any(not p for p in path.split(".")):
        raise CaseError(f"{where}: the key path {path!r} is empty or has an empty part; write it as "
                        "table.key, e.g. room.relative_humidity")
    parts = spec.split(":")
    match = _LINSPACE.fullmatch(spec.replace(" ", ""))
    if match:
        parts = list(match.groups())
    elif spec.startswith("linspace"):
        raise CaseError(f"{where}: got {spec!r}, expected linspace(START,STOP,N) with numbers START, STOP and a "
                        "whole N >= 2, e.g. linspace(0.2,0.8,4)")
    elif len(parts) == 3:
        warnings.warn(f"{where}: START:STOP:N is deprecated (it reads as start:step:stop in MATLAB and as a slice "
                      f"in Python); write {path}=linspace({parts[0]},{parts[1]},{parts[2]})", FutureWarning,
                      stacklevel=2)
    if len(parts) == 3:
        try:
            start, stop, count = float(parts[0]), float(parts[1]), int(parts[2])
        except ValueError:
            raise CaseError(f"{where}: got range {spec!r}, expected linspace(START,STOP,N) (or the deprecated "
                            "START:STOP:N) with numbers START, STOP and a whole N >= 2") from None
        if count < 2:
            raise CaseError(f"{where}: got N = {count}, expected at least 2 points in linspace(START,STOP,N)")
        values = np.linspace(start, stop, count)
        if all(p.strip().lstrip("+-").isdigit() for p in parts[:2]):  # whole-number ends: whole values
            if not np.all(values == np.round(values)):
                raise CaseError(f"{where}: the whole-number range {spec!r} does not step by whole numbers; "
                                f"choose N so that (STOP - START) / (N - 1) is whole, or write START as {start:g}.0")
            return Vary(path, tuple(int(v) for v in np.round(values)))
        return Vary(path, tuple(_clean(v) for v in values))
    try:
        values = tomllib.loads(f"v = [{spec}]")["v"]
    except tomllib.TOMLDecodeError:
        values = []
        for item in spec.split(","):
            item = item.strip()
            try:
                values.append(tomllib.loads(f"v = {item}")["v"])
            except tomllib.TOMLDecodeError:
                values.append(item)  # a bare word: a string
    if not values or any(v == "" for v in values):
        raise CaseError(f"{where}: got no value (or an empty one) in {spec!r}; give a comma-separated list")
    return Vary(path, tuple(values))


def unknown_key(path: str) -> str | None:
    """Why the dotted ``path`` names no case key (None when it does), in terms of the command line."""
    import difflib

    from fvsolver.case.schema import CASE

    node = CASE
    done = []
    for part in path.split("."):
        if node.kind == "map":
            node = node.item
        elif node.kind == "tables" and part.isdigit():
            node = node.item
        elif node.kind == "table":
            names = [c.name for c in node.children]
            child = next((c for c in node.children if c.name == part), None)
            if child is None:
                close = difflib.get_close_matches(part, names, n=1)
                hint = f"; did you mean {close[0]!r} ({'.'.join(done + [close[0]])})?" if close else ""
                return (f"--vary {path}=...: no case key {'.'.join(done + [part])!r} (expected one of "
                        f"{', '.join(names)}){hint}; `fvsolver keys` lists them")
            node = child
        else:
            return f"--vary {path}=...: {'.'.join(done)!r} is a single value, it has no key {part!r}"
        done.append(part)
    if node.kind in ("table", "map"):
        return f"--vary {path}=...: {path!r} is a table, expected one of its keys (`fvsolver keys {path}`)"
    return None


def key_unit(path: str) -> str:
    """The schema's unit of a dotted key path ("" when it has none or the path is not a key)."""
    from fvsolver.case.schema import CASE

    node = CASE
    for part in path.split("."):
        if node.kind == "map" or (node.kind == "tables" and part.isdigit()):
            node = node.item  # the part is a free name (a material, a patch) or an index
            continue
        node = next((c for c in node.children if c.name == part), None) if node.kind == "table" else None
        if node is None:
            return ""
    return node.unit


def variants(case: Case, varies: list[Vary]) -> list[tuple[dict, Case]]:
    """Every combination of the varied values, validated before anything runs.

    Raises CaseErrors with the problems of all combinations at once.
    """
    if not varies:
        raise CaseError("sweep: nothing to vary; give at least one --vary KEY.PATH=VALUES")
    seen = [v.path for v in varies]
    if len(set(seen)) != len(seen):
        raise CaseError(f"sweep: a key is varied twice ({seen}); give each key once with all its values")
    # a key path that does not exist is a slip on the command line: said once, not once per run
    unknown = [problem for v in varies if (problem := unknown_key(v.path))]
    if unknown:
        raise CaseErrors(unknown)
    out, problems = [], []
    for combo in itertools.product(*(v.values for v in varies)):
        changes = dict(zip(seen, combo))
        try:
            out.append((changes, with_changes(case, changes)))
        except CaseErrors as exc:
            problems.extend(exc.problems)
    if problems:
        raise CaseErrors(list(dict.fromkeys(problems)))
    return out


def _cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, float):  # numpy floats too: written as plain Python floats
        return "nan" if math.isnan(v) else repr(float(v))
    return str(v)


def _table(rows: list[dict]) -> str:
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=list(rows[0]), lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: _cell(v) for k, v in r.items()})
    return buf.getvalue()


def _execute(variant: Case, run_dir: Path | None, overwrite: bool, plots: bool) -> tuple[dict, str | None, float]:
    """One run of a sweep: (summary, the error of a failed run or None, wall seconds)."""
    from fvsolver.pipeline import run

    start = wall.perf_counter()
    try:
        return run(variant, run_dir, overwrite=overwrite, plots=plots).summary, None, wall.perf_counter() - start
    except (FvsolverError, MemoryError) as exc:  # a solver failure, a property outside its data, no memory
        if isinstance(exc, MemoryError):
            exc = f"out of memory ({exc or 'MemoryError'})"
        summary = {"status": "failed"}
        if run_dir is not None and (run_dir / "summary.json").exists():
            summary = json.loads((run_dir / "summary.json").read_text())
        return summary, str(exc), wall.perf_counter() - start


def _execute_in_worker(base: tuple, changes: dict, run_dir, overwrite: bool, plots: bool):
    """_execute in a worker process: the variant is rebuilt there from the base case's text
    (a frozen case does not pickle) and validated again, as in the parent."""
    path, text, data = base
    case = Case(path, _freeze(data) if data is not None else None, text, "")
    return _execute(with_changes(case, changes), run_dir, overwrite, plots)


def _estimated_cost(variant: Case) -> float:
    """A run's relative cost before it runs: cells times the fewest steps it can take (the
    size estimate of :mod:`fvsolver.case.limits`), for a device over the room's wet-bulb
    depression (the evaporation that drives the head falls with it, and the time to the target
    and the period grow as its inverse: a humid room's run is the long one); 0 when it cannot
    be estimated."""
    from fvsolver.case.limits import estimate

    try:
        e = estimate(variant.data)
        cost = float(e.cells) * float(max(e.steps, 1))
        room = variant.data.get("room")
        if room is not None:
            from fvsolver.properties.moist_air import wet_bulb_temperature

            t = float(room["air_temperature"])
            depression = t - float(wet_bulb_temperature(t, float(room["relative_humidity"]), float(room["pressure"])))
            cost /= max(depression, WET_BULB_FLOOR)
    except Exception:  # noqa: BLE001 - only the order of the runs depends on it
        return 0.0
    return cost


# K: a depression below this counts as this (a saturated room's run stops on its stall, it does not
# run forever)
WET_BULB_FLOOR = 0.5


@contextlib.contextmanager
def _one_blas_thread_per_worker():
    """Workers started inside this block run their BLAS on one thread each (the sweep's
    parallelism is the runs themselves; threads on top would only contend for the cores)."""
    keys = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")
    saved = {k: os.environ.get(k) for k in keys}
    os.environ.update({k: "1" for k in keys})
    try:
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def _import_quietly(name: str) -> None:
    """Import ``name`` ahead of its use; a failure is left for the use itself to report."""
    try:
        importlib.import_module(name)
    except Exception:  # noqa: BLE001 - the import is tried again where the module is used
        pass


def sweep(case: Case, varies: list[Vary], out: str | Path | None = None, overwrite: bool = False,
          plots: bool = False, progress=None, jobs: int = 1, engine=None) -> list[dict]:
    """Run ``case`` over the grid of ``varies``; return one row per run, in grid order.

    Parameters
    ----------
    out : folder for the sweep (None: nothing is written)
    plots : also draw each run's own plots and report (slower)
    progress : callable(index, count, changes, row) called after every run, or None
    jobs : runs at a time (worker processes); 1 runs them one after the other in this process
    engine : a :class:`fvsolver.studies.engine.DaskEngine` to run on a Dask cluster instead

    A run that fails (a solver failure, a property outside its data) is a row with status
    "failed" and the error in ``reason``; the sweep goes on. Rows carry the varied values, the
    summary entries of RESULT_COLUMNS (and CYCLE_COLUMNS for a whole device), the wall time and the
    run's folder.
    """
    from fvsolver.outputs.paths import prepare_output

    if not (isinstance(jobs, int) and 1 <= jobs <= 256):
        raise CaseError(f"--jobs: got {jobs!r}, expected a whole number of runs at a time from 1 to 256 "
                        f"(this machine has {os.cpu_count()} cores)")
    count = math.prod(len(v.values) for v in varies)
    pool = None
    if engine is None and jobs > 1 and count > 1:
        from fvsolver import workers

        # the workers start and import the solver while this process checks the grid; this
        # process never imports the solver itself (each worker imports it once for all its runs)
        with _one_blas_thread_per_worker():
            pool = workers.start(min(jobs, count), modules=("fvsolver.pipeline",), shared=True)
    try:
        grid = variants(case, varies)  # every combination is checked before anything is written
        folder = prepare_output(Path(out), overwrite) if out is not None else None
    except BaseException:
        if pool is not None:
            workers.stop(pool)
        raise
    if pool is not None and folder is not None:
        # this process only waits while the workers run: it imports the plotting for the sweep's
        # plot now, on the core the fork server leaves free while it imports the solver (after the
        # last run it cost the sweep's tail 0.55 s of 1.1 s)
        threading.Thread(target=_import_quietly, args=("fvsolver.plotting",), name="plotting-import",
                         daemon=True).start()
    done: dict[int, dict] = {}
    cycle_columns = case["geometry"]["shape"] == "whole_device"

    def record(index: int, result: tuple) -> None:
        summary, reason, seconds = result
        changes = grid[index][0]
        row = {"run": index, **changes}
        row.update({k: summary.get(k) for k in RESULT_COLUMNS})
        if cycle_columns:
            row.update({k: summary.get(k) for k in CYCLE_COLUMNS})
        row["warnings"] = "; ".join(row["warnings"] or []) or None
        row["reason"] = reason or summary.get("reason")
        row["wall_time_s"] = round(seconds, 3)
        row["folder"] = str(Path("runs") / f"{index:03d}") if folder is not None else None
        done[index] = row
        if folder is not None:
            atomic_write_text(folder / "sweep.csv", _table([done[i] for i in sorted(done)]))
        if progress is not None:
            progress(index, len(grid), changes, row)
        if row["status"] == "interrupted":
            # Ctrl-C stopped this run (which saved a checkpoint): stop the sweep too, leaving
            # sweep.csv with the rows so far and no sweep.json (the mark of a finished sweep)
            raise KeyboardInterrupt

    def run_dir(index: int) -> Path | None:
        return folder / "runs" / f"{index:03d}" if folder is not None else None

    if engine is not None:
        # the workers write the run folders themselves (absolute paths: a shared filesystem);
        # a run folder that exists already is a dead worker's attempt (the sweep folder was
        # prepared above), so the retry may write over it
        base = (case.path, case.text, None if case.text else thaw(case.data))
        calls = [(base, changes, None if folder is None else run_dir(i).resolve(), True, plots)
                 for i, (changes, _) in enumerate(grid)]
        engine.map(_execute_in_worker, calls, record,
                   lambda i, exc: ({"status": "failed"}, f"lost on the cluster: {type(exc).__name__}: {exc}", 0.0))
    elif pool is None:
        for index, (_, variant) in enumerate(grid):
            record(index, _execute(variant, run_dir(index), overwrite, plots))
    else:
        base = (case.path, case.text, None if case.text else thaw(case.data))
        # the dearest runs first: the runs started last then are short, and the workers finish together
        order = sorted(range(len(grid)), key=lambda i: -_estimated_cost(grid[i][1]))
        tasks = {i: (base, grid[i][0], run_dir(i), overwrite, plots) for i in order}
        with _one_blas_thread_per_worker():  # workers die with the sweep; a dead worker is a failed row
            workers.run_all(_execute_in_worker, tasks, jobs, record,
                            lambda i, what: ({"status": "failed"}, what, 0.0), pool=pool)
    rows = [done[i] for i in sorted(done)]
    if folder is not None:
        from fvsolver.outputs.sweep_report import write_sweep_report
        from fvsolver.plotting import sweep_plot

        name = case.path.name if case.path else "a case"
        plot = None
        units = {v.path: key_unit(v.path) for v in varies}
        # a running device is drawn by its last period (settled or not), a head by its time to target
        result, label = (("last_period_s", "period of the last cycle (s)") if cycle_columns
                         else ("time_to_target_s", "time to target (s)"))
        if any(r.get(result) is not None for r in rows) and isinstance(varies[0].values[0], int | float):
            sweep_plot(rows, [v.path for v in varies], folder / "sweep.png",
                       title=f"sweep of {name} (other inputs as in the case)", units=units, result=result,
                       result_label=label, missing_label="fewer than two tips" if cycle_columns else "not reached")
            plot = "sweep.png"
        write_sweep_report(folder, f"Sweep of {name}", [v.path for v in varies], rows, plot, units=units)
        info = {"case_file": str(case.path) if case.path else None, "case_sha256": case.sha256,
                "vary": {v.path: list(v.values) for v in varies}, "rows": rows}
        atomic_write_text(folder / "sweep.json", json.dumps(info, indent=2))
    return rows
