"""Values with units in case files (converted by pint, a test extra) and warnings on implausible
proportions."""
from __future__ import annotations

from pathlib import Path

import pytest

from fvsolver.case.loader import CaseErrors, load_case
from fvsolver.case.units import implausible, to_schema_unit

pytest.importorskip("pint")

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("text, unit, expected", [
    ("1.2 mm", "m", 0.0012),
    ("24 degC", "K", 297.15),          # 0 degC = 273.15 K exactly (ITS-90 / SI definition)
    ("75.2 degF", "K", 297.15),        # (75.2 - 32) / 1.8 = 24 degC
    ("45 %", "", 0.45),
    ("30 min", "s", 1800.0),
    ("2 g/m^2", "kg/m2", 0.002),
    ("1 atm", "Pa", 101325.0),         # standard atmosphere (ISO 2533)
    ("5 W/(m^2 K)", "W/(m2 K)", 5.0),
    ("110 deg", "deg", 110.0),
])
def test_values_with_units_convert_to_the_schema_unit(text, unit, expected):
    assert to_schema_unit(text, unit) == pytest.approx(expected, rel=1e-12)


def test_a_number_in_quotes_without_a_unit_is_refused():
    with pytest.raises(ValueError, match="write 0.019 without quotes"):
        to_schema_unit("0.019", "m")


def test_a_case_with_units_equals_the_plain_case(tmp_path):
    text = (ROOT / "cases" / "demo.toml").read_text()
    for old, new in (("glass_thickness = 0.0012", 'glass_thickness = "1.2 mm"'),
                     ("air_temperature = 297.15", 'air_temperature = "24 degC"'),
                     ("relative_humidity = 0.45", 'relative_humidity = "45 %"'),
                     ("end = 1800.0", 'end = "30 min"')):
        assert old in text
        text = text.replace(old, new)
    path = tmp_path / "units.toml"
    path.write_text(text)
    a, b = dict(load_case(path).data), dict(load_case(ROOT / "cases" / "demo.toml").data)
    a.pop("_folder"), b.pop("_folder")
    assert a == b


def test_bad_units_are_reported_with_the_key_and_what_was_expected(tmp_path):
    text = (ROOT / "cases" / "demo.toml").read_text().replace(
        "glass_thickness = 0.0012", 'glass_thickness = "1.2 degC"').replace(
        "cap_thickness = 0.002", 'cap_thickness = "2 furlongz"')
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(CaseErrors) as info:
        load_case(path)
    problems = info.value.problems
    assert any("geometry.glass_thickness: got '1.2 degC'" in p and "same kind as m" in p for p in problems)
    assert any("geometry.cap_thickness: got '2 furlongz'" in p and "not known" in p for p in problems)


def test_millimetres_typed_as_metres_are_warned_about():
    data = dict(load_case(ROOT / "cases" / "demo.toml").data)
    assert implausible(data) == []
    slip = {**data, "geometry": {**data["geometry"], "glass_thickness": 1.2}}
    (warning,) = implausible(slip)
    assert "geometry.glass_thickness = 1.2 m" in warning and "63 times" in warning and '"1.2 mm"' in warning
