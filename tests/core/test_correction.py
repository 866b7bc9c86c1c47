"""The explicit affine form C T + c0 of the deferred non-orthogonal correction."""
from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from fvsolver.boundary import Convection, FixedTemperature, HeatFlux, PatchCondition, Radiation, Symmetry
from fvsolver.conduction import ConductionProblem
from fvsolver.correction import correction_operator
from fvsolver.errors import SolverError
from fvsolver.kernels import reference as ref
from fvsolver.materials import Material, TemperatureFunction
from fvsolver.mesh.head import device_head
from tests.core.helpers import rectangle_mesh

SOLID = {"solid": Material.constant("solid", 2230.0, 1.14, 750.0)}
HEAD_MATERIALS = {"glass": Material.constant("glass", 2230.0, 1.14, 750.0),
                  "cap": Material.constant("cap", 600.0, 0.35, 1400.0)}
RECTANGLE_PATCHES = ("left", "right", "bottom", "top")
HEAD_PATCHES = ("inner_wall", "glass_outer", "bore", "neck_outer", "neck_end", "cap_outer", "cap_edge")


def _head_mesh():
    return device_head(0.019, 0.0012, 0.002, (0.0, 1.9), 0.003, 0.0045, 0.03,
                       n_glass=3, n_cap=3, n_polar=16, n_neck=6)


def _conditions(patches, kind):
    """Conditions on ``patches`` (the axis, if any, is left to its automatic symmetry).

    ``kind`` "dirichlet": a different fixed temperature per patch, one of them varying in
    space and time; "mixed": fixed temperature, convection (one with h varying in time),
    heat flux plus convection, insulated; "convection": convection everywhere.
    """
    out = []
    for i, p in enumerate(q for q in patches if q != "axis"):
        if kind == "dirichlet":
            if i == 0:
                terms = (FixedTemperature(lambda x, t: 300.0 + 40.0 * x[:, 1] + 0.5 * t + 20.0 * x[:, 0]),)
            else:
                terms = (FixedTemperature(290.0 + 7.0 * i),)
        elif kind == "mixed":
            terms = [(FixedTemperature(330.0),),
                     (Convection(lambda x, t: 15.0 + 0.1 * t + 0 * x[:, 0], 285.0),),
                     (HeatFlux(350.0), Convection(4.0, 295.0)),
                     ()][i % 4]
        else:
            terms = (Convection(10.0 + 3.0 * i, 280.0 + 5.0 * i),)
        out.append(PatchCondition(p, terms))
    return out


def _affine_coefficients(problem, time):
    """q(T_s) = a + b T_s per boundary face, from the terms' parameters (not their heat_flux)."""
    mesh = problem.mesh
    a = np.zeros(mesh.n_boundary)
    b = np.zeros(mesh.n_boundary)

    def value(v, x):
        return np.broadcast_to(v(x, time), x.shape[:1]) if callable(v) else np.full(x.shape[0], float(v))

    for cond, faces in zip(problem.boundary.conditions, problem.boundary.faces):
        x = mesh.boundary_centres[faces]
        for term in cond.terms:
            if isinstance(term, HeatFlux):
                a[faces] += value(term.flux, x)
            elif isinstance(term, Convection):
                h = value(term.h, x)
                a[faces] += h * value(term.ambient_temperature, x)
                b[faces] -= h
    return a, b


def _uncorrected_rate(problem, T, time):
    """Two-point fluxes plus the boundary heat with the foot at T_P, built from the NumPy twins."""
    mesh, st = problem.mesh, problem.stencil
    k = problem.conductivity(T)
    g = ref.face_conductance(k, mesh.owner, mesh.neighbour, st.dist_owner, st.dist_neighbour, st.geometry)
    rate = ref.face_flux_sum(T, mesh.owner, mesh.neighbour, g, problem.n)
    bc = mesh.boundary_cell
    kappa = k[bc] / st.boundary_distance
    a, b = _affine_coefficients(problem, time)
    t_surface = (kappa * T[bc] + a) / (kappa - b)  # the affine flux-face balance solved for T_s
    for cond, faces in zip(problem.boundary.conditions, problem.boundary.faces):
        if cond.kind == "temperature":
            t = cond.terms[0].temperature
            x = mesh.boundary_centres[faces]
            t_surface[faces] = t(x, time) if callable(t) else t
    q = np.where(problem.boundary.symmetry, 0.0, kappa * (t_surface - T[bc]))
    return rate + np.bincount(bc, mesh.boundary_areas * q, problem.n)


def _cases():
    cases = []
    for system, r0 in (("planar", 0.0), ("axisymmetric", 0.0), ("axisymmetric", 0.3)):
        for kind in ("dirichlet", "mixed", "convection"):
            cases.append(pytest.param("rectangle", system, r0, kind, id=f"rect-{system}-r0={r0}-{kind}"))
    for kind in ("dirichlet", "mixed", "convection"):
        cases.append(pytest.param("head", "axisymmetric", 0.0, kind, id=f"head-{kind}"))
    return cases


def _build(mesh_kind, system, r0, kind):
    if mesh_kind == "head":
        mesh = _head_mesh()
        return ConductionProblem(mesh, HEAD_MATERIALS, _conditions(mesh.patch_names, kind))
    mesh = rectangle_mesh(9, 7, warp=0.05, coordinate_system=system, r0=r0)
    return ConductionProblem(mesh, SOLID, _conditions(mesh.patch_names, kind))


@pytest.mark.parametrize("mesh_kind, system, r0, kind", _cases())
def test_affine_operator_reproduces_the_full_rate(mesh_kind, system, r0, kind):
    problem = _build(mesh_kind, system, r0, kind)
    assert problem.correct
    time = 7.0
    C, c0 = correction_operator(problem, time)
    rng = np.random.default_rng(11)
    for _ in range(3):
        T = 300.0 + 15.0 * rng.standard_normal(problem.n)
        rate = problem.evaluate(T, time).rate
        base = _uncorrected_rate(problem, T, time)
        correction = C @ T + c0
        scale = np.abs(rate).max()
        # the correction must matter here, or agreement would prove nothing
        assert np.abs(correction).max() > 1e-4 * scale
        assert np.abs(rate - (base + correction)).max() <= 1e-10 * scale


@pytest.mark.parametrize("mesh_kind, system, r0, kind", _cases()[::3])
def test_affine_operator_matches_reference_gradient_correction(mesh_kind, system, r0, kind):
    """Face corrections plus Dirichlet offset terms from the NumPy kernel twins, at evaluate's T_s."""
    problem = _build(mesh_kind, system, r0, kind)
    mesh, st = problem.mesh, problem.stencil
    C, c0 = correction_operator(problem, 0.0)
    T = 300.0 + 10.0 * np.random.default_rng(3).standard_normal(problem.n)
    ev = problem.evaluate(T, 0.0)
    bc = mesh.boundary_cell
    grad = ref.cell_gradients(T, mesh.owner, mesh.neighbour, st.lsq_owner, st.lsq_neighbour, bc,
                              st.lsq_boundary, ev.surface_temperature)
    faces = ref.correction_flux_sum(grad, mesh.owner, mesh.neighbour, ev.conductance / st.geometry,
                                    st.weight_owner, st.tangent, problem.n)
    offset_heat = np.where(problem.boundary.dirichlet,
                           -ev.surface_conductance * mesh.boundary_areas
                           * np.einsum("ij,ij->i", grad[bc], st.boundary_offset), 0.0)
    expected = faces + np.bincount(bc, offset_heat, problem.n)
    assert np.abs(C @ T + c0 - expected).max() <= 1e-10 * np.abs(expected).max()


@pytest.mark.parametrize("mesh_kind, system, r0, kind", _cases()[1::3])
def test_one_solve_reaches_the_corrected_steady_state(mesh_kind, system, r0, kind):
    """With C in the matrix, one Newton step on the affine steady problem is exact."""
    problem = _build(mesh_kind, system, r0, kind)
    T0 = np.full(problem.n, 300.0)
    ev = problem.evaluate(T0, 0.0)
    _, dm = problem.capacity(T0)
    two_point = problem.jacobian(0.0, 1.0, dm, ev)  # -d(two-point rate)/dT
    C, _ = correction_operator(problem, 0.0)
    T = T0 + spla.spsolve((two_point - C).tocsc(), ev.rate)
    T_two_point = T0 + spla.spsolve(two_point.tocsc(), ev.rate)
    scale = np.abs(ev.conductance).max() * 50.0
    assert np.abs(problem.evaluate(T, 0.0).rate).max() <= 1e-10 * scale
    # leaving C out leaves a residual: the check above can fail
    assert np.abs(problem.evaluate(T_two_point, 0.0).rate).max() > 1e-6 * scale


@pytest.mark.parametrize("system", ["planar", "axisymmetric"])
def test_operator_vanishes_on_an_orthogonal_mesh(system):
    mesh = rectangle_mesh(8, 5, warp=0.0, coordinate_system=system, r0=0.0)
    problem = ConductionProblem(mesh, SOLID, _conditions(mesh.patch_names, "mixed"))
    assert not problem.correct
    C, c0 = correction_operator(problem, 0.0, honour_switch=False)
    ev = problem.evaluate(np.full(problem.n, 300.0), 0.0)
    g_max = ev.conductance.max()
    assert abs(C).max() <= 1e-12 * g_max
    assert np.abs(c0).max() <= 1e-12 * g_max * 300.0
    C_off, c0_off = correction_operator(problem, 0.0)
    assert C_off.nnz == 0 and not c0_off.any()


def test_switched_off_correction_gives_zero_but_geometry_does_not():
    mesh = rectangle_mesh(8, 5, warp=0.05)
    problem = ConductionProblem(mesh, SOLID, _conditions(mesh.patch_names, "mixed"),
                                nonorthogonal_correction=False)
    C, c0 = correction_operator(problem)
    assert C.nnz == 0 and not c0.any()
    C_geo, _ = correction_operator(problem, honour_switch=False)
    assert abs(C_geo).max() > 1e-3 * problem.evaluate(np.full(problem.n, 300.0), 0.0).conductance.max()


def test_pattern_stays_within_two_neighbour_rings_on_the_head():
    problem = _build("head", "axisymmetric", 0.0, "mixed")
    C, _ = correction_operator(problem, 0.0)
    adjacency = problem.stencil.pattern.copy()
    adjacency.data[:] = 1.0
    two_ring = (adjacency @ adjacency).tocsr()
    outside = C.copy()
    outside.data[:] = 1.0
    outside = outside - outside.multiply(two_ring > 0)
    assert outside.count_nonzero() == 0
    assert problem.stencil.pattern.nnz < C.nnz <= two_ring.nnz


@pytest.mark.parametrize("terms", [(Radiation(0.9, 290.0),), (Convection(5.0, 290.0), Radiation(0.5, 280.0))])
def test_non_affine_boundary_term_raises(terms):
    mesh = rectangle_mesh(6, 4, warp=0.05)
    conditions = [PatchCondition("left", terms), PatchCondition("right", (FixedTemperature(300.0),)),
                  PatchCondition("bottom", (Symmetry(),)), PatchCondition("top", ())]
    problem = ConductionProblem(mesh, SOLID, conditions)
    with pytest.raises(SolverError, match="Radiation"):
        correction_operator(problem)


def test_temperature_dependent_conductivity_raises():
    mesh = rectangle_mesh(6, 4, warp=0.05)
    material = Material("solid", 2230.0, TemperatureFunction("polynomial", (0.6, 0.0018)),
                        TemperatureFunction.constant(750.0))
    problem = ConductionProblem(mesh, {"solid": material}, _conditions(mesh.patch_names, "convection"))
    with pytest.raises(SolverError, match="conductivity"):
        correction_operator(problem)


def test_symmetry_faces_do_not_enter_the_gradients():
    """Changing the mirror faces' surface values cannot move C T + c0 (their lsq weight is zero)."""
    mesh = rectangle_mesh(7, 6, warp=0.05, coordinate_system="axisymmetric", r0=0.0)
    problem = ConductionProblem(mesh, SOLID, _conditions(mesh.patch_names, "mixed"))
    assert problem.boundary.symmetry.any()
    C, c0 = correction_operator(problem)
    assert sp.isspmatrix_csr(C) and C.shape == (problem.n, problem.n) and c0.shape == (problem.n,)
    T = 300.0 + np.random.default_rng(5).standard_normal(problem.n)
    st = problem.stencil
    sym = problem.boundary.symmetry
    assert np.all(st.lsq_boundary[sym] == 0.0)
    ev = problem.evaluate(T, 0.0)
    t_s = ev.surface_temperature.copy()
    t_s[sym] += 50.0
    grad = ref.cell_gradients(T, mesh.owner, mesh.neighbour, st.lsq_owner, st.lsq_neighbour,
                              mesh.boundary_cell, st.lsq_boundary, t_s)
    faces = ref.correction_flux_sum(grad, mesh.owner, mesh.neighbour, ev.conductance / st.geometry,
                                    st.weight_owner, st.tangent, problem.n)
    offset_heat = np.where(problem.boundary.dirichlet, -ev.surface_conductance * mesh.boundary_areas
                           * np.einsum("ij,ij->i", grad[mesh.boundary_cell], st.boundary_offset), 0.0)
    expected = faces + np.bincount(mesh.boundary_cell, offset_heat, problem.n)
    assert np.abs(C @ T + c0 - expected).max() <= 1e-10 * np.abs(expected).max()
