"""The climate envelope: the map's axes, where the device runs, and a small map end to end."""
from __future__ import annotations

import csv

import numpy as np
import pytest

from fvsolver.cli import main
from fvsolver.errors import CaseError
from fvsolver.studies import headline as hl
from fvsolver.studies.envelope import (HUMIDITY_KEY, TEMPERATURE_KEY, _spans, build_envelope, parse_axis,
                                       range_sentences)


def test_axes_take_ranges_and_lists_and_refuse_single_values():
    assert parse_axis(TEMPERATURE_KEY, "linspace(288.15,298.15,3)", "--temperature").values == (288.15, 293.15,
                                                                                                 298.15)
    with pytest.warns(FutureWarning, match="linspace"):  # the older range syntax still reads, with a warning
        assert parse_axis(TEMPERATURE_KEY, "288.15:298.15:3", "--temperature").values == (288.15, 293.15, 298.15)
    assert parse_axis(HUMIDITY_KEY, "0.9,0.3", "--humidity").values == (0.3, 0.9)  # sorted for the map
    with pytest.raises(CaseError, match="--humidity '0.5': expected at least two numbers"):
        parse_axis(HUMIDITY_KEY, "0.5", "--humidity")
    with pytest.raises(CaseError, match=r"--temperature 'linspace\(290,x,3\)'"):
        parse_axis(TEMPERATURE_KEY, "linspace(290,x,3)", "--temperature")
    with pytest.raises(CaseError, match="given twice"):
        parse_axis(HUMIDITY_KEY, "0.5,0.5", "--humidity")


def _row(run, reached, time=None, status="complete"):
    return {"run": run, "status": status, "target_reached": reached, "time_to_target_s": time,
            "reason": "the step fell below min_step" if status == "failed" else None, "stall_reason": None,
            "folder": None}


def test_the_map_knows_where_the_device_runs():
    # 2 temperatures x 3 humidities, temperature slowest (as a sweep orders them)
    rows = [_row(0, True, 30.0), _row(1, True, 60.0), _row(2, False),
            _row(3, True, 20.0), _row(4, None, status="failed"), _row(5, False)]
    env = build_envelope(rows, (290.15, 300.15), (0.3, 0.6, 0.9), "time_to_target_s")
    assert env.runs.tolist() == [[True, True, False], [True, False, False]]
    assert env.completed.tolist() == [[True, True, True], [True, False, True]]
    assert env.outcomes[1, 1] == "failed" and env.outcomes[0, 2] == "target not reached"
    assert np.isnan(env.values[1, 2]) and env.values[0, 1] == 60.0
    text = " ".join(range_sentences(env))
    from fvsolver.outputs.report import format_duration

    assert "runs in 3 of 6 rooms" in text and f"from {format_duration(20.0)} to {format_duration(60.0)}" in text
    assert [r["runs"] for r in env.rows] == [True, True, False, True, False, False]


def test_a_running_device_still_tipping_but_not_settled_is_mapped_by_its_last_period():
    rows = [{**_row(k, True, 20.0), "outcome": outcome, "period_s": period, "last_period_s": last}
            for k, (outcome, period, last) in enumerate([("running", 5.3, 5.3), ("running", None, 9.5),
                                                          ("never_tips", None, None), ("stopped", None, 40.0)])]
    env = build_envelope(rows, (290.15, 300.15), (0.3, 0.9), "period_s")
    assert env.values[0, 0] == 5.3 and env.values[0, 1] == 9.5
    assert env.outcomes[0, 1] == "running, not settled" and env.outcomes[1, 0] == "never_tips"
    assert env.runs.tolist() == [[True, True], [False, False]]


def test_humidity_spans_of_consecutive_points():
    h = np.array([0.2, 0.4, 0.6, 0.8])
    assert _spans(h, np.array([True, True, False, True])) == [(0.2, 0.4), (0.8, 0.8)]
    assert _spans(h, np.array([False] * 4)) == []


def test_the_headline_is_looked_up_by_name():
    summary = {"status": "complete", "target_reached": True, "time_to_target_s": 12.5, "period_s": 40.0,
               "outcome": "running"}
    assert hl.value(summary, "time_to_target_s") == 12.5
    assert hl.value(summary, "period_s") == 40.0  # a headline another part of the solver adds
    assert hl.value({"time_to_target_s": None}, "time_to_target_s") is None
    assert hl.outcome(summary) == "running"  # the summary's own outcome wins
    assert hl.outcome({"status": "complete", "target_reached": False}) == "target not reached"
    assert hl.headline("period_s").label == "period of the cycle"
    assert hl.headline("some_new_key_s").label == "some new key s"


def test_envelope_command_line(tmp_path, capsys):
    """Two air temperatures x a dry and a near-saturated room: the dry rooms reach the target
    (the warmer one sooner: a larger wet-bulb depression), the near-saturated ones cannot
    (their wet-bulb depression is a fraction of a kelvin: common practice, psychrometrics)."""
    from fvsolver.case.writer import dumps
    from tests.device.helpers import BASE

    case = tmp_path / "head.toml"
    case.write_text(dumps({**BASE, "time": {"end": 30.0}}))
    out = tmp_path / "env"
    code = main(["envelope", str(case), "--temperature", "293.15,301.15", "--humidity", "0.3,0.97",
                 "--out", str(out)])
    printed = capsys.readouterr().out
    assert code == 0, printed
    assert "[4/4 done, 0 running]" in printed and "runs in 2 of 4 rooms" in printed
    table = list(csv.DictReader((out / "envelope.csv").open()))
    assert [(r["air_temperature_c"], r["relative_humidity"], r["runs"]) for r in table] == [
        ("20.0", "0.3", "True"), ("20.0", "0.97", "False"), ("28.0", "0.3", "True"), ("28.0", "0.97", "False")]
    assert float(table[2]["time_to_target_s"]) < float(table[0]["time_to_target_s"])
    assert float(table[0]["wet_bulb_temperature_k"]) < 293.15 - 5  # a dry room's wet bulb
    page = (out / "envelope.md").read_text()
    assert "| 20.0 °C | 30 % |" in page and "## Cautions" in page and "![operating map](envelope.png)" in page
    png = (out / "envelope.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 20_000
    code = main(["envelope", str(case), "--temperature", "293.15", "--humidity", "0.3,0.5", "--out",
                 str(tmp_path / "bad")])
    assert code == 2 and "at least two numbers" in capsys.readouterr().err
