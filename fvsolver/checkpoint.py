"""Checkpoints of a run: enough to continue a killed run to the same result, bit for bit.

A checkpoint is two files written atomically in the output folder: ``checkpoint.npz`` (the
arrays: state, history of the stepper, the surface-temperature guess, the carried rate of an
affine problem, the ordering of the Jacobian's factor) and ``checkpoint.json`` (scalars,
counters, the monitor, the history rows and a SHA-256 checksum of both files' content).
Nothing in them is executed on loading: arrays and JSON only.  Every entry is checked on
loading (names, types, shapes, finite values, a positive step, field files inside the folder)
and a checkpoint whose content does not match its checksum is refused.
"""
from __future__ import annotations

import hashlib
import io
import json
import math
import re
import zipfile
from dataclasses import asdict, fields
from pathlib import Path

import numpy as np

from fvsolver.errors import CaseError
from fvsolver.outputs.files import atomic_write_bytes, atomic_write_text
from fvsolver.stepper import Counters, TimeStepper, _History

MONITOR_FIELDS = ("time_to_target", "max_pressure_drop", "max_pressure_drop_time", "max_absolute_pressure",
                  "max_glass_temperature", "min_inner_wall_temperature", "dried_out_time", "added_energy",
                  "added_water", "last_time")
FIELD_FILE = re.compile(r"fields_\d{4,}\.vtu")  # the only names a field entry may hold
META_BYTES = 512 * 1024 * 1024  # a checkpoint.json above this is not one of ours


def _conduction(problem):
    return getattr(problem, "conduction", problem)


def _checksum(meta: dict) -> str:
    body = {k: v for k, v in meta.items() if k != "checksum"}
    return hashlib.sha256(json.dumps(body, sort_keys=True).encode()).hexdigest()


def save(folder: Path, stepper: TimeStepper, monitor, rows: list, field_entries: list, sha256: str,
         worst: dict, extra: dict | None = None) -> None:
    """Write the checkpoint of ``stepper`` (and ``monitor``) into ``folder``.

    ``extra`` holds further JSON-ready state of the run (kept under its own keys).
    """
    h = stepper._history
    arrays = {"y": stepper.y, "history_y": np.array(h.y), "history_m": np.array(h.m), "history_t": np.array(h.t),
              "dts": np.array(stepper._dts, dtype=float)}
    guess = _conduction(stepper.problem)._surface_guess
    if guess is not None:
        arrays["surface_guess"] = guess
    if stepper._f0 is not None:
        arrays["f0"] = stepper._f0
    if stepper._affine_rate is not None:  # carried from step to step: recomputing it differs in round-off
        arrays["affine_rate"] = stepper._affine_rate
    order = stepper._factorise.state()
    if order is not None:  # the factor's ordering: a fresh one would round differently
        arrays.update(factor_indptr=order["indptr"], factor_indices=order["indices"], factor_order=order["order"])
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    data = buf.getvalue()
    meta = {
        "case_sha256": sha256, "t": stepper.t, "dt": stepper.dt, "last_dt": stepper.last_dt, "order": stepper.order,
        "inflow": stepper._inflow, "balance_error": stepper.balance_error,
        "cumulative_inflow": stepper.cumulative_inflow, "counters": asdict(stepper.counters),
        "monitor": None if monitor is None else {k: getattr(monitor, k) for k in MONITOR_FIELDS}
        | {"previous": list(monitor._previous)},
        "rows": rows, "field_entries": field_entries, "worst": worst,
        "arrays_t": stepper.t, "arrays_sha256": hashlib.sha256(data).hexdigest(),
    }
    meta.update(extra or {})
    meta["checksum"] = _checksum(meta)
    # the arrays first: a checkpoint.json always points at arrays of its own step (its checksum says so)
    atomic_write_bytes(folder / "checkpoint.npz", data)
    atomic_write_text(folder / "checkpoint.json", json.dumps(meta))


class _Refuse(Exception):
    pass


def _need(ok: bool, what: str) -> None:
    if not ok:
        raise _Refuse(what)


def _real(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _check_meta(meta, setup) -> None:
    _need(isinstance(meta, dict), "checkpoint.json does not hold a table")
    for key in ("case_sha256", "t", "dt", "last_dt", "order", "inflow", "balance_error", "cumulative_inflow",
                "counters", "monitor", "rows", "field_entries", "worst", "arrays_sha256"):
        _need(key in meta, f"checkpoint.json has no {key!r}")
    _need(_real(meta["t"]) and meta["t"] >= 0.0, "t is not a finite time >= 0")
    _need(_real(meta["dt"]) and meta["dt"] > 0.0, f"the step dt = {str(meta['dt'])[:40]} is not a finite time > 0")
    _need(_real(meta["last_dt"]) and meta["last_dt"] >= 0.0, "last_dt is not a finite time >= 0")
    _need(meta["order"] in (1, 2) and not isinstance(meta["order"], bool), "order is not 1 or 2")
    for key in ("inflow", "balance_error", "cumulative_inflow", "worst"):
        d = meta[key]
        _need(isinstance(d, dict) and all(isinstance(k, str) and _real(v) for k, v in d.items()),
              f"{key} is not a table of finite numbers")
    c = meta["counters"]
    names = {f.name for f in fields(Counters)}
    _need(isinstance(c, dict) and set(c) == names and all(isinstance(v, int) and not isinstance(v, bool) and v >= 0
                                                          for v in c.values()), "counters are not whole numbers")
    _need(isinstance(meta["rows"], list) and meta["rows"] and all(isinstance(r, dict) for r in meta["rows"]),
          "rows is not a list of history rows")
    entries = meta["field_entries"]
    _need(isinstance(entries, list) and entries and all(
        isinstance(e, list) and len(e) == 2 and _real(e[0]) and isinstance(e[1], str) and FIELD_FILE.fullmatch(e[1])
        for e in entries), "a field entry is not (time, fields_NNNN.vtu) (paths may not leave the folder)")
    m = meta["monitor"]
    if setup is not None:
        most = setup.options.max_step * (1 + 1e-12)  # no step of the run can be longer
        _need(meta["dt"] <= most and meta["last_dt"] <= most, f"a step is longer than max_step {most:g} s")
        _need(meta["t"] <= setup.end_time, f"t is after the end time {setup.end_time:g} s")
        _need((m is None) == (setup.device is None), "the monitor does not match the case")
        groups = set(setup.problem.balance_groups())
        _need(set(meta["inflow"]) == groups, "the balance groups do not match the case")
        stepped = isinstance(meta["counters"], dict) and meta["counters"].get("steps", 0) > 0
        _need(meta["last_dt"] > 0.0 or not stepped, "last_dt is not a positive step")
        for key in ("balance_error", "cumulative_inflow", "worst"):
            _need(set(meta[key]) == groups if stepped else set(meta[key]) <= groups,
                  f"{key} does not hold the case's balance groups")
    if m is not None:
        _need(isinstance(m, dict) and all(k in m for k in MONITOR_FIELDS) and isinstance(m.get("previous"), list)
              and len(m["previous"]) == 2, "the monitor's entries are incomplete")
        _need(all(m[k] is None or isinstance(m[k], (int, float)) and not isinstance(m[k], bool)
                  for k in MONITOR_FIELDS), "a monitor entry is not a number")


def _check_arrays(arrays: dict, meta: dict, setup) -> None:
    for key in ("y", "history_y", "history_m", "history_t", "dts"):
        _need(key in arrays, f"checkpoint.npz has no {key!r}")
    for key, a in arrays.items():
        _need(a.dtype.kind in "fiu", f"{key} is not numeric")
        if key.startswith("factor_"):
            continue
        _need(np.all(np.isfinite(a)), f"{key} holds values that are not finite")
    n = setup.problem.n if setup is not None else arrays["y"].shape[0]
    k = arrays["history_t"].shape[0]
    _need(arrays["y"].shape == (n,), f"y has shape {arrays['y'].shape}, expected ({n},)")
    _need(1 <= k <= 3 and arrays["history_t"].ndim == 1, "history_t does not hold 1 to 3 times")
    _need(arrays["history_y"].shape == (k, n) and arrays["history_m"].shape == (k, n),
          f"the stepper's history is not {k} states of {n} values")
    _need(arrays["dts"].ndim == 1 and k - 1 <= arrays["dts"].shape[0] <= 3 and np.all(arrays["dts"] > 0),
          f"dts is not {k - 1} to 3 positive steps")
    _need(float(arrays["history_t"][0]) == meta["t"], "the arrays are from another step than checkpoint.json")
    for key in ("f0", "affine_rate"):
        if key in arrays:
            _need(arrays[key].shape == (n,), f"{key} has shape {arrays[key].shape}, expected ({n},)")
    if setup is not None and "surface_guess" in arrays:
        nb = setup.mesh.n_boundary
        _need(arrays["surface_guess"].shape == (nb,), f"surface_guess is not {nb} values")
    order = [arrays.get(f"factor_{x}") for x in ("indptr", "indices", "order")]
    if any(x is not None for x in order):
        _need(all(x is not None and x.ndim == 1 and x.dtype.kind in "iu" for x in order), "the factor's ordering "
              "is incomplete")
        indptr, indices, q = order
        m = indptr.shape[0] - 1
        _need(m >= n and np.array_equal(np.sort(q), np.arange(m)), "the factor's ordering is not a permutation")
        _need(indptr[0] == 0 and np.all(np.diff(indptr) >= 0) and indptr[-1] == indices.shape[0]
              and (indices.size == 0 or 0 <= indices.min() and indices.max() < m), "the factor's pattern is damaged")


def _read_arrays(path: Path, limit: int) -> dict:
    with zipfile.ZipFile(path) as z:  # the sizes first: a compressed member may not expand past the limit
        total = sum(info.file_size for info in z.infolist())
        _need(total <= limit, f"checkpoint.npz would expand to {total:,} bytes, more than the {limit:,} this "
                              "case's state needs")
    with np.load(path, allow_pickle=False) as data:
        return {k: data[k] for k in data.files}


def load(folder: Path, sha256: str, setup=None) -> tuple[dict, dict]:
    """Read and check a checkpoint; refuse one made from a different case, damaged or edited.

    Parameters
    ----------
    setup : the run's Setup, to check the arrays' shapes against (None: shapes checked among themselves)

    Raises
    ------
    CaseError
        Naming what is missing, damaged or does not match, and what to do.
    """
    folder = Path(folder)
    where = f"--resume {folder}"
    try:
        jpath, npath = folder / "checkpoint.json", folder / "checkpoint.npz"
        if jpath.stat().st_size > META_BYTES:
            raise _Refuse(f"checkpoint.json is larger than {META_BYTES:,} bytes")
        text = jpath.read_text(encoding="utf-8")
        meta = json.loads(text)
        data = npath.read_bytes() if npath.stat().st_size <= 2 * META_BYTES else b""
    except FileNotFoundError as exc:
        raise CaseError(f"{where}: no checkpoint there ({exc.filename} is missing); run without --resume") from exc
    except (OSError, ValueError, RecursionError, _Refuse) as exc:
        raise CaseError(f"{where}: the checkpoint cannot be read ({str(exc)[:200]}); run again without --resume "
                        "(with --overwrite)") from exc
    try:
        _need(isinstance(meta, dict) and isinstance(meta.get("checksum"), str) and meta["checksum"] == _checksum(meta),
              "checkpoint.json does not match its checksum: it was damaged or edited")
        _need(hashlib.sha256(data).hexdigest() == meta.get("arrays_sha256"),
              "checkpoint.npz does not match the checksum in checkpoint.json: it was damaged, edited, or is from "
              "another step")
        if meta["case_sha256"] != sha256:
            raise CaseError(f"{where}: the case changed since the checkpoint (hash {sha256[:12]} against "
                            f"{str(meta['case_sha256'])[:12]}); resume with the same case or start a new run")
        _check_meta(meta, setup)
        n = setup.problem.n + setup.mesh.n_boundary if setup is not None else 1 << 20
        arrays = _read_arrays(io.BytesIO(data), 8 * 64 * n + (1 << 20))
        _check_arrays(arrays, meta, setup)
    except (_Refuse, zipfile.BadZipFile, ValueError, OSError, KeyError, TypeError) as exc:
        raise CaseError(f"{where}: the checkpoint is not usable ({str(exc)[:300]}); run again without --resume "
                        "(with --overwrite)") from exc
    return meta, arrays


def restore(stepper: TimeStepper, monitor, meta: dict, arrays: dict) -> None:
    """Put a fresh stepper (and monitor) back into the checkpointed state."""
    stepper.t = float(meta["t"])
    stepper.y = arrays["y"].astype(float)
    stepper.dt, stepper.last_dt, stepper.order = float(meta["dt"]), float(meta["last_dt"]), int(meta["order"])
    stepper._history = _History([float(t) for t in arrays["history_t"]], [r.astype(float) for r in arrays["history_y"]],
                                [r.astype(float) for r in arrays["history_m"]])
    stepper._dts = [float(d) for d in arrays["dts"]]
    stepper._inflow = {k: float(v) for k, v in meta["inflow"].items()}
    stepper.balance_error = {k: float(v) for k, v in meta["balance_error"].items()}
    stepper.cumulative_inflow = {k: float(v) for k, v in meta["cumulative_inflow"].items()}
    stepper.counters = Counters(**meta["counters"])
    stepper._f0 = arrays["f0"].astype(float) if "f0" in arrays else None
    stepper._last_evaluation = None
    stepper._affine_rate = arrays["affine_rate"].astype(float) if "affine_rate" in arrays else None
    if "factor_order" in arrays:
        stepper._factorise.restore(arrays["factor_indptr"], arrays["factor_indices"], arrays["factor_order"])
    guess = arrays.get("surface_guess")
    _conduction(stepper.problem)._surface_guess = None if guess is None else guess.astype(float)
    if monitor is not None and meta["monitor"] is not None:
        for k in MONITOR_FIELDS:
            setattr(monitor, k, meta["monitor"][k])
        monitor._previous = tuple(meta["monitor"]["previous"])
