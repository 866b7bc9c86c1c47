"""The stencil's orthogonality test: rounding in the cell centres is not non-orthogonality."""
from __future__ import annotations

import numpy as np
import pytest

from fvsolver.boundary import Convection, FixedTemperature, PatchCondition
from fvsolver.conduction import ConductionProblem
from fvsolver.discretisation import ORTHOGONAL_TOLERANCE, build_stencil, centroid_rounding
from fvsolver.materials import Material
from fvsolver.mesh import builders

SOLID = Material.constant("solid", 2230.0, 1.14, 750.0)


def _relative_tangent(mesh) -> np.ndarray:
    """|S - E| / |S| per interior face, as the stencil computes it."""
    d = mesh.cell_centres[mesh.neighbour] - mesh.cell_centres[mesh.owner]
    nd = (mesh.face_normals * d).sum(axis=1)
    t = mesh.face_areas[:, None] * mesh.face_normals - (mesh.face_areas / nd)[:, None] * d
    return np.hypot(t[:, 0], t[:, 1]) / mesh.face_areas


def _no_symmetry(mesh) -> np.ndarray:
    return np.zeros(mesh.n_boundary, dtype=bool)


@pytest.mark.parametrize("system", ["planar", "axisymmetric"])
def test_rectangle_with_rounded_centres_takes_the_two_point_path(system):
    # 0.1 mm cells' worth of rectangle placed 1 m from the origin: the centres' rounding
    # (~eps * 1 m) is 1e-10 of the 0.5 um spacing, above a fixed 1e-10 tolerance
    mesh = builders.rectangle(1e-4, 2.5e-4, 200, 400, system, origin=(1.0, 1.0))
    rel = _relative_tangent(mesh)
    assert rel.max() > ORTHOGONAL_TOLERANCE  # the rounding is really there: a fixed tolerance would bite
    assert not build_stencil(mesh, _no_symmetry(mesh)).nonorthogonal
    conditions = [PatchCondition("left", (FixedTemperature(300.0),)),
                  PatchCondition("right", (Convection(10.0, 290.0),)),
                  PatchCondition("bottom", ()), PatchCondition("top", ())]
    problem = ConductionProblem(mesh, {"solid": SOLID}, conditions)
    assert problem._implicit_correction is None  # two-point matrix: the correction is off
    _, dm = problem.capacity(np.full(problem.n, 295.0))
    J = problem.jacobian(1.0, 0.1, dm, problem.evaluate(np.full(problem.n, 295.0), 0.0))
    assert J.nnz == mesh.n_cells + 2 * mesh.n_faces  # the 5-point pattern, nothing wider


@pytest.mark.parametrize("amplitude", [1e-3, 1e-7])
def test_slightly_warped_mesh_keeps_the_correction(amplitude):
    mesh = builders.warped_rectangle(0.02, 0.05, 100, 200, amplitude)
    assert build_stencil(mesh, _no_symmetry(mesh)).nonorthogonal


@pytest.mark.parametrize("origin", [(0.0, 0.0), (0.3, 1.0), (1.0, -2.0)])
def test_centroids_are_accurate_and_within_their_rounding_bound(origin):
    # the exact centroid of a plain rectangle is the mean of its corners (sums of 4 floats: a few ulp)
    mesh = builders.rectangle(0.02, 0.05, 100, 200, "planar", origin=origin)
    corners = mesh.nodes[mesh.cells]
    exact = 0.5 * (corners.min(axis=1) + corners.max(axis=1))
    error = np.abs(mesh.cell_centres - exact).max(axis=1)
    bound = centroid_rounding(mesh.nodes, mesh.cells)
    assert np.all(error <= bound)
    # the bound is of the order of eps |x| (+ the cell size), not (|x| / h)^2 eps |x|
    reach = np.abs(corners).max(axis=(1, 2))
    assert np.all(bound <= 40 * np.finfo(float).eps * (reach + 1e-4))


def test_the_stencils_pattern_and_positions_are_those_of_a_matrix_built_from_its_entries():
    """The pattern's CSR structure is formed with numpy (a checked set-up imports no scipy.sparse);
    scipy's own COO-to-CSR conversion of the diagonal and both entries of every face gives it back,
    and each kept position holds its (row, column)."""
    import scipy.sparse as sp

    mesh = builders.warped_rectangle(0.02, 0.05, 7, 9, 1e-3)
    st = build_stencil(mesh, _no_symmetry(mesh))
    n = mesh.n_cells
    rows = np.concatenate([np.arange(n), mesh.owner, mesh.neighbour])
    cols = np.concatenate([np.arange(n), mesh.neighbour, mesh.owner])
    expected = sp.csr_matrix((np.ones(rows.size), (rows, cols)), shape=(n, n))
    expected.sum_duplicates()
    expected.sort_indices()
    assert st.pattern.has_canonical_format and st.pattern.shape == (n, n)
    np.testing.assert_array_equal(st.pattern.indptr, expected.indptr)
    np.testing.assert_array_equal(st.pattern.indices, expected.indices)
    row_of = np.repeat(np.arange(n), np.diff(st.pattern.indptr))
    for pos, r, c in ((st.diag_pos, np.arange(n), np.arange(n)), (st.owner_pos, mesh.owner, mesh.neighbour),
                      (st.neighbour_pos, mesh.neighbour, mesh.owner)):
        np.testing.assert_array_equal(row_of[pos], r)
        np.testing.assert_array_equal(st.pattern.indices[pos], c)
