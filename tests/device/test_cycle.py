"""The running device: the tip's statics, the balances through every event, the cycle's outcome."""
from __future__ import annotations

import math

import numpy as np
import pytest

from fvsolver.case.build import build
from fvsolver.device.body import PoolGeometry, TipModel
from fvsolver.mesh.device import device_layout
from fvsolver.pipeline import run
from tests.device.cycle_helpers import whole_case


def test_tip_column_against_a_hand_computation_of_the_centre_of_mass():
    """Statics (hand computation): a fixed 50 g at z = -0.05 m, a 30 g pool centred at -0.17 m with
    its level at -0.16 m, a 2.5 mm bore of a 1320 kg/m3 liquid.  A 6 cm column moves
    rho A h = 1.5551e-3 kg from the pool's centre to the column's middle, 0.04 m higher:
    z_G = (-0.0076 + 1.5551e-3 * 0.04) / 0.08 = -0.0942225 m.  With the pivot there the device
    tips at h = 0.06 m; the centre of mass is also summed over 20,000 thin slices of the column."""
    rho, area = 1320.0, math.pi * 0.0025**2
    z_pivot = (0.05 * -0.05 + 0.03 * -0.17 + rho * area * 0.06 * 0.04) / 0.08
    assert z_pivot == pytest.approx(-0.0942225, abs=2e-7)
    tip = TipModel(0.05, 0.05 * -0.05, area, 0.0, -0.17, -0.16, 0.0, z_pivot, None)
    assert tip.tip_column(0.03, rho, 0.0, 0.0, 0.0) == pytest.approx(0.06, rel=1e-12)
    # the same centre of mass from slices of the column
    dz = 0.06 / 20000
    zs = -0.16 + dz * (np.arange(20000) + 0.5)
    slices = rho * area * dz
    moment = 0.05 * -0.05 + (0.03 - rho * area * 0.06) * -0.17 + slices * zs.sum()
    assert tip.centre_of_mass(0.03, 0.06, rho, 0.0, 0.0, 0.0) == pytest.approx(moment / 0.08, rel=1e-12)


def test_pool_level_and_centre_from_the_fill():
    """A fill of half the body's sphere (less the dip tube's immersed glass) stands just above
    the centre; its centre of mass lies 3R/8 below the centre for a plain hemisphere."""
    layout = device_layout(0.019, 0.0012, 0.0025, 0.004, 0.12, 0.024, 0.0015, 0.004)
    R = layout.body_inner_radius
    half = 2.0 / 3.0 * math.pi * R**3
    pool = PoolGeometry.from_fill(layout, half)
    assert pool.level_z > layout.body_centre_z  # the tube takes room: the level rises above the middle
    displaced = math.pi * 0.004**2 * (pool.level_z - layout.tube_end_z)
    assert pool.level_z - layout.body_centre_z == pytest.approx(displaced / (math.pi * R * R), rel=0.02)
    assert pool.centroid_z == pytest.approx(layout.body_centre_z - 3.0 * R / 8.0, abs=0.02 * R)


def test_the_wetted_area_of_the_body_converges_to_the_sphere_zone_at_second_order():
    """The pool wets the zone of the body's inner sphere below its level: area 2 pi R h
    (Archimedes' hat-box theorem), h = level - bottom.  Faces count by their wetted fraction, so
    the error falls fourfold per halving of the faces (it used to jump a face at a time: +12 %,
    -2.1 %, -2.0 %)."""
    from fvsolver.device.body import wetted_fractions

    errors = []
    for k in (1, 2, 4):
        setup = build(whole_case(mesh={"glass_cells": 2, "cap_cells": 2, "polar_cells": 16 * k, "neck_cells": 6 * k,
                                       "body_polar_cells": 12 * k, "dip_tube_cells": 4 * k}))
        mesh, level = setup.mesh, setup.device.body.pool.level_z
        faces = mesh.patch_faces("body_inner")
        wetted = float((mesh.boundary_areas[faces] * wetted_fractions(mesh, level)[faces]).sum())
        bottom = float(mesh.nodes[mesh.boundary_nodes[faces], 1].min())
        errors.append(abs(wetted / (2.0 * math.pi * 0.024 * (level - bottom)) - 1.0))
    assert errors[0] < 0.01
    assert errors[0] / errors[1] == pytest.approx(4.0, rel=0.1) and errors[1] / errors[2] == pytest.approx(4.0, rel=0.1)


def test_pivot_height_gives_the_same_tip_as_the_column_it_implies():
    case = whole_case()
    tip = build(case).device.cycle.tip
    setup = build(case)
    p, y = setup.problem, setup.initial
    rho = float(p.spec.vapour.fluid.liquid_density(y[p.i_tb]))
    z_g = tip.centre_of_mass(float(y[p.i_mp]), 0.05, rho, float(y[p.i_w]), 0.0, 0.0)
    # the glass moment from the mesh: the two bulbs' shells and the tube (not a hand value: checked
    # only through the pivot that reproduces the given column)
    layout = device_layout(0.019, 0.0012, 0.0025, 0.004, 0.12, 0.024, 0.0015, 0.004)
    pivot = z_g - layout.body_bottom_z
    other = build(whole_case(cycle={"tip_column_height": None, "pivot_height": pivot}))
    q = other.problem
    assert q.column(other.initial)["tip_height_m"] == pytest.approx(0.05 - _film_shift(other), rel=1e-9)


def _film_shift(setup) -> float:
    """The initial film on the head's wall raises the centre of mass a little: the pivot built
    without it tips at a slightly shorter column; zero when there is no film."""
    p, y = setup.problem, setup.initial
    return 0.05 - p.column(y)["tip_height_m"]


def test_glass_mass_of_the_tip_model_matches_the_shells_and_tube():
    """The glass in the tip model against thin-shell and tube volumes (geometry, exact formulas;
    the tube's holes and the cap's fibres make up the remaining ~1 %)."""
    setup = build(whole_case())
    tip = setup.device.cycle.tip
    head = 4.0 / 3.0 * math.pi * (0.0202**3 - 0.019**3)
    body = 4.0 / 3.0 * math.pi * (0.0255**3 - 0.024**3)
    tube = math.pi * (0.004**2 - 0.0025**2) * 0.16
    assert tip.fixed_mass == pytest.approx(2230.0 * (head + body + tube), rel=0.05)


@pytest.fixture(scope="module")
def running():
    return run(whole_case(time={"end": 60.0}))


def test_balances_hold_through_every_tip_drain_and_rewetting(running):
    """Per step to round-off; over the run, each conserved total's change is the stepper's
    inflow plus what the events (drains, dips into the water glass) moved into it."""
    s = running.summary
    assert s["n_cycles"] >= 3 and s["condensate_drained_kg"] > 0 and s["water_taken_from_glass_kg"] > 0
    assert s["energy_balance_relative_error"] < 1e-8
    for group, err in s["mass_balance_relative_error"].items():
        assert err < 1e-8, group
    setup = running.setup
    p = setup.problem
    m0, _ = p.capacity(setup.initial)
    m1, _ = p.capacity(running.state)
    for group, sl in p.balance_groups().items():
        change = float((m1[sl] - m0[sl]).sum())
        expected = running.inflow[group] + running.events[group]
        scale = max(abs(change), abs(running.inflow[group]), abs(running.events[group]), 1e-30)
        assert abs(change - expected) <= 1e-9 * scale + 1e-13 * float(np.abs(m1[sl]).sum()), group
    # the working fluid is closed: vapour, films and pool together keep the fill
    wf = p.balance_groups()["working_fluid"]
    assert float(m1[wf].sum() - m0[wf].sum()) == pytest.approx(0.0, abs=1e-12 * float(m0[wf].sum()))


def test_cycle_rows_and_summary(running):
    s, rows = running.summary, running.cycles
    assert s["outcome"] == "running" and s["first_tip_s"] == pytest.approx(rows[0]["tip_time_s"])
    assert len(rows) == s["n_cycles"]
    periods = [r["period_s"] for r in rows[1:]]
    assert all(p > running.setup.device.cycle.tipped_time for p in periods)
    for r in rows:  # every tip lands where the column reaches its tip height (located, then landed on)
        assert r["column_at_tip_m"] == pytest.approx(r["tip_column_m"], rel=1e-2)
    assert s["water_per_dip_kg"] is None or s["water_per_dip_kg"] > 0
    assert all(r["dip_heat_into_head_j"] > 0 for r in rows[1:])


def test_a_humid_room_never_tips():
    s = run(whole_case(room={"relative_humidity": 0.99}, time={"end": 60.0})).summary
    assert s["outcome"] == "never_tips" and s["n_cycles"] == 0
    assert "humid" in s["outcome_reason"]


def test_the_running_device_demo_gives_its_recorded_result():
    """cases/running_device.toml (invented scenario): recorded on this version, 21.40 s to the first
    tip, a period settling at 5.329 s (21.42 s before the Newton loop ended at a balance at the
    round-off of its totals: one failed step less changed the step sequence, inside the first
    tip's 0.2 % time-step uncertainty). (The demo now has 8 cells through the felt and a time
    tolerance of 0.005 K, which keep its first tip within about 0.2 % of the refined value; with 3
    cells and 0.02 K it gave 21.11 s and 5.295 s. Before inventories were kept >= 0: 21.056 s and
    5.293 s; dried faces no longer hold negative condensate in the tipping column's mass. With the
    pool's contact counted face by face instead of by wetted fraction: 5.350 s.)"""
    from pathlib import Path

    from fvsolver.case import load_case

    s = run(load_case(Path(__file__).parents[2] / "cases" / "running_device.toml")).summary
    assert s["outcome"] == "running"
    assert s["first_tip_s"] == pytest.approx(21.404, rel=1e-3)
    assert s["period_s"] == pytest.approx(5.329, rel=2e-3)
    assert 640 < s["dips_per_hour"] < 720 and s["water_per_day_kg"] > 0


def test_an_interrupted_cycle_resumes_to_the_same_cycles(tmp_path):
    """Stopped part-way (during a later cycle) and resumed: the same tips, to the last bit."""
    from tests.test_resume import StopAfter

    case = whole_case(time={"end": 40.0})
    whole = run(case, tmp_path / "whole", plots=False)
    out = tmp_path / "parts"
    part = run(case, out, progress=StopAfter(whole.summary["n_steps"] - 25), checkpoint_every=0.0, plots=False)
    assert part.summary["status"] == "interrupted" and part.summary["n_cycles"] >= 1
    resumed = run(case, out, resume=True, checkpoint_every=0.0, plots=False)
    assert [c["tip_time_s"] for c in resumed.cycles] == [c["tip_time_s"] for c in whole.cycles]
    assert resumed.summary["n_steps"] == whole.summary["n_steps"]
