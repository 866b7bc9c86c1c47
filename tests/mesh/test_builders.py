"""Builders: closed-form volumes and areas, observed convergence orders, patch contracts.

The cells have straight edges, so in the axisymmetric system cell volumes and face
areas are exact for the polygonal domain (Pappus).  Domains with straight sides are
therefore measured exactly; curved boundaries are approximated by chords, whose
volume and area errors fall as h^2.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from fvsolver.errors import MeshError
from fvsolver.mesh import builders as B
from fvsolver.mesh import head as H

LEVELS = (1, 2, 4, 8)


def observed_order(h, err) -> float:
    """Slope of log(err) against log(h)."""
    return float(np.polyfit(np.log(h), np.log(err), 1)[0])


def check_second_order(errors, finest_cap):
    h = 1.0 / np.asarray(LEVELS[: len(errors)], dtype=float)
    errors = np.abs(np.asarray(errors))
    order = observed_order(h, errors)
    assert abs(order - 2.0) < 0.15, (order, errors)
    assert errors[-1] < finest_cap, errors
    return order


def zone_area(radius, theta0, theta1):
    """Area of a spherical zone between polar angles theta0 < theta1 (closed form)."""
    return 2.0 * math.pi * radius**2 * (math.cos(theta0) - math.cos(theta1))


def wedge_volume(r0, r1, theta0, theta1):
    """Volume between two spheres and two polar cones (closed form)."""
    return 2.0 * math.pi / 3.0 * (r1**3 - r0**3) * (math.cos(theta0) - math.cos(theta1))


# ----------------------------------------------------------------------------- grading
def test_graded_points_one_sided_ratio_and_end_points():
    p = B.graded_points(0.2, 1.7, 6, ratio=5.0)
    d = np.diff(p)
    assert p[0] == 0.2 and p[-1] == 1.7 and np.all(d > 0)
    assert d[-1] / d[0] == pytest.approx(5.0, rel=1e-12)
    assert np.allclose(d[1:] / d[:-1], 5.0 ** (1 / 5))
    q = B.graded_points(1.0, 0.0, 4, ratio=0.5)  # decreasing interval
    assert np.all(np.diff(q) < 0) and q[0] == 1.0 and q[-1] == 0.0
    assert np.allclose(np.diff(B.graded_points(0.0, 1.0, 4)), 0.25)
    assert np.array_equal(B.graded_points(0.0, 2.0, 1, ratio=3.0), [0.0, 2.0])


@pytest.mark.parametrize("n", [3, 4, 7, 8])
def test_graded_points_both_ends(n):
    d = np.diff(B.graded_points(0.0, 1.0, n, ratio=3.0, both_ends=True))
    assert np.allclose(d, d[::-1])  # symmetric
    assert d.max() / d[0] == pytest.approx(3.0, rel=1e-12)
    assert d[0] == pytest.approx(d.min(), rel=1e-12)


@pytest.mark.parametrize(
    "kwargs, item",
    [
        (dict(start=0.0, stop=1.0, n=0), "n"),
        (dict(start=0.0, stop=1.0, n=2.5), "n"),
        (dict(start=0.0, stop=1.0, n=3, ratio=-1.0), "ratio"),
        (dict(start=1.0, stop=1.0, n=3), "start, stop"),
        (dict(start=0.0, stop=math.inf, n=3), "stop"),
    ],
)
def test_graded_points_refuses_bad_arguments(kwargs, item):
    with pytest.raises(MeshError, match=item):
        B.graded_points(**kwargs)


# ----------------------------------------------------------------------------- exact domains
@pytest.mark.parametrize("k", [1, 2, 5])
def test_rectangles_are_measured_exactly(k):
    planar = B.rectangle(0.3, 0.2, 3 * k, 2 * k, x_grading=2.0, origin=(1.0, -1.0))
    assert planar.cell_volumes.sum() == pytest.approx(0.06, rel=1e-13)
    assert planar.patch_area("top") == pytest.approx(0.3, rel=1e-13)
    ring = B.rectangle(0.3, 0.2, 3 * k, 2 * k, "axisymmetric", origin=(0.1, 0.0))
    assert ring.patch_names == ("left", "right", "bottom", "top")
    assert ring.cell_volumes.sum() == pytest.approx(math.pi * (0.4**2 - 0.1**2) * 0.2, rel=1e-13)
    assert ring.patch_area("left") == pytest.approx(2 * math.pi * 0.1 * 0.2, rel=1e-13)
    disk = B.rectangle(0.3, 0.2, 3 * k, 2 * k, "axisymmetric")
    assert disk.patch_names == ("axis", "right", "bottom", "top")
    assert disk.patch_area("axis") == 0.0


@pytest.mark.parametrize("k", [1, 2, 4])
@pytest.mark.parametrize("system", ["planar", "axisymmetric"])
def test_warped_rectangle_is_exact_and_non_orthogonal(k, system):
    m = B.warped_rectangle(0.4, 0.25, 8 * k, 6 * k, 0.1, system)
    exact = 0.1 if system == "planar" else math.pi * 0.4**2 * 0.25
    assert m.cell_volumes.sum() == pytest.approx(exact, rel=1e-12)
    top = m.patch_faces("top")
    assert np.allclose(m.boundary_centres[top, 1], 0.25, rtol=0, atol=1e-15)
    assert m.patch_names[0] == ("axis" if system == "axisymmetric" else "left")
    # non-orthogonal: some face normals are far from the coordinate directions
    tilt = np.min(np.abs(m.face_normals), axis=1)
    assert tilt.max() > 0.2


def test_warped_rectangle_offset_and_amplitude_limit():
    m = B.warped_rectangle(1.0, 1.0, 10, 10, 0.05, "axisymmetric", origin=(0.5, 0.0))
    assert "left" in m.patch_names and "axis" not in m.patch_names
    with pytest.raises(MeshError, match="amplitude"):
        B.warped_rectangle(1.0, 1.0, 10, 10, 0.2)


@pytest.mark.parametrize("k", [1, 2, 4])
def test_cylinders_are_measured_exactly(k):
    solid = B.solid_cylinder(0.02, 0.05, 4 * k, 5 * k, radial_grading=0.5, z0=-0.01)
    assert solid.patch_names == ("axis", "outer", "bottom", "top")
    assert solid.cell_volumes.sum() == pytest.approx(math.pi * 0.02**2 * 0.05, rel=1e-13)
    assert solid.patch_area("outer") == pytest.approx(2 * math.pi * 0.02 * 0.05, rel=1e-13)
    assert solid.patch_area("top") == pytest.approx(math.pi * 0.02**2, rel=1e-13)
    tube = B.hollow_cylinder(1.5e-3, 2.5e-3, 0.04, 3 * k, 10 * k, radial_grading=2.0)
    assert tube.patch_names == ("inner", "outer", "bottom", "top")
    exact = math.pi * (2.5e-3**2 - 1.5e-3**2) * 0.04
    assert tube.cell_volumes.sum() == pytest.approx(exact, rel=1e-13)
    assert tube.patch_area("inner") == pytest.approx(2 * math.pi * 1.5e-3 * 0.04, rel=1e-13)


# ----------------------------------------------------------------------------- curved domains
def test_spherical_shell_volume_and_areas_converge_at_second_order():
    ri, ro = 0.01, 0.013
    volume = 4.0 / 3.0 * math.pi * (ro**3 - ri**3)
    errs_v, errs_a = [], []
    for k in LEVELS:
        m = B.spherical_shell(ri, ro, 2 * k, 12 * k, radial_grading=1.5)
        assert m.patch_names == ("inner", "outer", "axis")
        errs_v.append(m.cell_volumes.sum() / volume - 1.0)
        errs_a.append(m.patch_area("outer") / (4 * math.pi * ro**2) - 1.0)
    check_second_order(errs_v, 3e-4)
    check_second_order(errs_a, 3e-4)


def test_solid_sphere_volume_converges_at_second_order():
    errs_v, errs_a = [], []
    for k in LEVELS:
        m = B.solid_sphere(0.02, 3 * k)
        assert m.patch_names == ("axis", "surface") and m.material_names == ("solid",)
        errs_v.append(m.cell_volumes.sum() / (4 / 3 * math.pi * 0.02**3) - 1.0)
        errs_a.append(m.patch_area("surface") / (4 * math.pi * 0.02**2) - 1.0)
    check_second_order(errs_v, 5e-4)
    check_second_order(errs_a, 3e-4)


def test_solid_sphere_blocks_share_their_nodes():
    m = B.solid_sphere(1.0, 3, n_radial=4)
    assert m.n_cells == 3 * 6 + 4 * 12
    # a conforming O-grid has exactly the surface and axis faces on its boundary
    assert m.n_boundary == 12 + (6 + 4 + 4)


def test_two_layer_shell_cap_converges_and_hits_the_rims():
    ri, tg, tc, th0, th1 = 0.01, 0.5e-3, 1.2e-3, 0.3, 1.9
    ro, rc = ri + tg, ri + tg + tc
    errs_area, errs_cap, errs_glass = [], [], []
    for k in LEVELS:
        m = H.two_layer_shell(ri, tg, tc, (th0, th1), 2 * k, 2 * k, 20 * k, rim_grading=2.0)
        m.require_patches({"axis", "inner_wall", "glass_outer", "cap_outer", "cap_edge"})
        assert set(m.material_names) == {"glass", "cap"}
        errs_area.append(m.patch_area("cap_outer") / zone_area(rc, th0, th1) - 1.0)
        cap = m.cell_volumes[m.material_cells("cap")].sum()
        errs_cap.append(cap / wedge_volume(ro, rc, th0, th1) - 1.0)
        glass = m.cell_volumes[m.material_cells("glass")].sum()
        errs_glass.append(glass / (4 / 3 * math.pi * (ro**3 - ri**3)) - 1.0)
        edge = m.nodes[m.boundary_nodes[m.patch_faces("cap_edge")]].reshape(-1, 2)
        angle = np.arctan2(edge[:, 0], edge[:, 1])
        hit = np.minimum(np.abs(angle - th0), np.abs(angle - th1))
        assert hit.max() < 1e-12
    check_second_order(errs_area, 2e-4)
    check_second_order(errs_cap, 2e-4)
    check_second_order(errs_glass, 2e-4)


def test_two_layer_shell_cap_from_the_pole():
    m = H.two_layer_shell(0.01, 0.5e-3, 1e-3, (0.0, 1.2), n_polar=24)
    m.require_patches({"axis", "inner_wall", "glass_outer", "cap_outer", "cap_edge"})
    on_axis = m.boundary_cell[m.patch_faces("axis")]
    assert set(m.cell_material[on_axis]) == {0, 1}  # both layers reach the axis


# ----------------------------------------------------------------------------- device head
HEAD = dict(
    bulb_inner_radius=0.01,
    glass_thickness=0.6e-3,
    cap_thickness=1.0e-3,
    cap_polar_range=(0.2, 2.0),
    neck_inner_radius=1.5e-3,
    neck_outer_radius=2.5e-3,
    neck_length=0.02,
)
HEAD_PATCHES = {
    "axis", "inner_wall", "bore", "glass_outer", "cap_outer", "cap_edge", "neck_outer", "neck_end",
}


def head_glass_volume(ri, tg, a, b, length):
    """Glass volume of the device head (closed form).

    With Ro = Ri + t_glass the glass is the spherical shell Ri < rho < Ro, minus the
    part of it inside the bore cylinder r < a near the bottom pole, plus the tube
    a < r < b between the outer sphere z = -sqrt(Ro^2 - r^2) and
    z_end = -sqrt(Ro^2 - b^2) - L:

    * shell: 4/3 pi (Ro^3 - Ri^3);
    * hole: int_0^a 2 pi r [sqrt(Ro^2 - r^2) - sqrt(Ri^2 - r^2)] dr
      = 2 pi / 3 [Ro^3 - (Ro^2 - a^2)^(3/2) - Ri^3 + (Ri^2 - a^2)^(3/2)];
    * tube: int_a^b 2 pi r [sqrt(Ro^2 - b^2) + L - sqrt(Ro^2 - r^2)] dr
      = pi (b^2 - a^2) (sqrt(Ro^2 - b^2) + L)
        - 2 pi / 3 [(Ro^2 - a^2)^(3/2) - (Ro^2 - b^2)^(3/2)].
    """
    ro = ri + tg
    shell = 4.0 / 3.0 * math.pi * (ro**3 - ri**3)
    hole = 2 * math.pi / 3 * (ro**3 - (ro**2 - a**2) ** 1.5 - ri**3 + (ri**2 - a**2) ** 1.5)
    tube = math.pi * (b**2 - a**2) * (math.sqrt(ro**2 - b**2) + length) - 2 * math.pi / 3 * (
        (ro**2 - a**2) ** 1.5 - (ro**2 - b**2) ** 1.5
    )
    return shell - hole + tube


def head_inner_wall_area(ri, a):
    """Inner-wall area (closed form): the zone of the sphere Ri from the top pole down to
    the bore's rim at r = a, polar angle pi - arcsin(a / Ri):
    2 pi Ri^2 (1 - cos) = 2 pi Ri (Ri + sqrt(Ri^2 - a^2))."""
    return 2.0 * math.pi * ri * (ri + math.sqrt(ri**2 - a**2))


def test_device_head_volumes_and_areas_converge_at_second_order():
    ri, tg, tc = HEAD["bulb_inner_radius"], HEAD["glass_thickness"], HEAD["cap_thickness"]
    a, b, length = HEAD["neck_inner_radius"], HEAD["neck_outer_radius"], HEAD["neck_length"]
    th0, th1 = HEAD["cap_polar_range"]
    ro, rc = ri + tg, ri + tg + tc
    exact_glass = head_glass_volume(ri, tg, a, b, length)
    exact_wall = head_inner_wall_area(ri, a)
    bore_exact = 2 * math.pi * a * (length + math.sqrt(ro**2 - b**2) - math.sqrt(ri**2 - a**2))
    errs = {"glass": [], "wall": [], "cap_area": [], "cap_volume": []}
    for k in LEVELS:
        m = H.device_head(**HEAD, n_glass=2 * k, n_cap=2 * k, n_polar=24 * k, n_neck=4 * k)
        m.require_patches(HEAD_PATCHES)
        errs["glass"].append(m.cell_volumes[m.material_cells("glass")].sum() / exact_glass - 1)
        errs["wall"].append(m.patch_area("inner_wall") / exact_wall - 1)
        errs["cap_area"].append(m.patch_area("cap_outer") / zone_area(rc, th0, th1) - 1)
        cap = m.cell_volumes[m.material_cells("cap")].sum()
        errs["cap_volume"].append(cap / wedge_volume(ro, rc, th0, th1) - 1)
        # straight boundaries are exact
        assert m.patch_area("bore") == pytest.approx(bore_exact, rel=1e-12)
        assert m.patch_area("neck_end") == pytest.approx(math.pi * (b**2 - a**2), rel=1e-12)
    for key, values in errs.items():
        check_second_order(values, 1e-4)


def test_device_head_geometry_is_body_fitted():
    ri, tg, tc = HEAD["bulb_inner_radius"], HEAD["glass_thickness"], HEAD["cap_thickness"]
    a, b = HEAD["neck_inner_radius"], HEAD["neck_outer_radius"]
    m = H.device_head(**HEAD)
    m.require_patches(HEAD_PATCHES)
    assert m.material_names == ("glass", "cap")

    def patch_nodes(name):
        return m.nodes[m.boundary_nodes[m.patch_faces(name)]].reshape(-1, 2)

    rho = lambda p: np.hypot(p[:, 0], p[:, 1])  # noqa: E731
    assert np.allclose(rho(patch_nodes("inner_wall")), ri, rtol=1e-13)
    assert np.allclose(rho(patch_nodes("glass_outer")), ri + tg, rtol=1e-13)
    assert np.allclose(rho(patch_nodes("cap_outer")), ri + tg + tc, rtol=1e-13)
    assert np.allclose(patch_nodes("bore")[:, 0], a, rtol=1e-14)
    assert np.allclose(patch_nodes("neck_outer")[:, 0], b, rtol=1e-14)
    z_end = H.neck_end_z(ri, tg, b, HEAD["neck_length"])
    assert np.allclose(patch_nodes("neck_end")[:, 1], z_end, rtol=1e-14)
    assert patch_nodes("axis")[:, 1].min() > 0.0  # the axis is only met at the top pole
    # rims of the cap at theta0 and theta1, exactly
    angle = np.arctan2(patch_nodes("cap_edge")[:, 0], patch_nodes("cap_edge")[:, 1])
    rims = np.array(HEAD["cap_polar_range"])
    assert np.abs(angle[:, None] - rims[None, :]).min(axis=1).max() < 1e-12


def test_device_head_thin_layers_get_graded_cells():
    m = H.device_head(**{**HEAD, "cap_polar_range": (0.0, 2.0)})  # both layers on the axis
    axis = m.patch_faces("axis")
    for name in ("glass", "cap"):
        faces = axis[m.cell_material[m.boundary_cell[axis]] == m.material_names.index(name)]
        faces = faces[np.argsort(m.boundary_centres[faces, 1])]
        ends = m.nodes[m.boundary_nodes[faces]]
        sizes = np.abs(ends[:, 1, 1] - ends[:, 0, 1])
        assert sizes.size >= 4  # several cells through a sub-millimetre layer
        middle = sizes[sizes.size // 2]
        assert sizes[0] < middle and sizes[-1] < middle  # refined at both faces


def test_device_head_cap_from_the_pole_and_no_collapsed_cells():
    m = H.device_head(**{**HEAD, "cap_polar_range": (0.0, 2.2)}, rim_grading=3.0)
    m.require_patches(HEAD_PATCHES)
    assert m.cell_areas.min() > 0.0


@pytest.mark.parametrize(
    "change, item",
    [
        (dict(neck_inner_radius=3e-3), "neck_inner_radius"),
        (dict(neck_outer_radius=0.011), "neck_outer_radius"),
        (dict(glass_thickness=-1e-3), "glass_thickness"),
        (dict(cap_thickness=0.0), "cap_thickness"),
        (dict(cap_polar_range=(0.5, 0.4)), "cap_polar_range"),
        (dict(cap_polar_range=(0.5, 3.0)), "cap_polar_range"),
        (dict(cap_polar_range=(-0.1, 1.0)), "cap_polar_range"),
        (dict(cap_polar_range=0.3), "cap_polar_range"),
        (dict(neck_length=1e-5), "neck_length"),
        (dict(n_glass=0), "n_glass"),
        (dict(n_cap=2.0), "n_cap"),
        (dict(n_polar=2), "n_polar"),
        (dict(n_neck=-1), "n_neck"),
        (dict(neck_grading=0.0), "neck_grading"),
    ],
)
def test_device_head_refuses_bad_arguments(change, item):
    with pytest.raises(MeshError, match=item) as info:
        H.device_head(**{**HEAD, **change})
    assert "expected" in str(info.value)


@pytest.mark.parametrize(
    "call, item",
    [
        (lambda: B.rectangle(0.0, 1.0, 2, 2), "width"),
        (lambda: B.rectangle(1.0, 1.0, 2, 2, "spherical"), "coordinate_system"),
        (lambda: B.rectangle(1.0, 1.0, 2, 2, "axisymmetric", origin=(-1.0, 0.0)), "origin"),
        (lambda: B.rectangle(1.0, 1.0, 2, 2, material=""), "material"),
        (lambda: B.hollow_cylinder(2.0, 1.0, 1.0, 2, 2), "inner_radius"),
        (lambda: B.spherical_shell(1.0, 1.0, 2, 2), "inner_radius"),
        (lambda: B.solid_sphere(1.0, 2, core_fraction=0.9), "core_fraction"),
        (lambda: B.solid_cylinder(1.0, 1.0, True, 2), "n_r"),
        (lambda: H.two_layer_shell(0.01, 1e-3, 1e-3, (0.2, math.pi)), "cap_polar_range"),
    ],
)
def test_builders_refuse_bad_arguments(call, item):
    with pytest.raises(MeshError, match=item):
        call()
