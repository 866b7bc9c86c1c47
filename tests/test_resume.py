"""Kill-and-resume: a run stopped part-way and continued reaches the uninterrupted result."""
from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

import fvsolver
from fvsolver.errors import CaseError
from fvsolver.pipeline import run

ROOT = Path(__file__).resolve().parents[1]


class StopAfter:
    """A progress callback that interrupts the run after ``n`` steps, as Ctrl-C would."""

    def __init__(self, n: int):
        self.n = n

    def __call__(self, stepper, monitor):
        if stepper.counters.steps >= self.n:
            raise KeyboardInterrupt


def test_interrupted_run_resumes_to_the_same_time_to_target(tmp_path):
    case = fvsolver.load_case(ROOT / "cases" / "demo.toml")
    whole = run(case, tmp_path / "whole")
    out = tmp_path / "parts"
    part = run(case, out, progress=StopAfter(7), checkpoint_every=0.0)
    assert part.summary["status"] == "interrupted"
    assert json.loads((out / "summary.json").read_text())["status"] == "interrupted"
    resumed = run(case, out, resume=True, checkpoint_every=0.0)
    assert resumed.summary["status"] == "complete"
    t_whole, t_resumed = whole.summary["time_to_target_s"], resumed.summary["time_to_target_s"]
    assert t_resumed == pytest.approx(t_whole, rel=1e-9)
    assert resumed.summary["n_steps"] == whole.summary["n_steps"]


def test_resume_refuses_a_changed_case(tmp_path):
    case_file = tmp_path / "demo.toml"
    shutil.copy(ROOT / "cases" / "demo.toml", case_file)
    out = tmp_path / "o"
    run(fvsolver.load_case(case_file), out, progress=StopAfter(3), checkpoint_every=0.0)
    case_file.write_text(case_file.read_text().replace("relative_humidity = 0.45", "relative_humidity = 0.5"))
    with pytest.raises(CaseError, match="the case changed since the checkpoint"):
        run(fvsolver.load_case(case_file), out, resume=True)


def test_a_step_that_cannot_converge_stops_with_a_reason_and_the_last_good_fields(tmp_path):
    """A tolerance no step can meet above min_step: exit 3, status failed, plain words, fields kept."""
    from fvsolver.cli import main

    text = (ROOT / "cases" / "demo.toml").read_text().replace("tolerance = 0.001", "tolerance = 1e-9").replace(
        "initial_step = 0.05", "initial_step = 0.05\nmin_step = 0.01")
    case = tmp_path / "strict.toml"
    case.write_text(text)
    out = tmp_path / "o"
    assert main(["run", str(case), "--out", str(out), "-q"]) == 3
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "failed" and "min_step" in summary["reason"]
    assert (out / "fields.pvd").is_file() and len(list(out.glob("fields_*.vtu"))) >= 1
