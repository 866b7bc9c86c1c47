"""Regression checks of a run against a kept baseline."""
from __future__ import annotations

import json

import pytest

from fvsolver.cli import main
from fvsolver.compare import compare
from fvsolver.errors import CaseError
from fvsolver.pipeline import run
from tests.device.helpers import device_case


def short(**changes):
    """The small device head for 12 s, fields at 4 s and 8 s (the target is not reached)."""
    return device_case(time={"end": 12.0}, output={"field_times": [4.0, 8.0]}, **changes)


@pytest.fixture(scope="module")
def baseline(tmp_path_factory):
    folder = tmp_path_factory.mktemp("baseline") / "run"
    run(short(), folder, plots=False)
    return folder


def test_a_rerun_matches_its_baseline_in_every_check(baseline, tmp_path):
    run(short(), tmp_path / "again", plots=False)
    result = compare(tmp_path / "again", baseline)
    assert result.passed
    names = [c.quantity for c in result.checks]
    assert "temperature field at t = 12 s (largest cell difference)" in names
    assert any(n.startswith("history pressure_drop_pa") for n in names)
    assert all(c.passed for c in result.checks), result.table()


def test_a_more_humid_room_is_caught(baseline, tmp_path):
    run(short(room={"relative_humidity": 0.55}), tmp_path / "humid", plots=False)
    result = compare(tmp_path / "humid", baseline)
    assert not result.passed
    failed = {c.quantity for c in result.checks if c.passed is False}
    assert "history pressure_drop_pa (largest)" in failed
    assert any("temperature field" in q for q in failed)
    code = main(["compare", str(tmp_path / "humid"), str(baseline), "--json", str(tmp_path / "c.json")])
    assert code == 1
    saved = json.loads((tmp_path / "c.json").read_text())
    assert saved["passed"] is False and len(saved["checks"]) == len(result.checks)
    # a loose enough tolerance accepts the change
    loose = compare(tmp_path / "humid", baseline, rtol=1.0, temperature_tol=5.0, history_rtol=1.0)
    assert loose.passed


def test_a_changed_mesh_compares_results_but_not_fields(baseline, tmp_path):
    run(short(mesh={"polar_cells": 30}), tmp_path / "finer", plots=False)
    result = compare(tmp_path / "finer", baseline, rtol=0.05, temperature_tol=0.5, history_rtol=0.05)
    field = [c for c in result.checks if c.quantity.startswith("temperature field")][0]
    assert field.passed is None and "meshes differ" in field.note
    assert result.passed  # the scalar results agree within the looser tolerances


def test_a_changed_stall_kind_differs(tmp_path):
    for name, reason in (("a", "the room is too humid: at 24.0 C and 90 % ..."), ("b", "the end time (60 s) came first")):
        (tmp_path / name).mkdir()
        (tmp_path / name / "summary.json").write_text(json.dumps(
            {"status": "complete", "target_reached": False, "stall_reason": reason}))
    result = compare(tmp_path / "b", tmp_path / "a")
    stall = [c for c in result.checks if c.quantity == "stall reason (kinds)"][0]
    assert stall.baseline == "humid room" and stall.new == "end time first" and stall.passed is False
    assert not result.passed


def test_bad_inputs_are_refused_with_a_fix(tmp_path, capsys):
    with pytest.raises(CaseError, match="no summary.json.*run the case first"):
        compare(tmp_path / "missing", tmp_path)
    with pytest.raises(CaseError, match="rtol = -1"):
        compare(tmp_path, tmp_path, rtol=-1.0)
    assert main(["compare", str(tmp_path / "missing"), str(tmp_path)]) == 2
    assert "no summary.json" in capsys.readouterr().err


def test_two_sweeps_are_compared_run_by_run(tmp_path):
    from fvsolver.sweeps import Vary, sweep

    case = short()
    sweep(case, [Vary("room.air_speed", (0.1, 0.4))], tmp_path / "base")
    sweep(case, [Vary("room.air_speed", (0.1, 0.4))], tmp_path / "again")
    same = compare(tmp_path / "again", tmp_path / "base")
    assert same.passed
    assert any(c.quantity.startswith("[room.air_speed = 0.4] time_to_target_s") or
               c.quantity.startswith("[room.air_speed = 0.4] history pressure_drop_pa") for c in same.checks)
    sweep(case, [Vary("room.air_speed", (0.1, 0.5))], tmp_path / "other")
    grid = compare(tmp_path / "other", tmp_path / "base")
    assert not grid.passed and grid.checks[0].quantity.startswith("sweep grid")


def test_table_has_units_separate_differences_and_fits_a_terminal(baseline, tmp_path):
    run(short(room={"relative_humidity": 0.5}, cap_water={"mode": "charge"}), tmp_path / "other", plots=False)
    result = compare(tmp_path / "other", baseline)
    table = result.table(100)
    lines = table.splitlines()
    assert lines[0].split() == ["quantity", "unit", "baseline", "new", "abs", "diff", "rel", "diff", "tolerance",
                                "verdict"]
    assert max(len(line) for line in lines) <= 100
    row = next(line for line in lines if line.startswith("max pressure drop"))
    fields = row.split()
    assert fields[3] == "Pa"
    b, n = float(fields[4]), float(fields[5])
    assert float(fields[6]) == pytest.approx(n - b, rel=1e-2)            # absolute, new - baseline
    assert float(fields[7]) == pytest.approx((n - b) / b, rel=5e-2)      # relative, in its own column
    # the history row's "new" is the new run's own largest value, not an interpolation
    check = next(c for c in result.checks if c.quantity.startswith("history pressure_drop_pa"))
    summary = json.loads((tmp_path / "other" / "summary.json").read_text())
    assert check.new == pytest.approx(summary["max_pressure_drop_pa"], rel=1e-9)
    assert any("differ in kind" in w and "cap_water.mode" in w for w in result.warnings)
    assert "WARNING: the cases differ in kind" in table
    assert compare(tmp_path / "other", tmp_path / "other").warnings == []


def test_a_running_device_is_compared_by_its_cycle(tmp_path):
    """The outcome, first tip and periods of a whole device's run are regression checks too."""
    from tests.device.cycle_helpers import whole_case

    quick = {"cycle": {"tip_column_height": 0.05, "water_glass": True, "max_cycles": 3}, "time": {"end": 60.0}}
    run(whole_case(**quick), tmp_path / "base", plots=False)
    run(whole_case(**quick), tmp_path / "same", plots=False)
    same = compare(tmp_path / "same", tmp_path / "base")
    names = [c.quantity for c in same.checks]
    assert same.passed and {"outcome", "first_tip_s", "last_period_s"} <= set(names)
    humid = whole_case(**quick, room={"air_temperature": 297.15, "relative_humidity": 0.6, "air_speed": 0.2})
    run(humid, tmp_path / "humid", plots=False)
    diff = compare(tmp_path / "humid", tmp_path / "base")
    failed = {c.quantity for c in diff.checks if c.passed is False}
    assert not diff.passed and {"first_tip_s", "last_period_s"} <= failed
