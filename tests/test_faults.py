"""Faults: stop signals, killed runs, resumes, damaged checkpoints, dying sweep workers.

A run that is stopped saves a checkpoint and resumes to the uninterrupted result bit for bit; a
checkpoint that was damaged or edited is refused with exit 2; a sweep's workers die with it and
a worker's death is a failed row.
"""
from __future__ import annotations

import json
import math
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import fvsolver
from fvsolver import checkpoint
from fvsolver.errors import CaseError
from fvsolver.pipeline import run
from tests.test_resume import StopAfter

ROOT = Path(__file__).resolve().parents[1]

def fast(folder: Path, name: str) -> Path:
    """A shipped case with the demo's earlier, coarser settings (4 cap cells, tolerance 0.02 K):
    the same physics in fewer steps, for tests of the machinery rather than the numbers."""
    text = (ROOT / "cases" / name).read_text().replace("cap_cells = 8", "cap_cells = 4").replace(
        "tolerance = 0.001", "tolerance = 0.02")
    path = folder / name
    path.write_text(text)
    return path


# ----------------------------------------------------------------------------- resume, bit for bit
@pytest.mark.parametrize("name, stop", [("demo.toml", 7), ("glass_bulb_cooling.toml", 17)])
def test_a_resumed_run_takes_the_same_steps_bit_for_bit(tmp_path, name, stop):
    """The device demo (a refactorised Jacobian with a kept ordering) and the conduction case (an
    affine problem with a carried rate) each resume to the identical step sequence and state."""
    case = fvsolver.load_case(fast(tmp_path, name))
    whole = run(case, tmp_path / "whole", plots=False)
    out = tmp_path / "parts"
    assert run(case, out, progress=StopAfter(stop), plots=False).summary["status"] == "interrupted"
    resumed = run(case, out, resume=True, plots=False)
    assert np.array_equal(resumed.history["time_s"], whole.history["time_s"])
    assert np.array_equal(resumed.state, whole.state)
    assert resumed.summary["time_to_target_s"] == whole.summary["time_to_target_s"]
    assert resumed.summary["n_newton_iterations"] == whole.summary["n_newton_iterations"]


def test_the_first_step_is_checkpointed(tmp_path):
    case = fvsolver.load_case(ROOT / "cases" / "glass_bulb_cooling.toml")
    out = tmp_path / "o"
    seen = []

    def look(stepper, monitor):
        seen.append((out / "checkpoint.json").exists())
        raise KeyboardInterrupt

    run(case, out, progress=look, checkpoint_every=3600.0, plots=False)
    assert seen == [True]  # written before the first progress call, not 30 s in


def test_a_plain_rerun_into_an_unfinished_run_says_how_to_resume(tmp_path):
    case = fvsolver.load_case(ROOT / "cases" / "glass_bulb_cooling.toml")
    out = tmp_path / "o"
    run(case, out, progress=StopAfter(2), plots=False)
    with pytest.raises(CaseError, match=f"--resume {out}"):
        run(case, out)


def test_left_over_part_files_are_removed_on_resume(tmp_path):
    case = fvsolver.load_case(ROOT / "cases" / "glass_bulb_cooling.toml")
    out = tmp_path / "o"
    run(case, out, progress=StopAfter(2), plots=False)
    part = out / ".checkpoint.npz.k3j2_x.part"
    part.write_bytes(b"half a checkpoint")
    run(case, out, resume=True, plots=False)
    assert not part.exists()
    assert not list(out.glob(".*.part"))


def _long_case(tmp_path: Path) -> Path:
    text = (ROOT / "cases" / "glass_bulb_cooling.toml").read_text()
    text = text.replace("max_step = 30.0", "max_step = 0.01\nadaptive = false").replace(
        "initial_step = 0.1", "initial_step = 0.01").replace("end = 600.0", "end = 2000.0")
    path = tmp_path / "long.toml"
    path.write_text(text)
    return path


def _wait_for(path: Path, seconds: float = 60.0) -> None:
    limit = time.monotonic() + seconds
    while not path.exists():
        assert time.monotonic() < limit, f"{path} did not appear"
        time.sleep(0.1)


def test_sigterm_stops_a_run_as_ctrl_c_does(tmp_path):
    """SIGTERM (timeout, batch schedulers, container stops): checkpoint, interrupted, exit 143."""
    out = tmp_path / "o"
    proc = subprocess.Popen([sys.executable, "-m", "fvsolver", "run", str(_long_case(tmp_path)), "--out", str(out),
                             "-q"], cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        _wait_for(out / "checkpoint.json")
        time.sleep(0.5)
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=60)
    finally:
        proc.kill()
    assert proc.returncode == 128 + signal.SIGTERM == 143, err
    assert "Traceback" not in err
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "interrupted" and "SIGTERM" in summary["reason"]
    meta, _ = checkpoint.load(out, fvsolver.load_case(tmp_path / "long.toml").sha256)
    assert meta["t"] == pytest.approx(summary["end_time_s"])


# ----------------------------------------------------------------------------- damaged checkpoints
@pytest.fixture(scope="module")
def checkpointed(tmp_path_factory):
    """An interrupted device run's folder and its case."""
    folder = tmp_path_factory.mktemp("ckpt")
    case = fvsolver.load_case(fast(folder, "demo.toml"))
    out = folder / "o"
    run(case, out, progress=StopAfter(4), plots=False)
    return case, out


def _resign(meta: dict) -> dict:
    meta["checksum"] = checkpoint._checksum(meta)
    return meta


BAD_VALUES = [None, True, "text", [], {}, -1, 0, 0.0, math.nan, math.inf, -math.inf, 1e308, [1.0, 2.0]]
META_KEYS = ["case_sha256", "t", "dt", "last_dt", "order", "inflow", "balance_error", "cumulative_inflow",
             "counters", "monitor", "rows", "field_entries", "worst", "arrays_sha256"]


@st.composite
def tamperings(draw):
    """One damage to a checkpoint, and whether the checksum is made to match it again."""
    kind = draw(st.sampled_from(["drop key", "bad value", "dt", "short array", "nan array", "climbing path",
                                 "flip byte", "cut json", "drop array"]))
    resign = draw(st.booleans()) if kind not in ("flip byte", "cut json") else False
    if kind == "drop key":
        detail = draw(st.sampled_from(META_KEYS))
    elif kind == "bad value":
        detail = (draw(st.sampled_from(META_KEYS[1:])), draw(st.sampled_from(BAD_VALUES)))
    elif kind == "dt":
        detail = draw(st.sampled_from([0.0, -0.5, math.nan, math.inf, 1e-320 * 0.0]))
    elif kind in ("short array", "nan array", "drop array"):
        detail = draw(st.sampled_from(["y", "history_y", "history_m", "history_t", "dts"]))
    elif kind == "climbing path":
        detail = draw(st.sampled_from(["../../outside.vtu", "/etc/hostname", "sub/fields_0001.vtu", "fields_01.vtu",
                                       "..\\fields_0001.vtu"]))
    else:
        detail = draw(st.integers(0, 10_000))
    return kind, detail, resign


def tamper(folder: Path, kind: str, detail, resign: bool) -> None:
    jpath, npath = folder / "checkpoint.json", folder / "checkpoint.npz"
    meta = json.loads(jpath.read_text())
    if kind == "flip byte":
        data = bytearray(npath.read_bytes())
        data[detail % len(data)] ^= 0x5A
        npath.write_bytes(bytes(data))
        return
    if kind == "cut json":
        text = jpath.read_text()
        jpath.write_text(text[: detail % len(text)])
        return
    if kind in ("short array", "nan array", "drop array"):
        with np.load(npath) as data:
            arrays = {k: data[k] for k in data.files}
        if kind == "drop array":
            del arrays[detail]
        elif kind == "short array":
            arrays[detail] = arrays[detail][..., :1] if arrays[detail].size else np.ones(5)
        else:
            arrays[detail] = np.full(arrays[detail].shape or (1,), np.nan)
        np.savez(npath, **arrays)
        if resign:
            import hashlib

            meta["arrays_sha256"] = hashlib.sha256(npath.read_bytes()).hexdigest()
    elif kind == "drop key":
        del meta[detail]
    elif kind == "bad value":
        key, value = detail
        meta[key] = value
    elif kind == "dt":
        meta["dt"] = detail
    elif kind == "climbing path":
        meta["field_entries"][-1][1] = detail
    jpath.write_text(json.dumps(_resign(meta) if resign else meta))


TAMPER_EXAMPLES = int(os.environ.get("FVSOLVER_TAMPER_EXAMPLES", "40"))


@settings(max_examples=TAMPER_EXAMPLES, deadline=None, database=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(damage=tamperings())
def test_a_damaged_or_edited_checkpoint_is_refused_with_exit_2(checkpointed, tmp_path_factory, damage):
    """40 examples by default (FVSOLVER_TAMPER_EXAMPLES for an offline run): every damage is a
    CaseError (exit 2) naming the checkpoint, never a hang, a traceback or a resumed run."""
    case, source = checkpointed
    folder = tmp_path_factory.mktemp("tampered") / "o"
    shutil.copytree(source, folder)
    kind, detail, resign = damage
    tamper(folder, kind, detail, resign)
    before = sorted(p.name for p in folder.iterdir())
    with pytest.raises(CaseError, match=f"--resume {folder}"):
        checkpoint.load(folder, case.sha256, fvsolver.pipeline.build_checked(case))
    assert sorted(p.name for p in folder.iterdir()) == before


def test_an_intact_checkpoint_passes_the_checks(checkpointed):
    case, folder = checkpointed
    meta, arrays = checkpoint.load(folder, case.sha256, fvsolver.pipeline.build_checked(case))
    assert meta["counters"]["steps"] == 4 and arrays["y"].shape == (fvsolver.pipeline.build_checked(case).problem.n,)


def test_resume_with_a_zero_step_ends_in_exit_2_not_a_hang(checkpointed, tmp_path):
    from fvsolver.cli import main

    case, source = checkpointed
    folder = tmp_path / "o"
    shutil.copytree(source, folder)
    tamper(folder, "dt", 0.0, resign=True)
    assert main(["run", str(case.path), "--resume", str(folder), "-q"]) == 2


# ----------------------------------------------------------------------------- sweeps
def _children(pid: int) -> list[int]:
    out = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields_ = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields_[1]) == pid:
            out.append(int(stat.parent.name))
    return out


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads the process table from /proc")
def test_killing_a_sweep_leaves_no_orphan_workers(tmp_path):
    proc = subprocess.Popen([sys.executable, "-m", "fvsolver", "sweep", str(_long_case(tmp_path)), "--vary",
                             "initial.temperature=290,291,292,293", "--jobs", "2", "--out", str(tmp_path / "s"),
                             "-q"], cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        _wait_for(tmp_path / "s" / "runs" / "000" / "checkpoint.json", 120)
        workers = [p for p in _children(proc.pid) if "python" in Path(f"/proc/{p}/cmdline").read_text()]
        assert workers
        proc.kill()  # SIGKILL: the parent cannot clean up
        proc.wait(timeout=30)
        limit = time.monotonic() + 10
        while any(_alive(p) for p in workers) and time.monotonic() < limit:
            time.sleep(0.2)
        assert not any(_alive(p) for p in workers)
    finally:
        proc.kill()
        for p in _children(proc.pid):
            os.kill(p, signal.SIGKILL)


def test_a_worker_that_dies_becomes_a_failed_row_and_the_rest_finish():
    from fvsolver.workers import run_all
    from tests.worker_helpers import dies_on_two

    rows = {}
    run_all(dies_on_two, {i: (i,) for i in range(5)}, 2, rows.__setitem__,
            lambda i, what: ({"status": "failed"}, what, 0.0))
    assert sorted(rows) == [0, 1, 2, 3, 4]
    assert rows[2][0]["status"] == "failed" and "worker process died" in rows[2][1]
    assert all(rows[i][0]["status"] == "complete" for i in (0, 1, 3, 4))
