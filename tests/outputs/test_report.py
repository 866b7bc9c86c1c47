"""The run report: readable result, inputs, plot links, safety figures, cautions."""
from __future__ import annotations

import pytest

from fvsolver.outputs.report import REPORT_NAME, format_duration, format_pressure, result_paragraph, write_report

INPUTS = {"room air temperature (K)": 296.15, "relative humidity (-)": 0.4, "working fluid": "dichloromethane"}


def _section(text: str, heading: str) -> str:
    start = text.index(f"## {heading}\n")
    rest = text[start + len(heading) + 4 :]
    end = rest.find("\n## ")
    return rest if end < 0 else rest[:end]


@pytest.mark.parametrize(
    "seconds, text",
    [
        (0.0, "0 s"), (0.25, "0.25 s"), (42.4, "42 s"), (59.7, "1 min"), (252.0, "4 min 12 s"),
        (3599.6, "1 h"), (7200.0, "2 h"), (240.0, "4 min"), (7500.0, "2 h 5 min"), (3 * 86400 + 4 * 3600, "3 d 4 h"),
        (None, "n/a"), (float("nan"), "n/a"),
    ],
)
def test_format_duration(seconds, text):
    assert format_duration(seconds) == text


def test_format_pressure():
    assert format_pressure(850.0) == "850 Pa"
    assert format_pressure(1200.0) == "1.2 kPa"
    assert format_pressure(101_325.0) == "101.3 kPa"
    assert format_pressure(None) == "n/a"


def test_report_when_the_target_is_reached(tmp_path):
    (tmp_path / "history.png").write_bytes(b"png")
    (tmp_path / "plots").mkdir()
    (tmp_path / "plots" / "field final.png").write_bytes(b"png")
    summary = {
        "status": "completed", "target_reached": True, "time_to_target_s": 252.0,
        "target_pressure_drop_pa": 1200.0, "max_pressure_drop_pa": 1480.0,
        "energy_balance_relative_error": 2.0e-5,
        "mass_balance_relative_error": {"water": 1e-6, "working_fluid": 3e-4},
        "n_cells": 1536, "n_steps": 412, "max_internal_pressure_pa": 47_000.0,
        "max_glass_temperature_k": 296.0, "warnings": ["cap dried out at the rim"],
    }
    plots = ["history.png", str(tmp_path / "plots" / "field final.png")]
    path = write_report(tmp_path, summary, "Head A, 20 mm bulb", INPUTS, plots)
    assert path == tmp_path / REPORT_NAME
    text = path.read_text(encoding="utf-8")
    assert text.startswith("# Head A, 20 mm bulb\n")
    result = _section(text, "Result")
    assert "reached the target of 1.2 kPa after 4 min 12 s" in result
    assert "1.48 kPa" in result and "1,536 cells" in result and "412 time steps" in result
    assert "to within 0.002 %" in result and "working fluid to within 0.03 %" in result
    assert "| room air temperature (K) | 296.15 |" in _section(text, "Inputs")
    links = _section(text, "Plots")
    assert "![history](history.png)" in links
    assert "![field final](<plots/field final.png>)" in links  # relative, spaces kept intact
    assert "did not exist" not in links
    safety = _section(text, "Safety figures")
    assert "47 kPa (absolute)" in safety and "below standard atmospheric" in safety
    assert "296.0 K (22.9 °C)" in safety and "cap dried out at the rim" in safety
    cautions = _section(text, "Cautions")
    for words in ("ventilation", "gloves", "goggles", "safety data sheet", "annealed", "shield",
                  "Never heat a sealed bulb with a flame", "local codes", "licensed professional"):
        assert words in cautions, words
    assert not list(tmp_path.glob("*.part"))


def test_report_when_the_run_stalls(tmp_path):
    summary = {
        "status": "stalled", "target_reached": False, "target_pressure_drop_pa": 2500.0,
        "max_pressure_drop_pa": 830.0, "stall_reason": "the cap dried out after 41 min",
        "energy_balance_relative_error": 0.03, "max_internal_pressure_pa": 130_000.0,
    }
    text = write_report(tmp_path / "run", summary, "Dry day", {}, ["missing.png"]).read_text(encoding="utf-8")
    result = _section(text, "Result")
    assert "did not reach the target of 2.5 kPa" in result and "830 Pa" in result
    assert "the cap dried out after 41 min" in result
    assert "treat the results with caution" in result  # a 3 % energy balance error is flagged
    assert "after" not in result.split("did not reach")[0]
    assert "above standard atmospheric" in _section(text, "Safety figures")
    assert "No inputs" in _section(text, "Inputs")
    assert "did not exist" in _section(text, "Plots")


def test_report_with_an_empty_summary(tmp_path):
    text = write_report(tmp_path, {}, "", {}, []).read_text(encoding="utf-8")
    assert text.startswith("# Untitled case")
    assert "The summary is empty." in _section(text, "Result")
    assert "target" not in _section(text, "Result")  # nothing is said about a target it does not have
    assert "No plots" in _section(text, "Plots")
    assert "## Caution" in text and "not a safety assessment" in text


def test_device_report_with_missing_safety_figures(tmp_path):
    summary = {"status": "complete", "target_reached": False, "target_pressure_drop_pa": 600.0}
    text = write_report(tmp_path, summary, "", {}, []).read_text(encoding="utf-8")
    safety = _section(text, "Safety figures")
    assert "internal pressure: not recorded" in safety and "glass temperature: not recorded" in safety
    assert "## Cautions" in text and "dichloromethane" in text


def test_conduction_only_report_has_no_target_and_no_solvent_cautions(tmp_path):
    summary = {"status": "complete", "target_reached": None, "time_to_target_s": None,
               "target_pressure_drop_pa": None, "max_pressure_drop_pa": None, "stall_reason": None,
               "energy_balance_relative_error": 6.5e-11, "mass_balance_relative_error": {}, "n_cells": 200,
               "n_steps": 40, "warnings": []}
    text = write_report(tmp_path, summary, "Glass bulb cooling", {}, []).read_text(encoding="utf-8")
    result = _section(text, "Result")
    assert "target" not in result and "does not say" not in result
    assert "closed at round-off (6.5e-11)" in result and "e-09 %" not in text and "e-11 %" not in text
    assert "dichloromethane" not in text and "Safety figures" not in text
    assert "not a safety assessment" in text


def test_interrupted_run_says_the_question_is_open(tmp_path):
    summary = {"status": "interrupted", "target_reached": None, "time_to_target_s": None, "end_time_s": 95.0,
               "target_pressure_drop_pa": 647.0, "max_pressure_drop_pa": 310.0, "stall_reason": None}
    result = _section(write_report(tmp_path, summary, "Head", {}, []).read_text(encoding="utf-8"), "Result")
    assert "stopped at 1 min 35 s before the pressure difference reached the target of 647 Pa" in result
    assert "310 Pa" in result and "None" not in result


def test_report_states_the_numerical_uncertainty(tmp_path):
    summary = {"status": "complete", "target_reached": True, "time_to_target_s": 22.1,
               "target_pressure_drop_pa": 647.0,
               "numerical_uncertainty": {"time_steps": {"estimate_s": 0.05, "relative": 0.0023, "how": "x"},
                                         "mesh": {"estimate_s": 0.03, "relative": 0.0014, "how": "y"},
                                         "total_relative": 0.0027}}
    text = _section(write_report(tmp_path, summary, "Head", {}, []).read_text(encoding="utf-8"),
                    "Numerical uncertainty")
    assert "time steps ±0.05 s (0.23 %; x)" in text and "mesh ±0.03 s (0.14 %; y)" in text
    assert "about ±0.27 %" in text


def test_report_with_odd_values(tmp_path):
    summary = {"time_to_target_s": None, "target_reached": None, "n_cells": "many",
               "mass_balance_relative_error": 1e-9, "warnings": "one plain string"}
    inputs = {"cap polar range (deg)": (0.0, 100.0), "pipe | note": "a|b", "dry run": False}
    text = write_report(tmp_path, summary, "Odd", inputs, []).read_text(encoding="utf-8")
    assert "at round-off (1.0e-09)" in text
    assert "one plain string" in _section(text, "Safety figures")
    table = _section(text, "Inputs")
    assert "| cap polar range (deg) | 0, 100 |" in table
    assert "| pipe \\| note | a\\|b |" in table and "| dry run | no |" in table


def test_a_running_device_report_speaks_of_tips_not_of_a_target():
    base = {"status": "complete", "target_reached": True, "time_to_target_s": 21.06, "first_tip_s": 21.06,
            "target_pressure_drop_pa": 647.0, "max_pressure_drop_pa": 647.3, "end_time_s": 73.55, "n_cycles": 10,
            "outcome": "running", "field_times_not_reached_s": [300.0]}
    text = result_paragraph(base)
    assert "first tipped after 21.06 s" in text and "centre of mass to the pivot" in text
    assert "reached the target" not in text and "target crossing" not in text and "run's end" in text
    never = result_paragraph({**base, "first_tip_s": None, "n_cycles": 0, "outcome": "never_tips",
                              "target_reached": False, "max_pressure_drop_pa": 400.0})
    assert "never tipped" in never and "400 Pa" in never
