"""The command line and the README quick start, run as a user would."""
from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from fvsolver.cli import main

ROOT = Path(__file__).resolve().parents[1]


def test_readme_quick_start_commands_are_the_ones_tested():
    readme = (ROOT / "README.md").read_text()
    assert 'pip install . && fvsolver run cases/demo.toml --out results/demo' in readme
    assert 'pip install ".[test]" && python -m pytest' in readme
    ci = (ROOT / ".ci" / "run").read_text()
    assert 'pip install ".[test]" && python -m pytest' in ci


def test_run_demo_writes_outputs(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["run", str(ROOT / "cases" / "demo.toml"), "--out", str(out)]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "complete"
    # the demo's recorded result (invented scenario): 22.1 s to lift the 50 mm column
    assert summary["target_reached"] is True
    assert summary["time_to_target_s"] == pytest.approx(22.1, abs=1.5)
    assert summary["energy_balance_relative_error"] < 1e-8
    pvd = (out / "fields.pvd").read_text()
    times = [float(t) for t in re.findall(r'timestep="([^"]+)"', pvd)]
    assert times[0] == 0.0 and times[-1] == pytest.approx(summary["end_time_s"])
    for name in ("history.png", "temperature_field.png", "report.md", "history.csv", "case_resolved.toml"):
        assert (out / name).is_file()
    for name in re.findall(r'file="([^"]+)"', pvd):
        assert (out / name).is_file()
    assert "reached at t =" in capsys.readouterr().out


def test_existing_output_folder_is_not_overwritten(tmp_path, capsys):
    out = tmp_path / "o"
    out.mkdir()
    (out / "keep.txt").write_text("x")
    assert main(["run", str(ROOT / "cases" / "demo.toml"), "--out", str(out)]) == 2
    assert "--overwrite" in capsys.readouterr().err


def test_check_reports_every_problem_and_exits_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text((ROOT / "cases" / "demo.toml").read_text().replace("density = 2230.0", "density = -1")
                   .replace("end = 1800.0", "end = 'soon'"))
    assert main(["check", str(bad)]) == 2
    err = capsys.readouterr().err
    assert f"{bad}:" in err and "materials.glass.density: got -1" in err and "time.end: got 'soon'" in err


def test_mesh_command_writes_a_vtu_that_a_case_can_use(tmp_path):
    vtu = tmp_path / "head.vtu"
    assert main(["mesh", str(ROOT / "cases" / "demo.toml"), "--out", str(vtu)]) == 0
    text = (ROOT / "cases" / "demo.toml").read_text()
    start, end = text.index("[geometry]"), text.index("[mesh]")
    case = tmp_path / "from_file.toml"
    case.write_text(text[:start] + f'[geometry]\nshape = "mesh_file"\nfile = "{vtu.name}"\n\n' + text[end:])
    assert main(["check", str(case)]) == 0


def test_verify_subset_writes_report(tmp_path):
    assert main(["verify", "--case", "hollow_cylinder", "--out", str(tmp_path), "-q"]) == 0
    report = json.loads((tmp_path / "verification.json").read_text())
    assert report["passed"] and (tmp_path / "convergence.png").stat().st_size > 1000


def test_version_and_help_show_an_example():
    out = subprocess.run([sys.executable, "-m", "fvsolver", "--help"], capture_output=True, text=True)
    assert out.returncode == 0 and "fvsolver run cases/" in out.stdout
    out = subprocess.run([sys.executable, "-m", "fvsolver", "--version"], capture_output=True, text=True)
    assert out.returncode == 0 and out.stdout.startswith("fvsolver ")
