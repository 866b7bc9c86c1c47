"""Every numba kernel against its plain NumPy twin (fvsolver.kernels.reference)."""
from __future__ import annotations

import numpy as np
import pytest

from fvsolver.kernels import conduction as kern
from fvsolver.kernels import reference as ref


@pytest.fixture
def graph(rng):
    n_cells, n_faces, n_boundary = 50, 120, 20
    owner = rng.integers(0, n_cells - 1, n_faces)
    neighbour = np.minimum(owner + rng.integers(1, 5, n_faces), n_cells - 1)
    owner = np.where(owner == neighbour, owner - 1, owner)
    return dict(
        n_cells=n_cells,
        owner=owner.astype(np.int64),
        neighbour=neighbour.astype(np.int64),
        boundary_cell=rng.integers(0, n_cells, n_boundary).astype(np.int64),
    )


def test_face_conductance_matches_reference(graph, rng):
    nf = len(graph["owner"])
    k = rng.uniform(0.05, 2.0, graph["n_cells"])
    d_o, d_n, geo = rng.uniform(0.1, 1, nf), rng.uniform(0.1, 1, nf), rng.uniform(0.1, 3, nf)
    out = np.empty(nf)
    kern.face_conductance(k, graph["owner"], graph["neighbour"], d_o, d_n, geo, out)
    np.testing.assert_allclose(out, ref.face_conductance(k, graph["owner"], graph["neighbour"], d_o, d_n, geo), rtol=1e-14)


def test_face_flux_sum_matches_reference(graph, rng):
    T = rng.uniform(280, 320, graph["n_cells"])
    g = rng.uniform(0.1, 3, len(graph["owner"]))
    out = np.zeros(graph["n_cells"])
    kern.face_flux_sum(T, graph["owner"], graph["neighbour"], g, out)
    np.testing.assert_allclose(out, ref.face_flux_sum(T, graph["owner"], graph["neighbour"], g, graph["n_cells"]),
                               rtol=1e-12, atol=1e-10)


def test_cell_gradients_match_reference(graph, rng):
    n, nf, nb = graph["n_cells"], len(graph["owner"]), len(graph["boundary_cell"])
    T, Tb = rng.uniform(280, 320, n), rng.uniform(280, 320, nb)
    lo, ln, lb = rng.normal(size=(nf, 2)), rng.normal(size=(nf, 2)), rng.normal(size=(nb, 2))
    out = np.empty((n, 2))
    kern.cell_gradients(T, graph["owner"], graph["neighbour"], lo, ln, graph["boundary_cell"], lb, Tb, out)
    expect = ref.cell_gradients(T, graph["owner"], graph["neighbour"], lo, ln, graph["boundary_cell"], lb, Tb)
    np.testing.assert_allclose(out, expect, rtol=1e-12, atol=1e-10)


def test_correction_flux_sum_matches_reference(graph, rng):
    n, nf = graph["n_cells"], len(graph["owner"])
    grad = rng.normal(size=(n, 2))
    kf, w, tan = rng.uniform(0.1, 2, nf), rng.uniform(0, 1, nf), rng.normal(size=(nf, 2))
    out = np.zeros(n)
    kern.correction_flux_sum(grad, graph["owner"], graph["neighbour"], kf, w, tan, out)
    expect = ref.correction_flux_sum(grad, graph["owner"], graph["neighbour"], kf, w, tan, n)
    np.testing.assert_allclose(out, expect, rtol=1e-12, atol=1e-12)


def test_fill_jacobian_matches_reference(rng):
    from fvsolver.conduction import ConductionProblem
    from tests.core.helpers import slab_problem

    problem: ConductionProblem = slab_problem(nx=7, ny=3)
    T = rng.uniform(290, 310, problem.n)
    ev = problem.evaluate(T, 0.0)
    _, dm = problem.capacity(T)
    J = problem.jacobian(1.5, 0.7, dm, ev)
    diag = 1.5 * dm - 0.7 * ev.boundary_jacobian
    expect = ref.jacobian_matrix(problem.mesh.owner, problem.mesh.neighbour, diag, ev.conductance, 0.7)
    np.testing.assert_allclose(J.toarray(), expect.toarray(), rtol=1e-13, atol=1e-12)


def test_affine_step_kernels_match_reference(rng):
    n = 500
    m0, m1, rate, cap, inflow, y0, delta = (rng.normal(size=n) for _ in range(7))
    a0, a1, a2, dt = 1.5, -2.0, 0.5, 0.37
    out = np.empty(n)
    kern.affine_rhs(m0, m1, rate, a0 + a1, a2, dt, out)
    assert np.array_equal(out, ref.affine_rhs(m0, m1, rate, a0 + a1, a2, dt))  # same operations, same bits
    y, m, r = np.empty(n), np.empty(n), np.empty(n)
    stored, heat = kern.affine_update(y0, delta, cap, m0, m1, inflow, a0, a1, a2, dt, y, m, r)
    y_ref, m_ref, r_ref, stored_ref, heat_ref = ref.affine_update(y0, delta, cap, m0, m1, inflow, a0, a1, a2, dt)
    assert np.array_equal(y, y_ref) and np.array_equal(m, m_ref)
    assert np.allclose(r, r_ref, rtol=1e-14, atol=1e-14)
    assert stored == pytest.approx(stored_ref, rel=1e-12, abs=1e-12)
    assert heat == pytest.approx(heat_ref, rel=1e-12, abs=1e-12)
    cells = rng.choice(n, 60, replace=False)
    slope, reference = rng.normal(size=60), rng.normal(size=n)
    assert kern.gross_exchange(y0, cells, slope, reference) == pytest.approx(
        ref.gross_exchange(y0, cells, slope, reference), rel=1e-13)


# -- the property kernels against the NumPy formulas of their property modules ----------------------
def test_water_property_kernels_match_their_numpy_twins(rng):
    from fvsolver.kernels import properties as kp
    from fvsolver.properties import water

    T = rng.uniform(273.16, 372.0, 40)
    out = np.empty_like(T)
    kp.if97_saturation_pressure(T, water._N_ARRAY, out)
    np.testing.assert_allclose(out, water._saturation_pressure_numpy(T), rtol=1e-14)
    kp.if97_dsaturation_pressure_dT(T, water._N_ARRAY, out)
    np.testing.assert_allclose(out, water._dsaturation_pressure_dT_numpy(T), rtol=1e-14)
    kp.ppds12_latent_heat(T, water._PPDS12_TC, water._PPDS12_ARRAY, water._R * water._PPDS12_TC, water.MOLAR_MASS, out)
    np.testing.assert_allclose(out, water._latent_heat_numpy(T), rtol=1e-14)
    # the public functions: kernels for arrays, NumPy for scalars, the same values in any shape
    np.testing.assert_allclose(water.saturation_pressure(T.reshape(8, 5)).ravel(),
                               [water.saturation_pressure(float(t)) for t in T], rtol=1e-14)


def test_fluid_property_kernels_match_their_numpy_twins(rng):
    from fvsolver.kernels import properties as kp
    from fvsolver.properties.fluids import FLUIDS, UNIVERSAL_GAS_CONSTANT, WagnerEquation, get_fluid

    checked = 0
    for name in FLUIDS:
        fluid = get_fluid(name)
        eq = fluid.vapour_pressure
        T = rng.uniform(max(eq.t_min, fluid.liquid_range[0]), min(eq.t_max, fluid.liquid_range[1]), 30)
        out = np.empty_like(T)
        if isinstance(eq, WagnerEquation):
            kp.wagner_pressure(T, eq.critical_temperature, eq.critical_pressure, eq._coefficients, out)
            np.testing.assert_allclose(out, eq._pressure_numpy(T), rtol=1e-14)
            kp.wagner_dlnp_dT(T, eq.critical_temperature, eq._coefficients, out)
            np.testing.assert_allclose(out, eq._dlnp_dT_numpy(T), rtol=1e-13)
            checked += 1
        kp.ppds12_latent_heat(T, fluid.critical_temperature, np.array(fluid.latent_heat_ppds12),
                              UNIVERSAL_GAS_CONSTANT * fluid.critical_temperature, fluid.molar_mass, out)
        np.testing.assert_allclose(out, fluid._latent_heat_numpy(T), rtol=1e-14)
        np.testing.assert_allclose(fluid.latent_heat(T), [fluid.latent_heat(float(t)) for t in T], rtol=1e-14)
    assert checked >= 1
