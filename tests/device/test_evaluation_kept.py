"""The device evaluation's kept pieces: the context against the property functions it replaces,
the compiled surface solve's parameter rows updated in place against fresh ones, and evaluations
the stepper holds that later evaluations must not overwrite."""
from __future__ import annotations

import numpy as np
import pytest

from fvsolver.case.build import build
from fvsolver.kernels import COMPILED
from fvsolver.properties import convection, porous
from fvsolver.stepper import TimeStepper
from tests.device.cycle_helpers import whole_case
from tests.device.helpers import device_case

HOT = [{"patch": "body_outer", "air_temperature": 318.15, "air_speed": 2.0}]


def stepped(case, seconds: float):
    setup = build(case)
    stepper = TimeStepper(setup.problem, setup.initial, 0.0, seconds, setup.options)
    while stepper.step():
        pass
    return setup.problem, stepper.y.copy()


@pytest.fixture(scope="module")
def head():
    return stepped(device_case(cap_water={"mode": "charge"}), 3.0)


@pytest.fixture(scope="module")
def whole():
    return stepped(whole_case(hot_air=HOT), 2.0)


def test_context_matches_the_checked_property_functions(head, whole):
    """h, h_m, the drying factor and the means, as the NumPy property functions give them."""
    for problem, y in (head, whole):
        y = y.copy()
        y[problem.i_w] *= 0.3  # a drying cap
        problem._context_cache = None
        ctx = problem.context(y)
        mesh, room, cw = problem.mesh, problem.spec.room, problem.spec.cap_water
        T = y[: problem.n_cells]
        outer = problem.outer_faces
        t_mean = np.average(T[mesh.boundary_cell[outer]], weights=mesh.boundary_areas[outer])
        assert ctx["cap"]["surface_mean"] == pytest.approx(t_mean, rel=1e-14)
        t = float(np.clip(t_mean, 274.0, 320.0))
        h = float(convection.sphere_convection(room.diameter, t, room.air_temperature, room.pressure,
                                               room.air_speed, room.convection).h)
        h_m = float(convection.mass_transfer_coefficient(h, 0.5 * (t + room.air_temperature), room.pressure,
                                                         room.lewis_number))
        assert ctx["cap"]["h"] == pytest.approx(h, rel=1e-13) and ctx["room"]["h"] == ctx["cap"]["h"]
        assert ctx["cap"]["h_m"] == pytest.approx(h_m, rel=1e-13)
        s = y[problem.i_w] / problem.pore_water_capacity
        wet = porous.drying_rate_factor(np.clip(s, 0.0, 1.0), cw.critical_saturation, cw.residual_saturation)
        assert ctx["cap"]["wet_fraction"] == pytest.approx(float(wet), rel=1e-15)
        p = problem.pressures(y)
        assert ctx["vapour"]["pressure"] == pytest.approx(p["head_vapour_pa"], rel=1e-14)
        assert ctx["vapour"]["temperature"] == pytest.approx(p["vapour_temperature_k"], rel=1e-14)
    problem, y = whole
    ctx = problem.context(y)
    T = y[: problem.n_cells]
    faces = problem.body_faces
    t_body = np.clip(np.average(T[problem.mesh.boundary_cell[faces]], weights=problem.mesh.boundary_areas[faces]),
                     274.0, 390.0)
    room, d = problem.spec.room, problem.body.diameter
    h_body = convection.sphere_convection(d, min(t_body, 320.0), room.air_temperature, room.pressure,
                                          room.air_speed, room.convection).h
    h_hot = convection.sphere_convection(d, t_body, 318.15, room.pressure, 2.0, "forced").h
    assert ctx["body"]["h"] == pytest.approx(float(h_body), rel=1e-13)
    assert ctx["hot_air:body_outer"]["h"] == pytest.approx(float(h_hot), rel=1e-13)
    assert ctx["pool"]["temperature"] == y[problem.i_tb]


@pytest.mark.skipif(not COMPILED, reason="the compiled surface solve is off under NUMBA_DISABLE_JIT")
def test_kept_parameter_rows_match_fresh_ones(whole):
    problem, y = whole
    compiled = problem.conduction._compiled
    centres = problem.mesh.boundary_centres
    for scale in (1.0, 0.5, 0.0):
        z = y.copy()
        z[problem.i_c] *= scale
        z[problem.i_w] *= scale
        z[problem.i_tb] += 1.0 - scale
        z[: problem.n_cells] += 2.0 * scale
        ctx = problem.context(z)
        rows = compiled.parameters(centres, ctx)
        fresh = np.concatenate([term.surface_parameters(f, centres[f], ctx) for term, f in compiled.groups])
        np.testing.assert_array_equal(rows, fresh)


def test_kept_evaluations_are_not_overwritten(head, whole):
    """An evaluation the stepper holds keeps its values while the problem evaluates other states
    (kept arrays, such as the face conductances, are shared but never written to)."""
    for problem, y in (head, whole):
        first = problem.evaluate(y, 1.0)
        arrays = {"rate": first.rate, "condensation": first.condensation, "evaporation": first.evaporation,
                  "sensible": first.sensible, "conductance": first.conduction.conductance,
                  "surface_temperature": first.surface_temperature, "boundary_heat": first.boundary_heat,
                  "surface_conductance": first.conduction.surface_conductance,
                  "surface_derivative": first.conduction.surface_derivative,
                  "inventory": first.context["vapour"]["inventory"],
                  **{k: v for k, v in first.extras.items() if isinstance(v, np.ndarray)}}
        copies = {k: v.copy() for k, v in arrays.items()}
        scalars = (dict(first.context["cap"]), first.inflows.copy())
        for shift in (3.0, -2.0):
            z = y.copy()
            z[: problem.n_cells] += shift
            z[problem.i_c] *= 0.5
            z[problem.i_w] *= 0.7
            problem.evaluate(z, 2.0)
        for k, v in arrays.items():
            np.testing.assert_array_equal(v, copies[k], err_msg=k)
        assert (dict(first.context["cap"]), first.inflows) == scalars
        # the same state again: the same rates, up to the surface solve's round-off from another start
        again = problem.evaluate(y, 1.0)
        scale = np.abs(first.boundary_heat).max()
        np.testing.assert_allclose(again.rate[: problem.n_cells], first.rate[: problem.n_cells], rtol=0,
                                   atol=1e-11 * scale)


def test_boundary_kernel_matches_the_face_kernel(whole):
    """kernels.surfaces.solve_boundary_faces (gathers and scatters on the boundary) against
    solve_surfaces on the gathered faces (itself checked against the terms' NumPy heat_flux in
    test_surface_kernel.py), from a cold start and from a guess."""
    from fvsolver.conduction import _compiled_surfaces
    from fvsolver.kernels import surfaces as ks

    problem, y = whole
    c, mesh = problem.conduction, problem.mesh
    compiled = c._compiled or _compiled_surfaces(c._every_flux_group, mesh.n_boundary)
    if compiled is None:  # NUMBA_DISABLE_JIT: the terms' NumPy twins are solved instead
        pytest.skip("the compiled surface solve is off under NUMBA_DISABLE_JIT")
    ctx = problem.context(y)
    T = y[: problem.n_cells]
    kappa = c.conductivity(T, ctx)[mesh.boundary_cell] / c.stencil.boundary_distance
    t_foot = T[mesh.boundary_cell]
    params = compiled.parameters(mesh.boundary_centres, ctx)
    faces = compiled.faces
    for guess in (np.zeros(0), t_foot + 0.3):
        nb = mesh.n_boundary
        t_s, q, dq, g1 = t_foot.copy(), np.zeros(nb), np.zeros(nb), np.zeros(nb)
        terms = np.full((nb, ks.OUTPUTS), np.nan)
        ks.solve_boundary_faces(compiled.kinds, params, faces, kappa, t_foot, guess, compiled.fluid,
                                compiled.water, compiled.water_latent, t_s, q, dq, g1, terms)
        out = np.empty((faces.size, ks.OUTPUTS))
        start = np.zeros(faces.size) if guess.size == 0 else guess[faces]
        ks.solve_surfaces(compiled.kinds, params, kappa[faces].copy(), t_foot[faces].copy(), start,
                          compiled.fluid, compiled.water, compiled.water_latent, out)
        np.testing.assert_array_equal(terms[faces], out)
        np.testing.assert_array_equal(t_s[faces], out[:, ks.TS])
        kf = kappa[faces]
        np.testing.assert_array_equal(q[faces], kf * (out[:, ks.TS] - t_foot[faces]))
        np.testing.assert_array_equal(dq[faces], kf * out[:, ks.DQ] / (kf - out[:, ks.DQ]))
        others = np.setdiff1d(np.arange(nb), faces)
        assert np.all(np.isnan(terms[others])) and np.all(q[others] == 0.0)


@pytest.mark.parametrize("model", ["parallel", "series", "maxwell_eucken", "emt"])
def test_cap_properties_match_the_checked_functions(model):
    """The porous cap's k and rho c on plain floats (after a first checked call) are the checked
    property functions' numbers bit for bit; a NaN saturation is still refused."""
    from fvsolver.device.cap import AIR_VOLUMETRIC_HEAT, WATER_CONDUCTIVITY, PorousCap
    from fvsolver.errors import PropertyError

    cap = PorousCap("cap", 0.85, 1300.0, 0.2, 1700.0, model)
    for s in (1.0, 0.0, 0.37, 0.5, 0.999, 1.7, -0.2):
        k, rho_c = cap._properties({"cap": {"saturation": s}})
        clipped = min(max(s, 0.0), 1.0)
        assert k == float(porous.effective_conductivity(0.85, clipped, 0.2, WATER_CONDUCTIVITY,
                                                        cap._air_conductivity, model))
        assert rho_c == float(porous.effective_volumetric_heat_capacity(0.85, clipped, 1300.0 * 1700.0,
                                                                        cap.water_volumetric_heat,
                                                                        AIR_VOLUMETRIC_HEAT))
    with pytest.raises(PropertyError, match="saturation"):
        cap._properties({"cap": {"saturation": float("nan")}})
