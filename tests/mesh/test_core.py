"""Mesh core: refusal of bad meshes and geometric invariants of every generated mesh."""
from __future__ import annotations

import math

import numpy as np
import pytest

from fvsolver.errors import MeshError
from fvsolver.mesh import builders as B
from fvsolver.mesh import head as H
from fvsolver.mesh.core import Block, build_mesh, from_blocks

from tests.mesh.test_builders import HEAD  # one set of device-head test dimensions

GENERATED = {
    "rectangle": lambda: B.rectangle(0.3, 0.2, 5, 4, x_grading=3.0, y_grading=0.5),
    "rectangle_axi": lambda: B.rectangle(0.3, 0.2, 5, 4, "axisymmetric"),
    "warped": lambda: B.warped_rectangle(1.0, 0.5, 12, 9, 0.1),
    "warped_axi": lambda: B.warped_rectangle(1.0, 0.5, 6, 6, -0.1, "axisymmetric"),
    "warped_offset": lambda: B.warped_rectangle(1.0, 0.5, 8, 8, 0.1, "axisymmetric", (0.2, 0.0)),
    "solid_cylinder": lambda: B.solid_cylinder(0.02, 0.05, 4, 6, radial_grading=0.3),
    "hollow_cylinder": lambda: B.hollow_cylinder(0.01, 0.012, 0.05, 3, 8, 2.0),
    "solid_sphere": lambda: B.solid_sphere(0.02, 4),
    "solid_sphere_coarse": lambda: B.solid_sphere(1.0, 1, core_fraction=0.3),
    "spherical_shell": lambda: B.spherical_shell(0.01, 0.011, 3, 16, 2.0),
    "two_layer": lambda: H.two_layer_shell(0.01, 0.5e-3, 1e-3, (0.4, 2.1), rim_grading=3.0),
    "two_layer_pole": lambda: H.two_layer_shell(0.01, 0.5e-3, 1e-3, (0.0, 1.0), 1, 1, 3),
    "device_head": lambda: H.device_head(**HEAD),
    "device_head_pole": lambda: H.device_head(
        **{**HEAD, "cap_polar_range": (0.0, 2.5)}, n_polar=9, n_neck=3, n_neck_wall=1
    ),
}


PLANAR = ("rectangle", "warped")


@pytest.fixture(params=sorted(GENERATED), scope="module")
def mesh(request):
    return GENERATED[request.param]()


@pytest.fixture(params=sorted(set(GENERATED) - set(PLANAR)), scope="module")
def axi_mesh(request):
    return GENERATED[request.param]()


def plane_lengths(mesh, pairs):
    d = mesh.nodes[pairs[:, 1]] - mesh.nodes[pairs[:, 0]]
    return np.hypot(d[:, 0], d[:, 1])


# ----------------------------------------------------------------------------- invariants
def test_cell_areas_sum_to_the_domain_polygon_area(mesh):
    a, b = mesh.nodes[mesh.boundary_nodes[:, 0]], mesh.nodes[mesh.boundary_nodes[:, 1]]
    polygon = 0.5 * np.sum(a[:, 0] * b[:, 1] - b[:, 0] * a[:, 1])  # shoelace over the boundary
    assert mesh.cell_areas.sum() == pytest.approx(polygon, rel=1e-12)
    assert np.all(mesh.cell_areas > 0.0)


def test_interior_normals_point_from_owner_to_neighbour(mesh):
    d = mesh.cell_centres[mesh.neighbour] - mesh.cell_centres[mesh.owner]
    assert np.all(np.einsum("ij,ij->i", mesh.face_normals, d) > 0.0)
    assert np.all(mesh.owner < mesh.neighbour)
    # boundary normals point out of their cell
    out = mesh.boundary_centres - mesh.cell_centres[mesh.boundary_cell]
    assert np.all(np.einsum("ij,ij->i", mesh.boundary_normals, out) > 0.0)


def test_cells_are_closed(mesh):
    """Sum over each cell of its outward plane area vectors (length times normal) is 0."""
    total = np.zeros((mesh.n_cells, 2))
    s_f = mesh.face_normals * plane_lengths(mesh, mesh.face_nodes)[:, None]
    np.add.at(total, mesh.owner, s_f)
    np.add.at(total, mesh.neighbour, -s_f)
    s_b = mesh.boundary_normals * plane_lengths(mesh, mesh.boundary_nodes)[:, None]
    np.add.at(total, mesh.boundary_cell, s_b)
    scale = np.sqrt(mesh.cell_areas).max()
    assert np.abs(total).max() < 1e-12 * scale


def test_axisymmetric_area_vectors_match_the_divergence_theorem(axi_mesh):
    """For revolved cells: sum A_f n_z = 0 and sum A_f n_r = 2 pi A_plane (div e_r = 1/r)."""
    mesh = axi_mesh
    assert mesh.coordinate_system == "axisymmetric"
    total = np.zeros((mesh.n_cells, 2))
    s_f = mesh.face_normals * mesh.face_areas[:, None]
    np.add.at(total, mesh.owner, s_f)
    np.add.at(total, mesh.neighbour, -s_f)
    np.add.at(total, mesh.boundary_cell, mesh.boundary_normals * mesh.boundary_areas[:, None])
    assert np.allclose(total[:, 0], 2 * math.pi * mesh.cell_areas, rtol=1e-10, atol=0)
    assert np.abs(total[:, 1]).max() < 1e-10 * (2 * math.pi * mesh.cell_areas).max()
    assert np.allclose(mesh.cell_volumes, 2 * math.pi * mesh.cell_centres[:, 0] * mesh.cell_areas)


def test_cells_are_convex_and_counter_clockwise(mesh):
    p = mesh.nodes[mesh.cells]
    e_in = p - np.roll(p, 1, axis=1)
    e_out = np.roll(p, -1, axis=1) - p
    turn = e_in[..., 0] * e_out[..., 1] - e_in[..., 1] * e_out[..., 0]
    assert np.all(turn > 0.0)
    assert np.all(np.diff(np.sort(mesh.cells, axis=1), axis=1) > 0)  # four distinct nodes


def test_every_boundary_face_has_a_named_patch(mesh):
    assert mesh.boundary_patch.min() >= 0
    assert sum(len(mesh.patch_faces(n)) for n in mesh.patch_names) == mesh.n_boundary


# ----------------------------------------------------------------------------- bad meshes
def unit_square_nodes(n=2, x0=0.0):
    x = np.linspace(x0, x0 + 1.0, n + 1)
    gx, gy = np.meshgrid(x, np.linspace(0.0, 1.0, n + 1), indexing="ij")
    return np.stack([gx, gy], axis=-1)


ALL_SIDES = {"i_min": "left", "i_max": "right", "j_min": "bottom", "j_max": "top"}


def test_inverted_cell_is_refused():
    nodes = np.array([[0, 0], [1, 0], [2, 0], [0, 1], [1, 1], [2, 1]], dtype=float)
    cells = np.array([[0, 1, 4, 3], [1, 4, 5, 2]])  # the second one is clockwise
    edges = np.array([[0, 1], [1, 2], [2, 5], [5, 4], [4, 3], [3, 0]])
    with pytest.raises(MeshError, match=r"cells \[1\]: inverted"):
        build_mesh("planar", nodes, cells, [0, 0], ("solid",), edges, ["wall"] * 6)


def test_folded_cell_inside_a_block_is_refused():
    nodes = unit_square_nodes(2)
    nodes[1, 1] = [-0.4, 1.4]  # drags the centre node out past a corner of the block
    with pytest.raises(MeshError, match="cells"):
        from_blocks([Block(nodes, "solid", ALL_SIDES)], "planar")


def test_collapsed_cell_is_refused():
    nodes = unit_square_nodes(3)
    nodes[2] = nodes[1]  # collapses the middle column of cells onto a line
    with pytest.raises(MeshError, match=r"cells \[.*\]: degenerate"):
        from_blocks([Block(nodes, "solid", ALL_SIDES)], "planar")


def test_boundary_face_without_patch_is_refused():
    sides = {k: v for k, v in ALL_SIDES.items() if k != "j_max"}
    with pytest.raises(MeshError, match=r"boundary: 2 face\(s\) belong to no patch"):
        from_blocks([Block(unit_square_nodes(2), "solid", sides)], "planar")


def test_patch_on_a_joined_side_is_refused():
    left = Block(unit_square_nodes(2), "solid", {**ALL_SIDES, "i_max": None})
    right = Block(unit_square_nodes(2, x0=1.0), "solid", {**ALL_SIDES, "i_min": "joint"})
    with pytest.raises(MeshError, match=r"patch 'joint'.*not on the boundary"):
        from_blocks([left, right], "planar")
    left = Block(unit_square_nodes(2), "solid", {**ALL_SIDES, "i_max": None})
    right = Block(unit_square_nodes(2, x0=1.0), "solid", {**ALL_SIDES, "i_min": None})
    assert from_blocks([left, right], "planar").n_cells == 8  # the same blocks, joined properly


def test_axis_face_with_the_wrong_patch_is_refused():
    with pytest.raises(MeshError, match=r"patch 'left'.*lies on r = 0"):
        from_blocks([Block(unit_square_nodes(2), "solid", ALL_SIDES)], "axisymmetric")
    sides = {**ALL_SIDES, "i_min": "axis", "i_max": "axis"}
    with pytest.raises(MeshError, match=r"patch 'axis'.*does not lie on r = 0"):
        from_blocks([Block(unit_square_nodes(2), "solid", sides)], "axisymmetric")


def test_patch_names_not_matching_the_expected_set_are_refused():
    m = B.rectangle(1.0, 1.0, 2, 2)
    m.require_patches({"left", "right", "bottom", "top"})
    with pytest.raises(MeshError, match=r"case mesh.*unknown \['top'\], missing \['lid'\]"):
        m.require_patches({"left", "right", "bottom", "lid"}, where="case mesh")
    with pytest.raises(MeshError, match="patch 'lid'"):
        m.patch_faces("lid")


@pytest.mark.parametrize("material", ["", None])
def test_untagged_block_is_refused(material):
    good = Block(unit_square_nodes(2), "solid", {**ALL_SIDES, "i_max": None})
    bad = Block(unit_square_nodes(2, x0=1.0), material, {**ALL_SIDES, "i_min": None})
    with pytest.raises(MeshError, match=r"block 1: material tag missing"):
        from_blocks([good, bad], "planar")


def test_untagged_cells_are_refused():
    m = B.rectangle(1.0, 1.0, 2, 2)
    with pytest.raises(MeshError, match=r"cells \[3\]: no material tag"):
        build_mesh(
            "planar", m.nodes, m.cells, [0, 0, 0, 1], ("solid",), m.boundary_nodes,
            np.asarray(m.patch_names, dtype=object)[m.boundary_patch].tolist(),
        )


@pytest.mark.parametrize("binned", [True, False])
def test_close_pairs_and_merged_nodes_agree_with_scipy_k_d_tree_and_components(monkeypatch, binned):
    """Node merging's pairs and groups against scipy's cKDTree.query_pairs and
    csgraph.connected_components (a general-purpose reference) on random clouds with exact and
    near duplicates, tolerances from round-off to chains of neighbours; both of close_pairs'
    paths (numpy bins up to BINNED_PAIRS_UP_TO points, the k-d tree beyond)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    from fvsolver.mesh import core

    monkeypatch.setattr(core, "BINNED_PAIRS_UP_TO", 10**9 if binned else 0)
    rng = np.random.default_rng(7)
    for _ in range(60):
        n = int(rng.integers(2, 300))
        points = rng.random((n, 2)) * rng.choice([1e-3, 1.0, 50.0])
        copies = rng.integers(0, n, int(rng.integers(0, n)))
        points = np.vstack([points, points[copies] + rng.normal(0.0, 1e-12, (len(copies), 2))])
        tol = float(rng.choice([1e-13, 1e-9, 1e-6, 0.01, 0.05])) * float(np.ptp(points, axis=0).max())
        expected = cKDTree(points).query_pairs(tol, output_type="ndarray").reshape(-1, 2)
        expected = np.unique(expected, axis=0) if len(expected) else expected
        assert np.array_equal(core.close_pairs(points, tol), expected)
        graph = coo_matrix((np.ones(len(expected)), (expected[:, 0], expected[:, 1])), shape=(len(points),) * 2)
        assert np.array_equal(core.merged_labels(points, tol), connected_components(graph, directed=False)[1])


@pytest.mark.parametrize("values", [np.array([], dtype=np.int64), np.array([3]), np.array([2, 2, 2]),
                                    np.random.default_rng(5).integers(0, 40, 500),
                                    np.random.default_rng(6).normal(size=300).round(1),
                                    np.array([[4, 1], [1, 9]])])
def test_distinct_values_are_numpys_unique(values):
    from fvsolver.mesh.core import distinct

    got = distinct(values)
    want = np.unique(values)
    assert got.dtype == want.dtype
    np.testing.assert_array_equal(got, want)
