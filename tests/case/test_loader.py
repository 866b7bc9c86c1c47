"""Case-file validation: every error at once, with FILE:LINE, key path, value and a fix."""
from __future__ import annotations

import json
import tomllib
from pathlib import Path

import pytest

from fvsolver.case import CaseErrors, load_case
from fvsolver.case.loader import thaw
from fvsolver.case.schema import json_schema
from fvsolver.case.writer import dumps

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "cases" / "glass_bulb_cooling.toml"


def write(tmp_path, text: str) -> Path:
    path = tmp_path / "case.toml"
    path.write_text(text)
    return path


def demo_text() -> str:
    return DEMO.read_text()


def test_every_shipped_case_validates():
    for path in sorted((ROOT / "cases").glob("*.toml")):
        case = load_case(path)
        assert case.sha256 and case["schema_version"] == 1


def test_resolved_case_round_trips_through_toml():
    case = load_case(DEMO)
    data = thaw(case.data)
    data.pop("_folder")
    assert tomllib.loads(dumps(data)) == data


def test_errors_are_collected_with_lines_and_suggestions(tmp_path):
    text = demo_text().replace("density = 2230.0", "densty = 2230.0").replace(
        "glass_thickness = 0.0012", "glass_thickness = -0.0012").replace(
        'shape = "device_head"', 'shape = "device_head"\ncolour = "blue"')
    path = write(tmp_path, text)
    with pytest.raises(CaseErrors) as info:
        load_case(path)
    problems = info.value.problems
    lines = text.splitlines()
    joined = "\n".join(problems)
    assert "did you mean 'density'?" in joined
    assert "geometry.glass_thickness: got -0.0012, expected a number > 0 in m" in joined
    assert "geometry.colour: unknown key" in joined
    assert "materials.glass.density: missing" in joined
    for p in problems:
        file, line, rest = p.split(":", 2)
        assert file == str(path) and 1 <= int(line) <= len(lines)
    bad_line = next(p for p in problems if ": geometry.glass_thickness:" in p).split(":")[1]
    assert "glass_thickness" in lines[int(bad_line) - 1]


def test_physical_consistency_is_checked_before_running(tmp_path):
    text = demo_text().replace("cap_to_deg = 110.0", "cap_to_deg = 175.0").replace(
        "[boundary.bore]\ninsulated = true", "[boundary.bore]\ninsulated = true\n\n[boundary.cap_outr]\ninsulated = true")
    with pytest.raises(CaseErrors) as info:
        load_case(write(tmp_path, text))
    joined = str(info.value)
    assert "cap_to_deg: got 175.0, expected less than" in joined


def test_unknown_patch_gets_a_suggestion(tmp_path):
    text = demo_text().replace("[boundary.neck_end]", "[boundary.neck_ends]")
    with pytest.raises(CaseErrors) as info:
        load_case(write(tmp_path, text))
    joined = str(info.value)
    assert "boundary.neck_ends: no such patch" in joined and "did you mean 'neck_end'?" in joined
    assert "boundary.neck_end: missing" in joined


def test_toml_syntax_error_names_the_line(tmp_path):
    with pytest.raises(CaseErrors, match=r"case.toml:2: TOML syntax"):
        load_case(write(tmp_path, "schema_version = 1\ntitle = = 3\n"))


def test_shipped_json_schema_matches_the_definition():
    shipped = json.loads((ROOT / "fvsolver" / "schema" / "case.schema.json").read_text())
    assert shipped == json_schema()
    assert "geometry" in shipped["properties"] and "schema_version" in shipped["required"]
