"""The whole device on one axis: head bulb with its cap, the tube, the body bulb.

Lengths in m, angles in rad, polar angles from the top pole (+z); the head's centre is
the origin.  From the top down:

* the head (:func:`fvsolver.mesh.head.device_head` without its neck end): glass shell,
  porous cap over a polar range, collar round the bore at the bottom pole;
* the tube between the bulbs, r in [a, b], from the head's outer sphere down to the
  body's outer sphere (its length ``tube_length`` measured along r = b);
* the body bulb, a glass shell of inner radius Rb and thickness t_b centred at
  z_c = -sqrt(Ro^2 - b^2) - tube_length - sqrt(Rbo^2 - b^2), entered by the tube at its
  top pole (a collar round the bore, as at the head);
* the dip tube inside the body, from the body's inner sphere down to
  z_end = z_c - Rb + ``tube_end_gap``, its end standing in the pool.

Patches: ``"axis"``, ``"inner_wall"``, ``"bore"``, ``"glass_outer"``, ``"cap_outer"``,
``"cap_edge"``, ``"neck_outer"`` (the tube between the bulbs), ``"body_inner"``,
``"body_outer"``, ``"dip_tube_outer"``, ``"tube_end"``; materials ``"glass"``, ``"cap"``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fvsolver.errors import MeshError
from fvsolver.mesh.builders import check_count, check_length, check_ratio, polar_nodes
from fvsolver.mesh.core import AXIS_PATCH, Block, Mesh, from_blocks
from fvsolver.mesh.head import GLASS, _head_blocks, _layer, tube_block

__all__ = ["DeviceLayout", "device_layout", "whole_device"]


@dataclass(frozen=True)
class DeviceLayout:
    """Where the parts of the whole device sit (m, z up, the head's centre at z = 0).

    head_outer_radius, body_inner_radius, body_outer_radius, tube_inner_radius,
    tube_outer_radius; body_centre_z; tube_top_z (the bore's top, where it opens into
    the head, on the head's inner sphere at r = a); tube_end_z; body_bottom_z (outer
    bottom pole).
    """

    head_inner_radius: float
    head_outer_radius: float
    body_inner_radius: float
    body_outer_radius: float
    tube_inner_radius: float
    tube_outer_radius: float
    body_centre_z: float
    tube_top_z: float
    tube_end_z: float

    @property
    def body_bottom_z(self) -> float:
        return self.body_centre_z - self.body_outer_radius


def device_layout(bulb_inner_radius: float, glass_thickness: float, tube_inner_radius: float,
                  tube_outer_radius: float, tube_length: float, body_inner_radius: float,
                  body_glass_thickness: float, tube_end_gap: float) -> DeviceLayout:
    """The positions of :func:`whole_device`'s parts, with its dimensions checked."""
    ri = check_length("bulb_inner_radius", bulb_inner_radius)
    ro = ri + check_length("glass_thickness", glass_thickness)
    a = check_length("tube_inner_radius", tube_inner_radius)
    b = check_length("tube_outer_radius", tube_outer_radius)
    length = check_length("tube_length", tube_length)
    rbi = check_length("body_inner_radius", body_inner_radius)
    rbo = rbi + check_length("body_glass_thickness", body_glass_thickness)
    gap = check_length("tube_end_gap", tube_end_gap)
    if not a < b < min(ri, rbi):
        raise MeshError(
            f"tube_inner_radius, tube_outer_radius: got a = {a!r} m, b = {b!r} m with bulb inner radii "
            f"{ri!r} m (head) and {rbi!r} m (body), expected a < b < both; correct the radii")
    head_span = math.sqrt(ro * ro - a * a) - math.sqrt(ro * ro - b * b)
    body_span = math.sqrt(rbo * rbo - a * a) - math.sqrt(rbo * rbo - b * b)
    if not length > head_span + body_span:
        raise MeshError(
            f"tube_length: got {length!r} m, expected more than {head_span + body_span:.6e} m (the two "
            "bulbs' outer spheres span that height across the tube wall); lengthen the tube")
    zc = -math.sqrt(ro * ro - b * b) - length - math.sqrt(rbo * rbo - b * b)
    lowest = rbi - math.sqrt(rbi * rbi - b * b)  # the inner sphere's height across the tube's end
    highest = rbi + math.sqrt(rbi * rbi - b * b)  # where the dip tube enters the body
    if not lowest < gap < highest:
        raise MeshError(
            f"tube_end_gap: got {gap!r} m, expected between {lowest:.6e} and {highest:.6e} m (the tube's "
            "end must stand clear of the body's inner bottom and inside the body); change the gap")
    return DeviceLayout(ri, ro, rbi, rbo, a, b, zc, -math.sqrt(ri * ri - a * a), zc - rbi + gap)


def whole_device(
    bulb_inner_radius: float,
    glass_thickness: float,
    cap_thickness: float,
    cap_polar_range: tuple[float, float],
    tube_inner_radius: float,
    tube_outer_radius: float,
    tube_length: float,
    body_inner_radius: float,
    body_glass_thickness: float,
    tube_end_gap: float,
    n_glass: int = 4,
    n_cap: int = 4,
    n_polar: int = 48,
    n_tube: int = 16,
    n_body_polar: int = 32,
    n_dip: int = 12,
    *,
    glass_grading: float = 2.0,
    cap_grading: float = 2.0,
    tube_grading: float = 1.0,
) -> Mesh:
    """The head, the tube and the body bulb with its dip tube, meshed as one axisymmetric body.

    Parameters
    ----------
    bulb_inner_radius, glass_thickness, cap_thickness : float, m
        The head's glass and cap.
    cap_polar_range : (float, float), rad
        The cap's rims from the top pole.
    tube_inner_radius, tube_outer_radius : float, m
        The tube's bore a and outer radius b (a < b < both bulbs' inner radii).
    tube_length : float, m
        Between the bulbs' outer spheres along r = b.
    body_inner_radius, body_glass_thickness : float, m
        The body bulb's glass.
    tube_end_gap : float, m
        From the dip tube's end to the body's inner bottom pole.
    n_glass, n_cap, n_polar : int
        The head's cells through the glass, through the cap and along its meridian; the body
        gets ``n_glass`` cells through its glass too.
    n_tube, n_body_polar, n_dip : int
        Cells along the tube between the bulbs, along the body's meridian, along the dip tube.
    glass_grading, cap_grading, tube_grading : float
        Middle over end cell size through the layers; last over first cell size along the tubes.

    Returns
    -------
    Mesh
        Axisymmetric; see the module's docstring for its patches.
    """
    layout = device_layout(bulb_inner_radius, glass_thickness, tube_inner_radius, tube_outer_radius, tube_length,
                           body_inner_radius, body_glass_thickness, tube_end_gap)
    head = _head_blocks(bulb_inner_radius, glass_thickness, cap_thickness, cap_polar_range, tube_inner_radius,
                        tube_outer_radius, n_glass, n_cap, n_polar, None, glass_grading, cap_grading, 1.0)
    n_glass = check_count("n_glass", n_glass)
    n_tube, n_dip = check_count("n_tube", n_tube), check_count("n_dip", n_dip)
    n_body = check_count("n_body_polar", n_body_polar)
    tg = check_ratio("tube_grading", tube_grading)
    gg = check_ratio("glass_grading", glass_grading)
    b, zc, r_wall = layout.tube_outer_radius, layout.body_centre_z, head.r_wall

    radii = _layer(layout.body_inner_radius, layout.body_outer_radius - layout.body_inner_radius, n_glass, gg)
    # the body's shell from the tube (theta_start(R) = arcsin(b / R), its first node line the
    # segment r = b between the spheres) to the bottom pole
    s = np.linspace(0.0, 1.0, n_body + 1)
    start = np.arcsin(b / radii)
    theta = start[:, None] + (math.pi - start)[:, None] * s[None, :]
    nodes = polar_nodes(radii, theta)
    nodes[..., 1] += zc
    nodes[:, 0] = np.column_stack([np.full_like(radii, b), zc + np.sqrt(radii**2 - b * b)])
    nodes[:, -1, 0] = 0.0
    shell = Block(nodes, GLASS, {"i_min": "body_inner", "i_max": "body_outer", "j_max": AXIS_PATCH})

    # the collar round the bore, from the body's outer sphere (top) down to its inner sphere
    collar_z = zc + np.sqrt(radii[None, ::-1] ** 2 - r_wall[:, None] ** 2)
    collar = Block(np.stack([np.broadcast_to(r_wall[:, None], collar_z.shape), collar_z], axis=-1), GLASS,
                   {"i_min": "bore"})
    upper = tube_block(r_wall, head.collar_bottom, collar_z[:, 0].copy(), n_tube, tg,
                       {"i_min": "bore", "i_max": "neck_outer"})
    dip = tube_block(r_wall, collar_z[:, -1].copy(), np.full_like(r_wall, layout.tube_end_z), n_dip, tg,
                     {"i_min": "bore", "i_max": "dip_tube_outer", "j_max": "tube_end"})
    return from_blocks([head.shell, head.collar, head.cap, upper, collar, dip, shell], "axisymmetric")


def spherical_cap_volume(radius: float, height: float) -> float:
    """Volume of a sphere's cap of height ``height`` (m3): pi h^2 (3 R - h) / 3."""
    return math.pi * height * height * (3.0 * radius - height) / 3.0


def spherical_cap_centroid(radius: float, height: float) -> float:
    """Height of a sphere cap's centroid above its pole, m.

    For the cap 0 <= z' <= h of a sphere of radius R (z' from the bottom pole) the first moment is
    pi h^3 (8 R - 3 h) / 12, so z'_c = h (8 R - 3 h) / (4 (3 R - h)).
    """
    return height * (8.0 * radius - 3.0 * height) / (4.0 * (3.0 * radius - height))

