"""Behaviours of the running device (common practice of the trade, no source): each compares runs
of one small invented design.  Slow: each run steps through several cycles."""
from __future__ import annotations

import pytest

from fvsolver.pipeline import run
from tests.device.cycle_helpers import whole_case

pytestmark = pytest.mark.slow


def outcome(balance: float = 1e-8, **changes) -> dict:
    s = run(whole_case(**changes)).summary
    assert s["status"] == "complete"
    assert s["energy_balance_relative_error"] < balance
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


THIN_CAP = {"geometry": {"cap_thickness": 0.0008},
            "cap_water": {"initial_saturation": 0.27, "critical_saturation": 0.27, "residual_saturation": 0.25}}


def test_with_a_water_glass_it_keeps_going_with_one_wetting_it_stops_after_some_dips():
    # a thin cap holding little water that can evaporate (saturation 0.27 down to 0.25)
    once = outcome(**THIN_CAP, cycle={"water_glass": False, "max_cycles": 200}, time={"end": 800.0})
    assert once["outcome"] == "stopped", once["outcome_reason"]
    assert 10 <= once["n_cycles"] <= 100
    assert "the cap has dried" in once["outcome_reason"]
    assert once["last_period_s"] > 3.0 * once["first_tip_s"] / 2.0  # its last cycles slowed down
    glass = outcome(**THIN_CAP, cycle={"water_glass": True, "max_cycles": 40}, time={"end": 400.0})
    assert glass["outcome"] == "running", glass["outcome_reason"]
    assert glass["n_cycles"] == 41 and glass["last_period_s"] < 0.5 * once["last_period_s"]


def test_hot_air_on_the_body_runs_it_even_with_a_dry_cap():
    dry = {"cap_water": {"initial_saturation": 0.0}, "cycle": {"water_glass": False, "max_cycles": 6}}
    # nearly nothing flows in this quiet run, so its relative balance sees Newton's stopping level
    still = outcome(balance=1e-6, **dry, time={"end": 120.0})
    assert still["outcome"] == "never_tips", still["outcome_reason"]
    blown = outcome(**dry, hot_air=[{"patch": "body_outer", "air_temperature": 318.15, "air_speed": 2.0}],
                    time={"end": 120.0})
    assert blown["outcome"] == "running", blown["outcome_reason"]
    assert blown["n_cycles"] >= 5 and blown["water_per_dip_kg"] in (None, 0.0)
