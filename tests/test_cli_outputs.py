"""Command-line outputs a user reads: the key listing, the starter case, the progress bar, the README's
first command run twice, the revolved export's command."""
from __future__ import annotations

import io
import json
import subprocess
import sys
from pathlib import Path
from types import SimpleNamespace

from fvsolver.case.loader import load_case
from fvsolver.case.schema import CASE
from fvsolver.cli import ProgressBar, main

ROOT = Path(__file__).resolve().parents[1]


def test_keys_lists_every_key_with_unit_default_and_range(capsys):
    assert main(["keys"]) == 0
    out = capsys.readouterr().out
    assert "room.air_temperature" in out and "geometry.glass_thickness" in out and "materials.NAME.density" in out
    row = next(line for line in out.splitlines() if line.startswith("room.pressure "))
    assert row.split()[1:] == ["Pa", "101325", ">=", "60000,", "<=", "110000"]
    for table in CASE.children:  # every top-level key or table appears
        assert table.name in out, table.name
    assert main(["keys", "numerics"]) == 0
    assert "room." not in capsys.readouterr().out


def test_new_writes_a_commented_starter_case_that_runs(tmp_path, capsys):
    path = tmp_path / "head.toml"
    assert main(["new", str(path)]) == 0
    text = path.read_text()
    assert "glass_thickness = 0.0012   # Thickness of the glass wall; m; > 0" in text
    assert "CAUTION" in text and "invented" in text
    case = load_case(path)
    assert case["geometry"]["shape"] == "device_head" and case["fluid"]["name"] == "dichloromethane"
    assert main(["new", str(path)]) == 2
    assert "exists" in capsys.readouterr().err


def test_new_whole_device_writes_a_running_device_that_checks(tmp_path):
    path = tmp_path / "device.toml"
    assert main(["new", "--whole-device", str(path)]) == 0
    text = path.read_text()
    assert "CAUTION" in text and "invented" in text and "[cycle]" in text and "[pool]" in text
    case = load_case(path)
    assert case["geometry"]["shape"] == "whole_device" and case["cycle"]["water_glass"] is True
    assert main(["check", str(path)]) == 0


def test_progress_bar_shows_the_way_to_the_target():
    bar = ProgressBar(1800.0)
    bar.clock = lambda: 100.0
    monitor = SimpleNamespace(problem=SimpleNamespace(pressures=lambda y: {"pressure_drop_pa": 485.0}),
                              target=lambda y: 647.0)
    err, sys.stderr = sys.stderr, io.StringIO()
    try:
        bar(SimpleNamespace(t=18.0, last_dt=0.5, y=None), monitor)
        text = sys.stderr.getvalue()
    finally:
        sys.stderr = err
    # 1 % of the end time, 75 % of the target
    assert "[....................] time" in text and "[#######...] dp   485.0 / 647.0 Pa" in text


def test_readme_first_command_works_twice(tmp_path):
    """Run as the README says, twice, in a fresh checkout: the second run keeps the first."""
    (tmp_path / "cases").mkdir()
    (tmp_path / "cases" / "demo.toml").write_text((ROOT / "cases" / "demo.toml").read_text().replace(
        "end = 1800.0", "end = 2.0").replace("field_times = [30.0, 120.0, 600.0]", "field_times = [1.0]"))
    command = [sys.executable, "-m", "fvsolver", "run", "cases/demo.toml", "--out", "results/demo",
               "--no-uncertainty"]
    env = {"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"}
    first = subprocess.run(command, cwd=tmp_path, capture_output=True, text=True, env=env, timeout=600)
    assert first.returncode == 0, first.stderr
    second = subprocess.run(command, cwd=tmp_path, capture_output=True, text=True, env=env, timeout=600)
    assert second.returncode == 0, second.stderr
    assert "results/demo holds an earlier run" in second.stderr and "results/demo-2" in second.stderr
    assert json.loads((tmp_path / "results" / "demo-2" / "summary.json").read_text())["status"] == "complete"
    assert (tmp_path / "results" / "demo" / "summary.json").is_file()
    ignored = subprocess.run(["git", "check-ignore", "-q", "results/demo/summary.json"], cwd=ROOT)
    assert ignored.returncode == 0  # run outputs never show up as changes to commit
