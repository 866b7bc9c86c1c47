"""Behaviours of the running device (common practice of the trade, no source): each compares runs
of one small invented design.  Slow: each run steps through several cycles."""
from __future__ import annotations

import pytest

from fvsolver.pipeline import run
from tests.device.cycle_helpers import whole_case

pytestmark = pytest.mark.slow


def outcome(**changes) -> dict:
    s = run(whole_case(**changes)).summary
    assert s["status"] == "complete"
    assert s["energy_balance_relative_error"] < 1e-8
    return s


def test_periods_lengthen_as_the_room_gets_more_humid_and_it_stops_near_saturation():
    dry = outcome(room={"relative_humidity": 0.3}, time={"end": 150.0})
    humid = outcome(room={"relative_humidity": 0.6}, time={"end": 150.0})
    assert dry["last_period_s"] < humid["last_period_s"]
    assert dry["first_tip_s"] < humid["first_tip_s"]
    saturated = outcome(room={"relative_humidity": 0.99}, time={"end": 150.0})
    assert saturated["outcome"] == "never_tips"


def test_cold_water_runs_it_faster_hot_water_first_stalls_it():
    room = outcome(time={"end": 150.0})
    cold = outcome(cycle={"water_temperature": 283.15}, time={"end": 150.0})
    hot = outcome(cycle={"water_temperature": 318.15, "max_cycles": 4}, time={"end": 400.0})
    assert cold["outcome"] == "running" and cold["last_period_s"] < room["last_period_s"]
    # hot water warms the cap and the head: the cycle after the first dip takes far longer
    assert hot["n_cycles"] >= 2 and hot["last_period_s"] is not None
    assert hot["last_period_s"] > room["last_period_s"]


def test_a_strong_heater_under_the_body_holds_it_tipped():
    s = outcome(heat_sources=[{"patch": "body_outer", "heat_flux": 6000.0, "kind": "heater"}],
                time={"end": 200.0})
    assert s["outcome"] == "held_tipped", s["outcome_reason"]


def test_heat_reaching_the_head_stops_it():
    s = outcome(heat_sources=[{"patch": "cap_outer", "heat_flux": 400.0, "kind": "lamp"}], time={"end": 150.0})
    assert s["outcome"] == "never_tips" and "heat reaches the head" in s["outcome_reason"]
