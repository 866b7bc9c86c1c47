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
from fvsolver.case.build import Setup, build
from fvsolver.case.loader import Case, thaw
from fvsolver.case.writer import dumps
from fvsolver.conduction import heat_flux_vectors
from fvsolver.errors import CaseError, SolverError
from fvsolver.outputs.files import atomic_write_text
from fvsolver.stepper import TimeStepper

EXIT_OK, EXIT_CASE, EXIT_SOLVER, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 2, 3, 4, 130


@dataclass
class Result:
    """What a run produced.

    Attributes
    ----------
    summary : dict, the content of summary.json
    history : dict of str to (n_rows,) arrays, the columns of history.csv
    temperature : (n_cells,) K, the final field
    setup : Setup
    """

    summary: dict
    history: dict
    temperature: np.ndarray
    setup: Setup = field(repr=False)


def _history_row(setup: Setup, stepper: TimeStepper) -> dict:
    T, mesh = stepper.y, setup.mesh
    row = {"time_s": stepper.t, "step_s": stepper.last_dt, "min_temperature_k": float(T.min()),
           "max_temperature_k": float(T.max())}
    for i, name in enumerate(mesh.material_names):
        sel = mesh.cell_material == i
        row[f"mean_{name}_temperature_k"] = float(np.average(T[sel], weights=mesh.cell_volumes[sel]))
    ev = stepper.last_evaluation
    row["heat_in_w"] = float(ev.heat_in) if ev is not None else 0.0
    row["energy_balance_error"] = float(stepper.balance_error.get("energy", 0.0))
    return row


def _write_csv(path: Path, rows: list[dict]) -> None:
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(rows[0]))
    writer.writeheader()
    for r in rows:
        writer.writerow({k: (f"{v:.10g}" if isinstance(v, float) else v) for k, v in r.items()})
    atomic_write_text(path, buf.getvalue())


class FieldWriter:
    """One VTU per output time and a PVD collection rewritten after each."""

    def __init__(self, folder: Path, setup: Setup):
        self.folder, self.setup, self.entries = folder, setup, []

    def write(self, t: float, T: np.ndarray, ev) -> None:
        from fvsolver.vtk_io import write_fields, write_pvd

        mesh = self.setup.mesh
        name = f"fields_{len(self.entries):04d}.vtu"
        cell = {"temperature": T, "heat_flux": heat_flux_vectors(self.setup.problem, T, ev)}
        faces = {"surface_temperature": ev.surface_temperature,
                 "surface_heat_flux": np.divide(ev.boundary_heat, mesh.boundary_areas,
                                                out=np.zeros(mesh.n_boundary), where=mesh.boundary_areas > 0)}
        write_fields(self.folder / name, mesh, cell, faces)
        self.entries.append((t, name))
        write_pvd(self.folder / "fields.pvd", self.entries)


def prepare_output(out: Path, overwrite: bool) -> Path:
    out = Path(out)
    if out.exists() and any(out.iterdir()) and not overwrite:
        raise CaseError(f"--out {out}: the folder exists and is not empty (expected a new or empty folder); "
                        "choose another folder or pass --overwrite")
    out.mkdir(parents=True, exist_ok=True)
    return out


def run(case: Case, out: str | Path | None = None, overwrite: bool = False, progress=None,
        argv: list[str] | None = None) -> Result:
    """Run ``case``; write outputs into ``out`` when given.

    Parameters
    ----------
    case : Case, from :func:`fvsolver.load_case`
    out : folder for the outputs (None: nothing is written)
    overwrite : allow a non-empty output folder
    progress : callable(stepper) called after every accepted step, or None
    """
    folder = prepare_output(out, overwrite) if out is not None else None
    setup = build(case)
    stepper = TimeStepper(setup.problem, setup.initial, 0.0, setup.end_time, setup.options,
                          stop_times=setup.field_times)
    if folder is not None:
        data = thaw(case.data)
        data.pop("_folder", None)
        atomic_write_text(folder / "case_resolved.toml", dumps(data))
        info = {"fvsolver": __version__, "python": sys.version.split()[0], "platform": platform.platform(),
                "case_file": str(case.path) if case.path else None, "case_sha256": case.sha256,
                "command_line": argv or sys.argv, "packages": _versions()}
        atomic_write_text(folder / "run_info.json", json.dumps(info, indent=2))
    fields = FieldWriter(folder, setup) if folder is not None else None
    if fields is not None:
        fields.write(0.0, setup.initial, setup.problem.evaluate(setup.initial, 0.0))
    rows = [_history_row(setup, stepper)]
    worst_balance = 0.0
    status, reason = "complete", None
    try:
        while stepper.step():
            rows.append(_history_row(setup, stepper))
            worst_balance = max(worst_balance, stepper.balance_error.get("energy", 0.0))
            if fields is not None and np.any(np.isclose(stepper.t, setup.field_times, rtol=0, atol=1e-12)):
                fields.write(stepper.t, stepper.y, stepper.last_evaluation)
                _write_csv(folder / "history.csv", rows)
            if progress is not None:
                progress(stepper)
        if stepper.status == "failed":
            status, reason = "failed", stepper.message
        else:
            rows.append(_history_row(setup, stepper))
            worst_balance = max(worst_balance, stepper.balance_error.get("energy", 0.0))
            if fields is not None:
                fields.write(stepper.t, stepper.y, stepper.last_evaluation)
    except KeyboardInterrupt:
        status, reason = "interrupted", f"stopped by the user at t = {stepper.t:.6g} s"
    summary = {
        "status": status, "reason": reason, "title": case["title"], "end_time_s": stepper.t,
        "n_cells": setup.mesh.n_cells, "n_steps": stepper.counters.steps,
        "n_rejected_steps": stepper.counters.rejected, "n_factorisations": stepper.counters.factorisations,
        "energy_balance_relative_error": worst_balance,
        "min_temperature_k": float(stepper.y.min()), "max_temperature_k": float(stepper.y.max()),
    }
    history = {k: np.array([r[k] for r in rows]) for k in rows[0]}
    if folder is not None:
        _write_csv(folder / "history.csv", rows)
        atomic_write_text(folder / "summary.json", json.dumps(summary, indent=2))
    result = Result(summary, history, stepper.y.copy(), setup)
    if status == "failed":
        raise SolverError(f"the run failed: {reason} (last good fields are in the outputs)")
    return result


def _versions() -> dict:
    from importlib import metadata

    out = {}
    for name in ("numpy", "scipy", "numba", "meshio", "matplotlib"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out
