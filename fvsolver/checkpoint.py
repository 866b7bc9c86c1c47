"""Checkpoints of a run: enough to continue a killed run to the same result.

A checkpoint is two files written atomically in the output folder: ``checkpoint.npz`` (the
arrays: state, history of the stepper, the surface-temperature guess) and
``checkpoint.json`` (scalars, counters, the monitor and the history rows).  Nothing in them
is executed on loading: arrays and JSON only.
"""
from __future__ import annotations

import io
import json
from dataclasses import asdict
from pathlib import Path

import numpy as np

from fvsolver.errors import CaseError
from fvsolver.outputs.files import atomic_write_bytes, atomic_write_text
from fvsolver.stepper import Counters, TimeStepper, _History

MONITOR_FIELDS = ("time_to_target", "max_pressure_drop", "max_pressure_drop_time", "max_absolute_pressure",
                  "max_glass_temperature", "min_inner_wall_temperature", "dried_out_time", "added_energy",
                  "added_water", "last_time")


def _conduction(problem):
    return getattr(problem, "conduction", problem)


def save(folder: Path, stepper: TimeStepper, monitor, rows: list, field_entries: list, sha256: str,
         worst: dict) -> None:
    """Write the checkpoint of ``stepper`` (and ``monitor``) into ``folder``."""
    h = stepper._history
    arrays = {"y": stepper.y, "history_y": np.array(h.y), "history_m": np.array(h.m), "history_t": np.array(h.t),
              "dts": np.array(stepper._dts, dtype=float)}
    guess = _conduction(stepper.problem)._surface_guess
    if guess is not None:
        arrays["surface_guess"] = guess
    if stepper._f0 is not None:
        arrays["f0"] = stepper._f0
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    meta = {
        "case_sha256": sha256, "t": stepper.t, "dt": stepper.dt, "last_dt": stepper.last_dt, "order": stepper.order,
        "inflow": stepper._inflow, "balance_error": stepper.balance_error,
        "cumulative_inflow": stepper.cumulative_inflow, "counters": asdict(stepper.counters),
        "monitor": None if monitor is None else {k: getattr(monitor, k) for k in MONITOR_FIELDS}
        | {"previous": list(monitor._previous)},
        "rows": rows, "field_entries": field_entries, "worst": worst,
    }
    # the arrays first: a checkpoint.json always points at arrays of its own step or later
    atomic_write_bytes(folder / "checkpoint.npz", buf.getvalue())
    meta["arrays_t"] = stepper.t
    atomic_write_text(folder / "checkpoint.json", json.dumps(meta))


def load(folder: Path, sha256: str) -> tuple[dict, dict]:
    """Read a checkpoint; refuse one made from a different case."""
    folder = Path(folder)
    try:
        meta = json.loads((folder / "checkpoint.json").read_text())
        with np.load(folder / "checkpoint.npz", allow_pickle=False) as data:
            arrays = {k: data[k] for k in data.files}
    except (OSError, ValueError) as exc:
        raise CaseError(f"--resume {folder}: no usable checkpoint there ({exc}); run without --resume") from exc
    if meta["case_sha256"] != sha256:
        raise CaseError(f"--resume {folder}: the case changed since the checkpoint (hash {sha256[:12]} against "
                        f"{meta['case_sha256'][:12]}); resume with the same case or start a new run")
    if float(arrays["history_t"][0]) != meta["t"]:
        raise CaseError(f"--resume {folder}: the checkpoint's files are from different steps; start a new run")
    return meta, arrays


def restore(stepper: TimeStepper, monitor, meta: dict, arrays: dict) -> None:
    """Put a fresh stepper (and monitor) back into the checkpointed state."""
    stepper.t = float(meta["t"])
    stepper.y = arrays["y"].copy()
    stepper.dt, stepper.last_dt, stepper.order = meta["dt"], meta["last_dt"], meta["order"]
    stepper._history = _History(list(arrays["history_t"]), [r.copy() for r in arrays["history_y"]],
                                [r.copy() for r in arrays["history_m"]])
    stepper._dts = list(arrays["dts"])
    stepper._inflow = dict(meta["inflow"])
    stepper.balance_error = dict(meta["balance_error"])
    stepper.cumulative_inflow = dict(meta["cumulative_inflow"])
    stepper.counters = Counters(**meta["counters"])
    stepper._f0 = arrays.get("f0")
    stepper._last_evaluation = None
    stepper._affine_rate = None
    _conduction(stepper.problem)._surface_guess = arrays.get("surface_guess")
    if monitor is not None and meta["monitor"] is not None:
        for k in MONITOR_FIELDS:
            setattr(monitor, k, meta["monitor"][k])
        monitor._previous = tuple(meta["monitor"]["previous"])
