"""Behaviours of the trade (common practice, no source): each compares two runs of one design."""
from __future__ import annotations

import numpy as np
import pytest

from fvsolver.pipeline import run
from tests.device.helpers import device_case


def time_to_target(**changes) -> float:
    result = run(device_case(**changes))
    assert result.summary["status"] == "complete"
    assert result.summary["energy_balance_relative_error"] < 1e-8
    for group, err in result.summary["mass_balance_relative_error"].items():
        assert err < 1e-8, group
    return result.summary["time_to_target_s"], result


def test_more_humid_room_takes_longer():
    dry, _ = time_to_target(room={"relative_humidity": 0.3})
    humid, _ = time_to_target(room={"relative_humidity": 0.7})
    assert dry is not None and humid is not None and humid > 1.2 * dry


def test_saturated_room_at_room_temperature_never_reaches_the_target():
    result = run(device_case(room={"relative_humidity": 1.0}, time={"end": 600.0}))
    s = result.summary
    assert s["target_reached"] is False and s["time_to_target_s"] is None
    assert "too humid" in s["stall_reason"] and "largest difference" in s["stall_reason"]
    assert s["max_pressure_drop_pa"] < 0.5 * s["target_pressure_drop_pa"]


def test_faster_air_shortens_the_time():
    still, _ = time_to_target(room={"air_speed": 0.05})
    breezy, _ = time_to_target(room={"air_speed": 2.0})
    assert breezy < still


def test_cold_water_reaches_sooner_than_hot_water_which_stalls_then_recovers():
    def charged(temperature):
        return dict(cap_water={"mode": "charge", "initial_saturation": 0.15,
                               "rewettings": [{"time": 2.0, "mass": 0.004, "temperature": temperature}]},
                    time={"end": 1500.0})
    cold, _ = time_to_target(**charged(283.15))
    hot, result = time_to_target(**charged(333.15))
    assert cold < hot
    dp = result.history["pressure_drop_pa"]
    t = result.history["time_s"]
    assert dp[t > 2.0].min() < 0.0  # hot water first warms the head: the difference turns negative
    assert dp[-1] >= result.summary["target_pressure_drop_pa"]  # and evaporation then recovers it


def test_warming_the_second_bulb_shortens_the_time():
    plain, _ = time_to_target()
    warmed, _ = time_to_target(second_bulb={"mode": "lumped", "heat_capacity": 60.0, "loss_conductance": 0.05,
                                            "heater_power": 0.5})
    assert warmed < plain


def test_heat_reaching_the_head_prevents_the_target():
    result = run(device_case(heat_sources=[{"patch": "cap_outer", "heat_flux": 400.0},
                                           {"patch": "glass_outer", "heat_flux": 400.0}], time={"end": 300.0}))
    s = result.summary
    assert s["target_reached"] is False
    assert "heat reaches the head" in s["stall_reason"]


def test_thicker_glass_slows_the_response():
    thin, _ = time_to_target(geometry={"glass_thickness": 0.0008})
    thick, _ = time_to_target(geometry={"glass_thickness": 0.003})
    assert thick > thin
