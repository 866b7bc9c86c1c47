"""The sweep's range syntax, its values without float noise, bad keys said once, units in its
table and plot."""
from __future__ import annotations

import pytest

from fvsolver.case.loader import CaseErrors
from fvsolver.cli import main
from fvsolver.sweeps import Vary, key_unit, parse_vary, sweep, variants
from tests.device.helpers import device_case


def test_linspace_reads_as_numpy_and_matlab_read_it():
    assert parse_vary("room.relative_humidity=linspace(0.2, 0.8, 4)").values == (0.2, 0.4, 0.6, 0.8)
    assert parse_vary("mesh.polar_cells=linspace(20,40,3)").values == (20, 30, 40)


def test_values_have_no_float_noise():
    values = parse_vary("room.relative_humidity=linspace(0.1,0.7,7)").values
    assert [repr(v) for v in values] == ["0.1", "0.2", "0.3", "0.4", "0.5", "0.6", "0.7"]


def test_the_old_range_syntax_still_works_with_a_deprecation_warning():
    with pytest.warns(FutureWarning, match=r"START:STOP:N is deprecated.*linspace\(0.2,0.8,4\)"):
        assert parse_vary("room.relative_humidity=0.2:0.8:4").values == pytest.approx((0.2, 0.4, 0.6, 0.8))


def test_a_bad_linspace_is_refused():
    with pytest.raises(Exception, match=r"expected linspace\(START,STOP,N\)"):
        parse_vary("room.relative_humidity=linspace(0.2,0.8)")


def test_a_bad_key_is_reported_once_against_the_command_line(capsys):
    case = device_case()
    with pytest.raises(CaseErrors) as info:
        variants(case, [Vary("room.humidity", (0.3, 0.5, 0.7)), Vary("room.air_speed", (0.1, 0.3))])
    assert len(info.value.problems) == 1
    (problem,) = info.value.problems
    assert problem.startswith("--vary room.humidity=...: no case key 'room.humidity'")
    assert "did you mean 'relative_humidity' (room.relative_humidity)" in problem


def test_units_of_key_paths():
    assert key_unit("room.air_temperature") == "K"
    assert key_unit("materials.glass.density") == "kg/m3"
    assert key_unit("boundary.neck_end.convection.h") == "W/(m2 K)"
    assert key_unit("mesh.cap_cells") == ""


def test_sweep_table_and_plot_carry_units(tmp_path):
    case = device_case(time={"end": 30.0})
    sweep(case, [Vary("room.air_temperature", (295.15, 297.15))], tmp_path / "s")
    md = (tmp_path / "s" / "sweep.md").read_text()
    assert "| run | room.air_temperature (K) | outcome |" in md
    assert "| 295.15 |" in md


def test_cli_sweep_with_linspace(tmp_path, capsys):
    path = tmp_path / "case.toml"
    from fvsolver.case.writer import dumps
    from fvsolver.case.loader import thaw
    data = thaw(device_case(time={"end": 20.0}).data)
    data.pop("_folder", None)
    path.write_text(dumps(data))
    assert main(["sweep", str(path), "--vary", "room.air_speed=linspace(0.1,0.3,2)", "--out",
                 str(tmp_path / "out")]) == 0
    out = capsys.readouterr().out
    assert "room.air_speed = 0.1" in out and "room.air_speed = 0.3" in out
