"""The whole device's mesh: its parts where the layout puts them, areas and volumes converging
to the exact ones at second order (Pappus' theorems, exact for straight-edged cells)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from fvsolver.errors import MeshError
from fvsolver.mesh.device import device_layout, spherical_cap_centroid, spherical_cap_volume, whole_device

DIMS = dict(bulb_inner_radius=0.019, glass_thickness=0.0012, cap_thickness=0.002,
            cap_polar_range=(0.0, math.radians(110.0)), tube_inner_radius=0.0025, tube_outer_radius=0.004,
            tube_length=0.12, body_inner_radius=0.024, body_glass_thickness=0.0015, tube_end_gap=0.004)


def _mesh(level: int):
    return whole_device(**DIMS, n_glass=2 * level, n_cap=2 * level, n_polar=16 * level, n_tube=6 * level,
                        n_body_polar=12 * level, n_dip=4 * level)


def _exact_areas() -> dict:
    """Exact patch areas of the whole device (sphere zones 2 pi R h, cylinders 2 pi r l)."""
    L = device_layout(0.019, 0.0012, 0.0025, 0.004, 0.12, 0.024, 0.0015, 0.004)
    a, b, rbi, rbo = 0.0025, 0.004, L.body_inner_radius, L.body_outer_radius
    zc = L.body_centre_z
    body_inner = 2 * math.pi * rbi * (rbi + math.sqrt(rbi**2 - b**2))   # zone below the tube's hole
    body_outer = 2 * math.pi * rbo * (rbo + math.sqrt(rbo**2 - b**2))
    dip_top = zc + math.sqrt(rbi**2 - b**2)                            # where the dip tube leaves the glass
    dip_outer = 2 * math.pi * b * (dip_top - L.tube_end_z)
    neck_outer = 2 * math.pi * b * 0.12
    tube_end = math.pi * (b * b - a * a)
    return {"body_inner": body_inner, "body_outer": body_outer, "dip_tube_outer": dip_outer,
            "neck_outer": neck_outer, "tube_end": tube_end}


def test_parts_sit_where_the_layout_puts_them():
    mesh = _mesh(1)
    L = device_layout(0.019, 0.0012, 0.0025, 0.004, 0.12, 0.024, 0.0015, 0.004)
    assert set(mesh.patch_names) == {"axis", "inner_wall", "bore", "glass_outer", "cap_outer", "cap_edge",
                                     "neck_outer", "body_inner", "body_outer", "dip_tube_outer", "tube_end"}
    assert mesh.nodes[:, 1].min() == pytest.approx(L.body_bottom_z, abs=1e-15)
    assert mesh.nodes[:, 1].max() == pytest.approx(0.019 + 0.0012 + 0.002, rel=1e-12)
    end = mesh.boundary_centres[mesh.patch_faces("tube_end")]
    assert np.allclose(end[:, 1], L.tube_end_z, atol=1e-15)
    assert L.tube_end_z - (L.body_centre_z - 0.024) == pytest.approx(0.004, rel=1e-12)


def test_patch_areas_converge_at_second_order():
    exact = _exact_areas()
    levels = (1, 2, 4)
    errors = {k: [] for k in exact}
    for level in levels:
        mesh = _mesh(level)
        for k, v in exact.items():
            errors[k].append(abs(mesh.boundary_areas[mesh.patch_faces(k)].sum() - v) / v)
    for k, e in errors.items():
        if max(e) < 1e-12:  # straight patches (cylinders, the annulus) are exact on every mesh
            continue
        order = -np.polyfit(np.log(levels), np.log(e), 1)[0]
        assert abs(order - 2.0) < 0.15, (k, order, e)
        assert e[-1] < 1e-3, k


def test_glass_volume_converges_at_second_order():
    """Successive differences of the glass volume shrink by 2^2 per halving of the cells (the
    observed order from three meshes, Richardson's estimate)."""
    volumes = []
    for level in (1, 2, 4):
        m = _mesh(level)
        volumes.append(m.cell_volumes[m.cell_material == m.material_names.index("glass")].sum())
    order = math.log2((volumes[0] - volumes[1]) / (volumes[1] - volumes[2]))
    assert abs(order - 2.0) < 0.15, order


def test_spherical_cap_formulas_against_a_hemisphere_and_a_ball():
    """Exact: a hemisphere holds 2/3 pi R^3 with its centroid 3R/8 from the plane (5R/8 from the pole)."""
    R = 0.02
    assert spherical_cap_volume(R, R) == pytest.approx(2.0 / 3.0 * math.pi * R**3, rel=1e-14)
    assert spherical_cap_volume(R, 2 * R) == pytest.approx(4.0 / 3.0 * math.pi * R**3, rel=1e-14)
    assert spherical_cap_centroid(R, R) == pytest.approx(5.0 * R / 8.0, rel=1e-14)
    assert spherical_cap_centroid(R, 2 * R) == pytest.approx(R, rel=1e-14)


@pytest.mark.parametrize("change, key", [
    ({"tube_end_gap": 0.0001}, "tube_end_gap"),
    ({"tube_end_gap": 0.05}, "tube_end_gap"),
    ({"tube_outer_radius": 0.03}, "tube_inner_radius, tube_outer_radius"),
    ({"tube_length": 0.0001}, "tube_length"),
])
def test_bad_dimensions_name_the_key(change, key):
    with pytest.raises(MeshError, match=key):
        whole_device(**{**DIMS, **change})
