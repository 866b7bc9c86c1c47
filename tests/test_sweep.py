"""Parameter sweeps: the --vary syntax, validation before anything runs, and the table."""
from __future__ import annotations

import contextlib
import csv
import json
import warnings

import pytest

import fvsolver
from fvsolver.case.loader import CaseErrors, with_changes
from fvsolver.cli import main
from fvsolver.errors import CaseError
from fvsolver.sweeps import Vary, parse_vary, sweep, variants
from tests.device.helpers import device_case


@pytest.mark.parametrize("text, path, values", [
    ("room.relative_humidity=0.3,0.5,0.7", "room.relative_humidity", (0.3, 0.5, 0.7)),
    ("room.air_temperature=293.15:303.15:3", "room.air_temperature", (293.15, 298.15, 303.15)),
    ("room.convection=natural,mixed", "room.convection", ("natural", "mixed")),
    ('room.convection="forced"', "room.convection", ("forced",)),
    ("mesh.polar_cells = 20, 40", "mesh.polar_cells", (20, 40)),
    ("mesh.polar_cells=20:40:3", "mesh.polar_cells", (20, 30, 40)),
])
def test_vary_syntax(text, path, values):
    deprecated = text.count(":") == 2  # START:STOP:N still reads, with a warning naming linspace
    with pytest.warns(FutureWarning, match="linspace") if deprecated else contextlib.nullcontext():
        v = parse_vary(text)
    assert v.path == path
    assert v.values == pytest.approx(values) if isinstance(values[0], float) else v.values == values


@pytest.mark.parametrize("text, message", [
    ("room.relative_humidity", "expected KEY.PATH=VALUES"),
    ("room..x=1", "empty part"),
    ("room.relative_humidity=0.2:0.8:1", "at least 2"),
    ("room.relative_humidity=0.2:x:3", "START:STOP:N"),
    ("room.relative_humidity=", "no value"),
    ("mesh.polar_cells=20:40:4", "does not step by whole numbers"),
])
def test_bad_vary_is_refused_with_the_fix(text, message):
    with pytest.raises(CaseError, match=message), warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)  # START:STOP:N's deprecation, checked above
        parse_vary(text)


def test_a_changed_case_is_validated_afresh_and_names_the_change():
    case = device_case()
    changed = with_changes(case, {"room.relative_humidity": 0.8})
    assert changed["room"]["relative_humidity"] == 0.8
    assert changed.sha256 != case.sha256
    with pytest.raises(CaseErrors, match=r"\[room.relative_humidity = 1.5\].*expected a number in \[0, 1\]"):
        with_changes(case, {"room.relative_humidity": 1.5})
    with pytest.raises(CaseErrors, match="did you mean 'relative_humidity'"):
        with_changes(case, {"room.relative_humdity": 0.5})


def test_every_combination_is_checked_before_anything_runs(tmp_path):
    case = device_case()
    varies = [Vary("room.relative_humidity", (0.4, 1.2, 1.4)), Vary("room.air_speed", (0.1, 0.3))]
    with pytest.raises(CaseErrors) as info:
        sweep(case, varies, tmp_path / "out")
    assert len(info.value.problems) == 4  # two bad humidities x two speeds, all reported
    assert not (tmp_path / "out").exists()  # nothing written
    assert len(variants(case, varies[1:])) == 2  # the good key alone: two valid variants


def test_sweep_table_follows_the_physics(tmp_path):
    """A drier room evaporates faster, so the target comes sooner (the device's main trend);
    a run that cannot reach the target in its time is a row, not an error."""
    case = device_case(time={"end": 60.0})
    rows = fvsolver.sweep(case, {"room.relative_humidity": [0.2, 0.5, 0.8]}, tmp_path / "sw")
    times = [r["time_to_target_s"] for r in rows]
    assert all(r["status"] == "complete" for r in rows)
    reached = [t for t in times if t is not None]
    assert len(reached) >= 2 and reached == sorted(reached)
    table = list(csv.DictReader((tmp_path / "sw" / "sweep.csv").open()))
    assert [float(r["room.relative_humidity"]) for r in table] == [0.2, 0.5, 0.8]
    assert table[0]["time_to_target_s"] == repr(times[0])
    assert (tmp_path / "sw" / "sweep.png").stat().st_size > 10_000
    page = (tmp_path / "sw" / "sweep.md").read_text()
    assert "3 runs:" in page and "## Cautions" in page and "fume hood" in page
    assert "Largest absolute internal pressure over all runs" in page
    info = json.loads((tmp_path / "sw" / "sweep.json").read_text())
    assert info["vary"] == {"room.relative_humidity": [0.2, 0.5, 0.8]}
    for r in table:  # each run keeps its own summary and history
        assert (tmp_path / "sw" / r["folder"] / "summary.json").exists()
        assert not (tmp_path / "sw" / r["folder"] / "history.png").exists()  # plots only with plots=True


def test_a_running_device_sweep_tabulates_its_cycle(tmp_path):
    """A drier room tips it sooner and more often: sweep.csv carries the cycle's columns."""
    from tests.device.cycle_helpers import whole_case

    case = whole_case(cycle={"tip_column_height": 0.05, "water_glass": True, "max_cycles": 3}, time={"end": 60.0})
    rows = fvsolver.sweep(case, {"room.relative_humidity": [0.3, 0.6]}, tmp_path / "sw")
    assert [r["outcome"] for r in rows] == ["running", "running"]
    assert rows[0]["first_tip_s"] < rows[1]["first_tip_s"]
    assert rows[0]["last_period_s"] < rows[1]["last_period_s"]
    table = list(csv.DictReader((tmp_path / "sw" / "sweep.csv").open()))
    assert {"outcome", "first_tip_s", "period_s", "dips_per_hour", "water_per_day_kg"} <= set(table[0])
    assert (tmp_path / "sw" / "sweep.png").stat().st_size > 10_000  # the last period against the humidity


def test_sweep_command_line(tmp_path, capsys):
    case = tmp_path / "head.toml"
    from fvsolver.case.writer import dumps
    from tests.device.helpers import BASE

    case.write_text(dumps({**BASE, "time": {"end": 30.0}}))
    code = main(["sweep", str(case), "--vary", "room.air_speed=0.1,0.5", "--out", str(tmp_path / "o")])
    out = capsys.readouterr().out
    assert code == 0
    assert "[1/2] room.air_speed = 0.1" in out and "2 runs, 0 failed" in out
    code = main(["sweep", str(case), "--vary", "room.air_sped=0.1", "--out", str(tmp_path / "p")])
    err = capsys.readouterr().err
    assert code == 2 and "did you mean 'air_speed'" in err
    assert not (tmp_path / "p").exists()


def test_a_room_whose_wet_bulb_is_below_freezing_is_refused_at_input():
    # 3 C at 10 %: the wet-bulb temperature is about -3.6 C (psychrolib 2.5.0
    # GetTWetBulbFromRelHum(3.0, 0.1, 101325) = -3.56 C), so the wet cap would freeze; the case
    # check says so before any run
    with pytest.raises(CaseErrors, match="wet-bulb temperature is below 0 C"):
        with_changes(device_case(), {"room.air_temperature": 276.15, "room.relative_humidity": 0.1})


def test_a_failing_run_is_a_row_and_the_sweep_goes_on(tmp_path, monkeypatch):
    import fvsolver.pipeline as pipeline
    from fvsolver.errors import SolverError

    real = pipeline.run

    def flaky(case, out=None, **kw):
        if case["room"]["air_speed"] == 0.3:
            raise SolverError("the step fell below min_step")
        return real(case, out, **kw)

    monkeypatch.setattr(pipeline, "run", flaky)
    rows = sweep(device_case(time={"end": 20.0}), [Vary("room.air_speed", (0.1, 0.3, 0.5))], tmp_path / "s")
    assert [r["status"] for r in rows] == ["complete", "failed", "complete"]
    assert "min_step" in rows[1]["reason"]
    table = list(csv.DictReader((tmp_path / "s" / "sweep.csv").open()))
    assert table[1]["status"] == "failed"


def test_runs_in_worker_processes_give_the_same_table(tmp_path):
    case = device_case(time={"end": 15.0})
    varies = [Vary("room.relative_humidity", (0.3, 0.6)), Vary("room.air_speed", (0.1, 0.4))]
    one = sweep(case, varies, tmp_path / "one")
    two = sweep(case, varies, tmp_path / "two", jobs=2)
    keys = ("run", "room.relative_humidity", "room.air_speed", "status", "max_pressure_drop_pa",
            "min_temperature_k", "n_steps")
    assert [[r[k] for k in keys] for r in two] == [[r[k] for k in keys] for r in one]  # same bits
    assert (tmp_path / "two" / "sweep.csv").read_text().count("\n") == 5
    with pytest.raises(CaseError, match="--jobs: got 0"):
        sweep(case, varies, tmp_path / "three", jobs=0)


def test_an_interrupted_run_stops_the_sweep_and_leaves_no_finished_mark(tmp_path, monkeypatch):
    import fvsolver.pipeline as pipeline

    real = pipeline.run

    def interrupted(case, out=None, **kw):
        result = real(case, out, **kw)
        if case["room"]["air_speed"] == 0.3:  # as if Ctrl-C came during this run
            result.summary["status"] = "interrupted"
        return result

    monkeypatch.setattr(pipeline, "run", interrupted)
    with pytest.raises(KeyboardInterrupt):
        sweep(device_case(time={"end": 10.0}), [Vary("room.air_speed", (0.1, 0.3, 0.5))], tmp_path / "s")
    table = list(csv.DictReader((tmp_path / "s" / "sweep.csv").open()))
    assert [r["status"] for r in table] == ["complete", "interrupted"]
    assert not (tmp_path / "s" / "sweep.json").exists()


def test_the_runs_that_take_longest_are_handed_out_first():
    """The cost estimate that orders a sweep's runs: for a device, cells x fewest steps over the
    room's wet-bulb depression. In the demo a humid room's run takes longer (0.35 -> 0.7 relative
    humidity, measured: time to target 19.9 -> 33.8 s, 40 -> 44 steps), so it comes first; a case
    without a room keeps cells x steps."""
    from pathlib import Path

    from fvsolver.case import load_case
    from fvsolver.sweeps import _estimated_cost

    root = Path(__file__).resolve().parents[1]
    base = load_case(root / "cases" / "demo.toml")
    dry, humid = (with_changes(base, {"room.relative_humidity": rh}) for rh in (0.35, 0.7))
    assert _estimated_cost(humid) > 1.5 * _estimated_cost(dry) > 0.0
    warm = with_changes(base, {"room.air_temperature": 303.15})
    assert _estimated_cost(warm) < _estimated_cost(base)
    plain = load_case(root / "cases" / "glass_bulb_cooling.toml")
    assert _estimated_cost(plain) > 0.0
