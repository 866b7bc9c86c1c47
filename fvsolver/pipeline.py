"""A run: case -> setup -> time stepping -> outputs, in one readable function."""
from __future__ import annotations

import csv
import io
import json
import platform
import sys
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from fvsolver import __version__
from fvsolver.case.build import Setup
from fvsolver.case.loader import Case, thaw
from fvsolver.case.setup_check import build_checked
from fvsolver.case.writer import dumps
from fvsolver.conduction import heat_flux_vectors
from fvsolver.errors import CaseError, SolverError
from fvsolver.outputs.files import atomic_write_text
from fvsolver.outputs.paths import clean_partial_files, prepare_output  # noqa: F401 (callers import it here)
from fvsolver.safeguards import StateWatch, plain_title
from fvsolver.stepper import TimeStepper

from fvsolver.exit_codes import EXIT_CASE, EXIT_INTERNAL, EXIT_INTERRUPTED, EXIT_OK, EXIT_SOLVER  # noqa: E402,F401


@dataclass
class Result:
    """What a run produced.

    Attributes
    ----------
    summary : dict, the content of summary.json
    history : dict of str to (n_rows,) arrays, the columns of history.csv
    temperature : (n_cells,) K, the final field
    state : (n_state,) the final state (temperatures, then the lumped unknowns of a device)
    setup : Setup
    """

    summary: dict
    history: dict
    temperature: np.ndarray
    state: np.ndarray
    setup: Setup = field(repr=False)
    inflow: dict = field(default_factory=dict, repr=False)   # each conserved total's inflow over the run
    events: dict = field(default_factory=dict, repr=False)   # what a cycle's events moved into each total
    cycles: list = field(default_factory=list, repr=False)   # a whole device's cycles.csv rows


def _history_row(setup: Setup, stepper: TimeStepper, monitor, evaluation=None) -> dict:
    """One row of history.csv; ``evaluation`` gives the rates of the initial state (before any
    step the stepper has none), so that the first row shows the t = 0 rates, not zeros."""
    from types import SimpleNamespace

    from fvsolver.outputs.columns import device_columns

    mesh = setup.mesh
    T = stepper.y[: mesh.n_cells]
    row = {"time_s": stepper.t, "step_s": stepper.last_dt, "min_temperature_k": float(T.min()),
           "max_temperature_k": float(T.max())}
    for i, name in enumerate(mesh.material_names):
        sel = mesh.cell_material == i
        row[f"mean_{name}_temperature_k"] = float(np.average(T[sel], weights=mesh.cell_volumes[sel]))
    ev = stepper.last_evaluation if evaluation is None else evaluation
    row["heat_in_w"] = float(ev.heat_in) if ev is not None else 0.0
    if monitor is not None:
        view = stepper if evaluation is None else SimpleNamespace(y=stepper.y, t=stepper.t, last_evaluation=ev)
        row.update(monitor.history_columns(view))
        row.update(device_columns(setup.problem, ev))
    for group, err in stepper.balance_error.items():
        row[f"{group}_balance_error"] = float(err)
    return row


def _write_csv(path: Path, rows: list[dict]) -> None:
    buf = io.StringIO()
    names = list(dict.fromkeys(k for r in rows for k in r))
    writer = csv.DictWriter(buf, fieldnames=names, restval="")
    writer.writeheader()
    for r in rows:
        writer.writerow({k: (f"{v:.10g}" if isinstance(v, float) else v) for k, v in r.items()})
    atomic_write_text(path, buf.getvalue())


class FieldWriter:
    """One VTU per output time and a PVD collection rewritten after each."""

    def __init__(self, folder: Path, setup: Setup):
        self.folder, self.setup, self.entries, self.fields = folder, setup, [], []

    def write(self, t: float, y: np.ndarray, ev) -> None:
        from fvsolver.vtk_io import write_fields, write_pvd

        mesh, setup = self.setup.mesh, self.setup
        T = y[: mesh.n_cells]
        problem = setup.problem
        if ev is None:  # e.g. a run that failed before its first accepted step
            ev = problem.evaluate(y, t)
        conduction_ev = getattr(ev, "conduction", ev)
        cell = {"temperature": T, "heat_flux": heat_flux_vectors(setup.conduction, T, conduction_ev)}
        areas = mesh.boundary_areas
        faces = {"surface_temperature": conduction_ev.surface_temperature,
                 "surface_heat_flux": np.divide(conduction_ev.boundary_heat, areas, out=np.zeros(mesh.n_boundary),
                                                where=areas > 0)}
        if setup.device is not None:
            saturation = np.zeros(mesh.n_cells)
            saturation[problem.cap_cells] = problem.saturation(y[problem.i_w])
            cell["water_saturation"] = saturation
            evap = np.zeros(mesh.n_boundary)
            cond = np.zeros(mesh.n_boundary)
            if hasattr(ev, "evaporation"):
                evap[problem.cap_faces] = ev.evaporation
                cond[problem.inner] = ev.condensation
            faces["evaporative_mass_flux"] = evap
            faces["condensation_mass_flux"] = cond
        name = f"fields_{len(self.entries):04d}.vtu"
        # the boundary faces go to their own files and collection, so that they never stretch
        # the colour range of a cell field in ParaView
        boundary = f"boundary_{len(self.entries):04d}.vtu"
        write_fields(self.folder / name, mesh, cell, faces, boundary_path=self.folder / boundary)
        self.entries.append((t, name))
        self.fields.append((t, T.copy()))
        write_pvd(self.folder / "boundary.pvd", [(time, f"boundary_{k:04d}.vtu") for k, (time, _) in
                                                 enumerate(self.entries)])
        write_pvd(self.folder / "fields.pvd", self.entries)


def run(case: Case, out: str | Path | None = None, overwrite: bool = False, progress=None,
        argv: list[str] | None = None, resume: bool = False, checkpoint_every: float = 30.0,
        plots: bool = True, uncertainty: bool = False, painter=None) -> Result:
    """Run ``case``; write outputs into ``out`` when given.

    Parameters
    ----------
    case : Case, from :func:`fvsolver.load_case`
    out : folder for the outputs (None: nothing is written)
    overwrite : allow a non-empty output folder
    progress : callable(stepper, monitor) called after every accepted step, or None
    resume : continue the run checkpointed in ``out`` (the case must be unchanged)
    checkpoint_every : wall-clock seconds between checkpoints (0: after every step)
    plots : draw the PNG plots and write report.md (a sweep leaves them out by default)
    uncertainty : estimate the numerical uncertainty of the time to target from two cheaper
        companion runs (:mod:`fvsolver.outputs.uncertainty`) and report it
    painter : a :class:`fvsolver.outputs.painter.Painter` to draw the plots in (None: here)
    """
    import time as wall

    from fvsolver import checkpoint

    # set up first (as `check` does): a case that cannot be set up leaves no output folder behind
    setup = build_checked(case)
    if resume:
        if out is None:
            raise CaseError("--resume: needs the output folder of the run to continue")
        folder = Path(out)
        meta, arrays = checkpoint.load(folder, case.sha256, setup)
        clean_partial_files(folder)
        stale = folder / "summary.json"
        if stale.exists():
            stale.unlink()
    else:
        folder = prepare_output(out, overwrite) if out is not None else None
    stepper = TimeStepper(setup.problem, setup.initial, 0.0, setup.end_time, setup.options,
                          stop_times=setup.field_times)
    monitor = cycle = None
    rewettings = ()
    if setup.device is not None:
        from fvsolver.device.monitor import DeviceMonitor

        monitor = DeviceMonitor(setup.problem, 0.0, setup.initial)
        rewettings = setup.device.cap_water.rewettings
        if setup.device.cycle is not None:
            from fvsolver.device.cycle import CycleController

            cycle = CycleController(setup.problem, 0.0, setup.initial)
    if folder is not None:
        data = thaw(case.data)
        data.pop("_folder", None)
        atomic_write_text(folder / "case_resolved.toml", dumps(data))
        info = {"fvsolver": __version__, "python": sys.version.split()[0], "platform": platform.platform(),
                "case_file": str(case.path) if case.path else None, "case_sha256": case.sha256,
                "command_line": argv or sys.argv, "packages": _versions()}
        atomic_write_text(folder / "run_info.json", json.dumps(info, indent=2))
    fields = FieldWriter(folder, setup) if folder is not None else None
    watch = StateWatch(setup)  # non-physical states stop the run; out-of-range properties warn
    if resume:
        checkpoint.restore(stepper, monitor, meta, arrays)
        rows, worst = meta["rows"], meta["worst"]
        watch.restore(meta.get("watch"))
        fields.entries = [tuple(e) for e in meta["field_entries"]]
        if isinstance(meta.get("stop_times"), list):  # events (a cycle's tips) add their own
            stepper.stop_times = np.unique(np.asarray(meta["stop_times"], dtype=float))
        if cycle is not None:
            cycle.restore(meta.get("cycle"), stepper)
    else:
        initial = setup.problem.evaluate(setup.initial, 0.0)
        if fields is not None:
            fields.write(0.0, setup.initial, initial)
        rows = [_history_row(setup, stepper, monitor, initial)]
        worst: dict[str, float] = {}
    status, reason = "complete", None
    last_checkpoint = None  # the first step is checkpointed: any killed run can be resumed
    max_steps = case["numerics"]["max_steps"]
    last_good, bad = (stepper.t, stepper.y.copy()), None

    def save_checkpoint():
        if folder is not None:
            checkpoint.save(folder, stepper, monitor, rows, fields.entries, case.sha256, worst,
                            extra={"watch": watch.state(), "stop_times": stepper.stop_times.tolist()}
                            | ({"cycle": cycle.state()} if cycle is not None else {}))

    # a run killed after its target but before its summary has nothing left to step
    finished = (monitor is not None and monitor.time_to_target is not None
                and setup.device.target.stop_when_reached)
    try:
        # step() returns False after the step that lands on the end time: that step is still
        # processed (history row, target crossing, safety figures) before the loop ends
        while not finished and stepper.status == "running":
            stepper.step()
            if stepper.status == "failed":
                break
            if cycle is not None and cycle.located(stepper):
                continue  # the tip lies inside the step: it is taken again to end there
            bad = watch.check(stepper.y, stepper.t) or _step_limit(stepper, max_steps)
            if bad is not None:
                break
            last_good = (stepper.t, stepper.y.copy())
            for g, err in stepper.balance_error.items():
                worst[g] = max(worst.get(g, 0.0), float(err))
            reached = monitor.after_step(stepper) if monitor is not None else False
            if cycle is not None:
                cycle.after_step(stepper, monitor)
            if reached and fields is not None and monitor.time_to_target < stepper.t:
                # the field at the crossing itself, from the step's interpolant
                fields.write(monitor.time_to_target, stepper.dense(monitor.time_to_target), None)
            for when, mass, temperature in rewettings:
                if stepper.t == when:
                    stepper.reset(monitor.rewet(stepper.y, mass, temperature))
            rows.append(_history_row(setup, stepper, monitor))
            if fields is not None and np.any(np.isclose(stepper.t, setup.field_times, rtol=0, atol=1e-12)):
                fields.write(stepper.t, stepper.y, stepper.last_evaluation)
                _write_csv(folder / "history.csv", rows)
            if folder is not None and (last_checkpoint is None or wall.monotonic() - last_checkpoint >= checkpoint_every):
                save_checkpoint()
                last_checkpoint = wall.monotonic()
            if progress is not None:
                progress(stepper, monitor)
            if reached and setup.device.target.stop_when_reached or cycle is not None and cycle.finished:
                break
        if bad is None and stepper.status == "finished":
            bad = watch.check(stepper.y, stepper.t)
        if bad is not None:
            status, reason = "failed", bad
            if fields is not None and (not fields.entries or fields.entries[-1][0] < last_good[0]):
                fields.write(*last_good, None)  # the last good state, for a look at what went wrong
        elif stepper.status == "failed":
            status, reason = "failed", stepper.message
            save_checkpoint()
            if fields is not None and (not fields.entries or fields.entries[-1][0] < stepper.t):
                # the last good (accepted) state, for a look at what went wrong
                fields.write(stepper.t, stepper.y, stepper.last_evaluation)
        else:
            for g, err in stepper.balance_error.items():
                worst[g] = max(worst.get(g, 0.0), float(err))
            if fields is not None and (not fields.entries or fields.entries[-1][0] != stepper.t):
                fields.write(stepper.t, stepper.y, stepper.last_evaluation)
    except KeyboardInterrupt as exc:  # Ctrl-C, or SIGTERM (safeguards.Terminated)
        status = "interrupted"
        reason = f"{getattr(exc, 'reason', 'stopped by the user')} at t = {stepper.t:.6g} s (continue with --resume)"
        save_checkpoint()
    if cycle is not None and status == "complete":
        cycle.finish(stepper.t, monitor, lambda: monitor.stall_reason(stepper.y, stepper.t), stepper.y)
    summary = _summary(case, setup, stepper, monitor, worst, status, reason)
    if cycle is not None:
        summary.update(cycle.summary())
    summary["warnings"] += watch.warnings()
    history = {k: np.array([r.get(k, np.nan) for r in rows]) for k in rows[-1]}
    if folder is not None:
        _write_csv(folder / "history.csv", rows)
        if cycle is not None:
            _write_csv(folder / "cycles.csv", cycle.cycles or [{"cycle": None}])
        # the summary first: the computed result is kept whatever the extras below do
        atomic_write_text(folder / "summary.json", json.dumps(summary, indent=2))
    figures: tuple | Exception = ("", [])
    if folder is not None and plots:  # asked for first: a painter draws them while the companion runs run
        try:
            figures = _start_figures(folder, case, setup, summary, history, fields,
                                     cycle.cycles if cycle else (), painter)
        except Exception as exc:  # reported below, as a failure of the drawing itself
            figures = exc
    if uncertainty and monitor is not None and cycle is None and status == "complete":  # a stopped run exits now
        from fvsolver.outputs.uncertainty import estimate

        try:
            summary["numerical_uncertainty"] = estimate(case, summary)
        except (Exception, KeyboardInterrupt) as exc:  # the companion runs only add to the result
            summary["warnings"].append(f"the numerical uncertainty was not estimated ({type(exc).__name__}: "
                                       f"{str(exc)[:200]})")
        if folder is not None:
            atomic_write_text(folder / "summary.json", json.dumps(summary, indent=2))
    if folder is not None:
        if plots:
            try:
                _write_plots_and_report(folder, case, summary, figures)
            except Exception as exc:  # only the physics decides the status
                summary["warnings"].append(f"the plots or the report could not be written ({type(exc).__name__}: "
                                           f"{str(exc)[:200]}); the results are in summary.json, history.csv and "
                                           "the field files")
                atomic_write_text(folder / "summary.json", json.dumps(summary, indent=2))
    result = Result(summary, history, stepper.y[: setup.mesh.n_cells].copy(), stepper.y.copy(), setup,
                    dict(stepper.cumulative_inflow), dict(cycle.event_inflow) if cycle else {},
                    list(cycle.cycles) if cycle else [])
    if status == "failed":
        raise SolverError(f"the run failed: {reason} (the last good fields are in the outputs)")
    return result


def _step_limit(stepper, max_steps: int) -> str | None:
    if stepper.counters.steps < max_steps or stepper.status != "running":
        return None
    return (f"the run took numerics.max_steps = {max_steps:,} steps and reached only t = {stepper.t:.6g} of "
            f"{stepper.t_end:.6g} s (last step {stepper.last_dt:.3g} s); allow longer steps (tolerance, "
            "min_step), shorten time.end, or raise numerics.max_steps")


def _summary(case, setup, stepper, monitor, worst, status, reason) -> dict:
    T = stepper.y[: setup.mesh.n_cells]
    summary = {
        "status": status, "reason": reason, "title": case["title"], "end_time_s": stepper.t,
        "target_reached": None, "time_to_target_s": None, "target_pressure_drop_pa": None,
        "max_pressure_drop_pa": None, "stall_reason": None,
        "energy_balance_relative_error": worst.get("energy", 0.0),
        "mass_balance_relative_error": {g: e for g, e in worst.items() if g != "energy"},
        "n_cells": setup.mesh.n_cells, "n_steps": stepper.counters.steps,
        "n_rejected_steps": stepper.counters.rejected, "n_newton_failures": stepper.counters.newton_failures,
        "n_newton_iterations": stepper.counters.newton_iterations,
        "min_temperature_k": float(T.min()), "max_temperature_k": float(T.max()),
        "warnings": [],
    }
    from fvsolver.case.units import implausible

    summary["input_warnings"] = implausible(case.data)
    if monitor is not None:
        reached = monitor.time_to_target is not None
        skipped = [float(t) for t in setup.field_times if stepper.t < t < setup.end_time]
        summary.update({
            # a run stopped early (interrupted, failed) has not decided whether the target is reachable
            "target_reached": True if reached else (False if status == "complete" else None),
            "time_to_target_s": monitor.time_to_target,
            "field_times_not_reached_s": skipped,
            "target_pressure_drop_pa": monitor.target(stepper.y), "max_pressure_drop_pa": monitor.max_pressure_drop,
            "stall_reason": None if reached or status != "complete" else monitor.stall_reason(stepper.y, stepper.t),
            "max_internal_pressure_pa": monitor.max_absolute_pressure,
            "max_glass_temperature_k": monitor.max_glass_temperature,
            "warnings": monitor.warnings(),
            "water_added_kg": monitor.added_water, "energy_added_by_rewetting_j": monitor.added_energy,
        })
        from fvsolver.device.monitor import room_summary

        summary["room"] = room_summary(setup.device.room)
    return summary


def _chosen_fields(fields, summary, most: int = 8) -> list:
    """The fields to draw: every one written, but not a uniform initial field (it says nothing the
    title does not); at most ``most``, always with the crossing and the last."""
    chosen = list(fields.fields)
    if len(chosen) > 1 and np.ptp(chosen[0][1]) < 1e-9 * max(1.0, float(np.abs(chosen[0][1]).max())):
        chosen = chosen[1:]
    # the last field written a step after the crossing (a run ends on the step after its target)
    # would draw the same picture under the same time as the panels round it: the crossing's panel
    # stands for both
    from fvsolver.outputs.report import format_duration

    crossing = summary.get("time_to_target_s")
    if (len(chosen) > 1 and chosen[-2][0] == crossing
            and format_duration(chosen[-1][0]) == format_duration(crossing)):
        chosen = chosen[:-1]
    if len(chosen) > most:
        keep = set(np.linspace(0, len(chosen) - 1, most).astype(int))
        keep |= {i for i, (t, _) in enumerate(chosen) if t == crossing}
        chosen = [f for i, f in enumerate(chosen) if i in keep]
    return chosen


def _start_figures(folder: Path, case, setup, summary, history, fields, cycles=(), painter=None) -> tuple:
    """The run's figures asked for (drawn by ``painter``'s helper process meanwhile, or here when
    waited for): ``(scenario, [(png name, drawing)])``."""
    from fvsolver.outputs.painter import draw_here
    from fvsolver.outputs.scenario import scenario_text

    draw = painter.draw if painter is not None else draw_here
    figures = []
    scenario = scenario_text(case, summary.get("target_pressure_drop_pa"))
    if fields is not None and fields.fields:
        chosen = _chosen_fields(fields, summary)
        notes = ["target reached" if t == summary.get("time_to_target_s") else
                 ("end" if t == summary["end_time_s"] else "") for t, _ in chosen]
        figures.append(("temperature_field.png", draw(
            "temperature_field_plot", setup.mesh, [T for _, T in chosen], folder / "temperature_field.png",
            times=[t for t, _ in chosen], title=plain_title(case["title"]), subtitle=scenario, notes=notes)))
    if "pressure_drop_pa" in history:
        figures.append(("history.png", draw(
            "history_plot", history, folder / "history.png", summary["target_pressure_drop_pa"],
            summary["time_to_target_s"], title=plain_title(case["title"]), subtitle=scenario,
            max_pressure_drop_pa=summary.get("max_pressure_drop_pa"), device=summary.get("outcome") is not None)))
    if cycles:
        figures.append(("cycles.png", draw("cycle_plot", history, list(cycles), folder / "cycles.png",
                                           title=plain_title(case["title"]), subtitle=scenario)))
    return scenario, figures


def _write_plots_and_report(folder: Path, case, summary, figures) -> None:
    """Wait for the figures of :func:`_start_figures`, then write report.md (with the summary's
    numerical uncertainty, when the companion runs estimated it meanwhile)."""
    from fvsolver.outputs.report import write_report

    if isinstance(figures, Exception):
        raise figures
    scenario, drawings = figures
    for _, drawing in drawings:
        drawing.wait()
    write_report(folder, summary, plain_title(case["title"] or (case.path.stem if case.path else "case")),
                 _inputs(case), [name for name, _ in drawings], scenario=scenario)


def _inputs(case) -> dict:
    d = case.data
    out = {"geometry": d["geometry"]["shape"], "end time (s)": d["time"]["end"]}
    if "room" in d:
        r = d["room"]
        out.update({"room air temperature (K)": r["air_temperature"], "relative humidity (-)": r["relative_humidity"],
                    "air speed (m/s)": r["air_speed"], "convection": r["convection"],
                    "working fluid": d["fluid"]["name"], "cap water": d["cap_water"]["mode"],
                    "second bulb": d["second_bulb"]["mode"]})
        if "cycle" in d:
            c = d["cycle"]
            out["tips at"] = (f"column {c['tip_column_height']} m" if "tip_column_height" in c
                              else f"centre of mass at the pivot, {c['pivot_height']} m above the body's bottom")
            out["water glass"] = (f"yes, at {c['water_temperature']} K" if c["water_glass"] else "no")
            out["pool fill (m3)"] = d["pool"]["fill_volume"]
        else:
            t = d["target"]
            out["target"] = (f"column {t['column_height']} m" if "column_height" in t else f"{t['pressure_drop']} Pa")
    return out


def _versions() -> dict:
    from importlib import metadata

    out = {}
    for name in ("numpy", "scipy", "numba", "meshio", "matplotlib"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out
