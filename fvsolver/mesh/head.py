"""Polar-block builders: spherical shells and the device's head (glass bulb, porous cap, neck).

All lengths in m, angles in rad.  Polar angles are measured from the top pole (+z)
towards +r; the centre of the sphere is the origin.  The patch and material names are
a contract with the solver:

* :func:`spherical_shell`: patches ``"axis"``, ``"inner"``, ``"outer"``; material
  ``material`` (``"solid"`` by default); also served as ``builders.spherical_shell``.
* :func:`two_layer_shell`: patches ``"axis"``, ``"inner_wall"``, ``"glass_outer"``,
  ``"cap_outer"``, ``"cap_edge"``; materials ``"glass"``, ``"cap"``.
* :func:`device_head`: the same plus ``"bore"``, ``"neck_outer"``, ``"neck_end"``.

Thin layers get several cells through their thickness (at least 4 by default), graded
towards both faces of each layer, where the solid-solid and solid-surroundings
exchanges happen.  Along the polar angle the cells may be concentrated at the cap's
rims (and at the neck joint) with ``rim_grading``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fvsolver.errors import MeshError
from fvsolver.mesh.builders import (
    check_count,
    check_length,
    check_material,
    check_radii,
    check_ratio,
    graded_points,
    polar_nodes,
)
from fvsolver.mesh.core import AXIS_PATCH, Block, Mesh, from_blocks

__all__ = ["spherical_shell", "two_layer_shell", "device_head", "neck_end_z"]

GLASS = "glass"
CAP = "cap"


def spherical_shell(
    inner_radius: float, outer_radius: float, n_radial: int, n_polar: int,
    radial_grading: float = 1.0, *, material: str = "solid",
) -> Mesh:
    """A spherical shell between two concentric spheres (axisymmetric, polar block).

    Nodes lie on spheres of graded radii at equal polar-angle steps from theta = 0
    (top pole, +z) to theta = pi (bottom pole).

    Parameters
    ----------
    inner_radius, outer_radius : float, m
        ``0 < inner_radius < outer_radius``.
    n_radial, n_polar : int
        Cells through the thickness and along the polar angle.
    radial_grading : float
        Last (outer) over first (inner) cell size through the thickness.
    material : str

    Returns
    -------
    Mesh
        Patches ``"axis"``, ``"inner"``, ``"outer"``.
    """
    ri, ro = check_radii(inner_radius, outer_radius)
    n_radial, n_polar = check_count("n_radial", n_radial), check_count("n_polar", n_polar)
    radii = graded_points(ri, ro, n_radial, check_ratio("radial_grading", radial_grading))
    theta = np.linspace(0.0, math.pi, n_polar + 1)
    patches = {"i_min": "inner", "i_max": "outer", "j_min": AXIS_PATCH, "j_max": AXIS_PATCH}
    block = Block(polar_nodes(radii, theta), check_material(material), patches)
    return from_blocks([block], "axisymmetric")


def _cap_range(cap_polar_range, upper: float, upper_name: str) -> tuple[float, float]:
    """Check ``(theta0, theta1)`` with 0 <= theta0 < theta1 < upper."""
    try:
        theta0, theta1 = (float(v) for v in cap_polar_range)
    except (TypeError, ValueError):
        raise MeshError(
            f"cap_polar_range: got {cap_polar_range!r}, expected a pair (theta0, theta1) of "
            "polar angles in rad from the top pole; pass e.g. (0.0, 1.5)"
        ) from None
    if not (math.isfinite(theta0) and math.isfinite(theta1) and 0.0 <= theta0 < theta1 < upper):
        raise MeshError(
            f"cap_polar_range: got ({theta0!r}, {theta1!r}) rad, expected "
            f"0 <= theta0 < theta1 < {upper:.6f} rad ({upper_name}); move the cap's rims"
        )
    return theta0, theta1


def _split(lengths: np.ndarray, n_total: int, name: str) -> np.ndarray:
    """Cells per segment, proportional to ``lengths`` (largest remainder), each >= 1."""
    k = len(lengths)
    if n_total < k:
        raise MeshError(
            f"{name}: got {n_total}, expected at least {k} cells (one per polar segment "
            "between the poles, the cap's rims and the neck); increase it"
        )
    share = (n_total - k) * lengths / lengths.sum()
    counts = 1 + np.floor(share).astype(int)
    order = np.argsort(-(share - np.floor(share)), kind="stable")
    counts[order[: n_total - counts.sum()]] += 1
    return counts


def _segment_grid(breaks: np.ndarray, counts: np.ndarray, fine: list, ratio: float) -> np.ndarray:
    """Concatenated graded points over consecutive segments.

    ``fine[k]`` says where segment k wants its small cells: ``"start"``, ``"end"`` or
    ``"both"``; ``ratio`` is the largest over the smallest cell size in a segment.
    """
    parts = [np.array([breaks[0]])]
    for k, n in enumerate(counts):
        a, b = breaks[k], breaks[k + 1]
        if fine[k] == "both":
            pts = graded_points(a, b, int(n), ratio, both_ends=True)
        else:
            pts = graded_points(a, b, int(n), ratio if fine[k] == "start" else 1.0 / ratio)
        parts.append(pts[1:])
    return np.concatenate(parts)


def _layer(inner: float, thickness: float, n: int, grading: float) -> np.ndarray:
    return inner + thickness * graded_points(0.0, 1.0, n, grading, both_ends=True)


def _outer_patches(n_faces: int, j0: int, j1: int) -> list:
    """Per-face patch names of the glass's outer sphere: joined (None) under the cap."""
    names = np.full(n_faces, "glass_outer", dtype=object)
    names[j0:j1] = None
    return names.tolist()


def _cap_block(radii: np.ndarray, theta: np.ndarray, theta0: float) -> Block:
    patches = {
        "i_max": "cap_outer",
        "j_min": AXIS_PATCH if theta0 == 0.0 else "cap_edge",
        "j_max": "cap_edge",
    }
    return Block(polar_nodes(radii, theta), CAP, patches)


def two_layer_shell(
    inner_radius: float,
    glass_thickness: float,
    cap_thickness: float,
    cap_polar_range: tuple[float, float],
    n_glass: int = 4,
    n_cap: int = 4,
    n_polar: int = 48,
    *,
    glass_grading: float = 2.0,
    cap_grading: float = 2.0,
    rim_grading: float = 1.0,
) -> Mesh:
    """A spherical glass shell with a porous cap outside it over a polar-angle range.

    Parameters
    ----------
    inner_radius : float, m
        Inner radius Ri of the glass.
    glass_thickness, cap_thickness : float, m
        The glass spans Ri..Ro = Ri + t_glass, the cap Ro..Ro + t_cap.
    cap_polar_range : (float, float), rad
        (theta0, theta1) from the top pole with 0 <= theta0 < theta1 < pi.
    n_glass, n_cap : int
        Cells through the glass and the cap.
    n_polar : int
        Cells along the polar angle from pole to pole, shared among the segments
        [0, theta0], [theta0, theta1], [theta1, pi] in proportion to their angles (at
        least one each); the nodes hit theta0 and theta1 exactly.
    glass_grading, cap_grading : float
        Middle over end cell size through each layer (> 1 refines both faces).
    rim_grading : float
        Largest over smallest polar cell size per segment, the small cells at the rims.

    Returns
    -------
    Mesh
        Axisymmetric; materials ``"glass"``, ``"cap"``; patches ``"axis"``,
        ``"inner_wall"``, ``"glass_outer"``, ``"cap_outer"``, ``"cap_edge"``.
    """
    ri = check_length("inner_radius", inner_radius)
    tg = check_length("glass_thickness", glass_thickness)
    tc = check_length("cap_thickness", cap_thickness)
    theta0, theta1 = _cap_range(cap_polar_range, math.pi, "the bottom pole")
    n_glass, n_cap = check_count("n_glass", n_glass), check_count("n_cap", n_cap)
    n_polar = check_count("n_polar", n_polar)
    gg, cg = check_ratio("glass_grading", glass_grading), check_ratio("cap_grading", cap_grading)
    rim = check_ratio("rim_grading", rim_grading)

    breaks = np.array([0.0, theta0, theta1, math.pi])
    fine = ["end", "both", "start"]
    if theta0 == 0.0:
        breaks, fine = breaks[1:], fine[1:]
    counts = _split(np.diff(breaks), n_polar, "n_polar")
    theta = _segment_grid(breaks, counts, fine, rim)
    j0 = 0 if theta0 == 0.0 else int(counts[0])
    j1 = j0 + int(counts[-2])
    ro = ri + tg
    glass = Block(
        polar_nodes(_layer(ri, tg, n_glass, gg), theta),
        GLASS,
        {
            "i_min": "inner_wall",
            "i_max": _outer_patches(n_polar, j0, j1),
            "j_min": AXIS_PATCH,
            "j_max": AXIS_PATCH,
        },
    )
    cap = _cap_block(_layer(ro, tc, n_cap, cg), theta[j0 : j1 + 1], theta0)
    return from_blocks([glass, cap], "axisymmetric")


def neck_end_z(
    bulb_inner_radius: float, glass_thickness: float, neck_outer_radius: float, neck_length: float
) -> float:
    """Axial position of the neck's end in :func:`device_head`, m.

    ``z_end = -sqrt(Ro^2 - b^2) - neck_length`` with Ro = bulb_inner_radius +
    glass_thickness and b = neck_outer_radius.
    """
    ro = bulb_inner_radius + glass_thickness
    return -math.sqrt(ro * ro - neck_outer_radius**2) - neck_length


def device_head(
    bulb_inner_radius: float,
    glass_thickness: float,
    cap_thickness: float,
    cap_polar_range: tuple[float, float],
    neck_inner_radius: float,
    neck_outer_radius: float,
    neck_length: float,
    n_glass: int = 4,
    n_cap: int = 4,
    n_polar: int = 48,
    n_neck: int = 16,
    n_neck_wall: int | None = None,
    *,
    glass_grading: float = 2.0,
    cap_grading: float = 2.0,
    rim_grading: float = 1.0,
    neck_grading: float = 3.0,
) -> Mesh:
    """The glass bulb with its porous cap and the glass neck tube at the bottom pole.

    With Ri the bulb's inner radius, Ro = Ri + t_glass, a and b the neck's inner and
    outer radii (a < b < Ri) and R(t) the radii of the glass's node spheres:

    * bulb shell (glass): nodes (R sin theta, R cos theta) with
      theta_j = theta_end(R) s_j and theta_end(R) = pi - arcsin(b / R), so the shell's
      last node line is the segment r = b between the spheres; the s grid is split so
      that on the outer sphere the nodes hit the cap's rims exactly;
    * collar (glass): r in [a, b], nodes (r_k, -sqrt(R^2 - r_k^2)), continuing the
      shell's sphere lines below r = b;
    * tube (glass): r in [a, b], z from -sqrt(Ro^2 - r^2) down to
      z_end = -sqrt(Ro^2 - b^2) - neck_length;
    * cap (cap): radii Ro..Ro + t_cap over the polar range, on the shell's outer nodes.

    Parameters
    ----------
    bulb_inner_radius, glass_thickness, cap_thickness : float, m
    cap_polar_range : (float, float), rad
        (theta0, theta1), 0 <= theta0 < theta1 < theta_end(Ro).
    neck_inner_radius, neck_outer_radius : float, m
        a < b < bulb_inner_radius.
    neck_length : float, m
        From the outer sphere at r = b to the neck's end; longer than
        sqrt(Ro^2 - a^2) - sqrt(Ro^2 - b^2) so the bore leaves the bulb.
    n_glass, n_cap : int
        Cells through the glass and the cap.
    n_polar : int
        Cells along the shell's polar direction (segments [0, theta0], [theta0, theta1],
        [theta1, theta_end], at least one cell each).
    n_neck : int
        Cells along the tube.
    n_neck_wall : int, optional
        Cells across the neck's wall r in [a, b] (default ``n_glass``).
    glass_grading, cap_grading : float
        Middle over end cell size through each layer.
    rim_grading : float
        Largest over smallest polar cell size per segment, small at the rims and joint.
    neck_grading : float
        Last (neck end) over first (bulb) cell size along the tube.

    Returns
    -------
    Mesh
        Axisymmetric; materials ``"glass"``, ``"cap"``; patches ``"axis"``,
        ``"inner_wall"``, ``"bore"``, ``"glass_outer"``, ``"cap_outer"``, ``"cap_edge"``,
        ``"neck_outer"``, ``"neck_end"``.
    """
    head = _head_blocks(bulb_inner_radius, glass_thickness, cap_thickness, cap_polar_range, neck_inner_radius,
                        neck_outer_radius, n_glass, n_cap, n_polar, n_neck_wall, glass_grading, cap_grading,
                        rim_grading)
    length = check_length("neck_length", neck_length)
    a, b, ro = head.neck_inner_radius, head.neck_outer_radius, head.outer_radius
    shortest = math.sqrt(ro * ro - a * a) - math.sqrt(ro * ro - b * b)
    if not length > shortest:
        raise MeshError(
            f"neck_length: got {length!r} m, expected more than {shortest:.6e} m (the bulb's "
            "outer sphere spans that height across the neck wall); lengthen the neck"
        )
    n_neck = check_count("n_neck", n_neck)
    ng = check_ratio("neck_grading", neck_grading)
    z_end = neck_end_z(head.inner_radius, ro - head.inner_radius, b, length)
    tube = tube_block(head.r_wall, head.collar_bottom, np.full_like(head.r_wall, z_end), n_neck, ng,
                      {"i_min": "bore", "i_max": "neck_outer", "j_max": "neck_end"})
    return from_blocks([head.shell, head.collar, tube, head.cap], "axisymmetric")


@dataclass(frozen=True)
class HeadBlocks:
    """The head's glass shell, its collar round the neck's bore, and the cap, with the
    dimensions a tube below needs (``collar_bottom``: z of the outer sphere at ``r_wall``)."""

    shell: Block
    collar: Block
    cap: Block
    inner_radius: float
    outer_radius: float
    neck_inner_radius: float
    neck_outer_radius: float
    r_wall: np.ndarray
    collar_bottom: np.ndarray


def tube_block(r_wall: np.ndarray, z_top: np.ndarray, z_bottom: np.ndarray, n_cells: int, grading: float,
               patches: dict) -> Block:
    """A straight glass tube wall between two node lines: ``r_wall`` (n_wall + 1,) across the
    wall, from ``z_top`` down to ``z_bottom`` (each (n_wall + 1,)) in ``n_cells`` graded cells
    (last over first cell size ``grading``)."""
    u = graded_points(0.0, 1.0, n_cells, grading)
    z = z_top[:, None] + (z_bottom - z_top)[:, None] * u[None, :]
    z[:, 0], z[:, -1] = z_top, z_bottom
    nodes = np.stack([np.broadcast_to(r_wall[:, None], z.shape), z], axis=-1)
    return Block(nodes, GLASS, patches)


def _head_blocks(bulb_inner_radius, glass_thickness, cap_thickness, cap_polar_range, neck_inner_radius,
                 neck_outer_radius, n_glass, n_cap, n_polar, n_neck_wall, glass_grading, cap_grading,
                 rim_grading) -> HeadBlocks:
    ri = check_length("bulb_inner_radius", bulb_inner_radius)
    tg = check_length("glass_thickness", glass_thickness)
    tc = check_length("cap_thickness", cap_thickness)
    a = check_length("neck_inner_radius", neck_inner_radius)
    b = check_length("neck_outer_radius", neck_outer_radius)
    if not a < b < ri:
        raise MeshError(
            f"neck_inner_radius, neck_outer_radius: got a = {a!r} m, b = {b!r} m with bulb "
            f"inner radius {ri!r} m, expected a < b < bulb_inner_radius; correct the radii"
        )
    ro = ri + tg
    end_outer = float(np.pi - np.arcsin(b / ro))
    theta0, theta1 = _cap_range(cap_polar_range, end_outer, "where the outer sphere meets the neck")
    n_glass, n_cap = check_count("n_glass", n_glass), check_count("n_cap", n_cap)
    n_polar = check_count("n_polar", n_polar)
    n_wall = n_glass if n_neck_wall is None else check_count("n_neck_wall", n_neck_wall)
    gg, cg = check_ratio("glass_grading", glass_grading), check_ratio("cap_grading", cap_grading)
    rim = check_ratio("rim_grading", rim_grading)

    # polar parameter s in [0, 1]; on the outer sphere theta = end_outer * s
    breaks = np.array([0.0, theta0, theta1, end_outer]) / end_outer
    fine = ["end", "both", "both"]
    if theta0 == 0.0:
        breaks, fine = breaks[1:], fine[1:]
    breaks[-1] = 1.0
    counts = _split(np.diff(breaks), n_polar, "n_polar")
    s = _segment_grid(breaks, counts, fine, rim)
    j0 = 0 if theta0 == 0.0 else int(counts[0])
    j1 = j0 + int(counts[-2])

    radii = _layer(ri, tg, n_glass, gg)  # (n_glass + 1,)
    theta = (math.pi - np.arcsin(b / radii))[:, None] * s[None, :]
    shell_nodes = polar_nodes(radii, theta)
    bottom = -np.sqrt(radii**2 - b * b)
    shell_nodes[:, -1] = np.column_stack([np.full_like(radii, b), bottom])
    shell = Block(
        shell_nodes,
        GLASS,
        {"i_min": "inner_wall", "i_max": _outer_patches(n_polar, j0, j1), "j_min": AXIS_PATCH},
    )

    r_wall = np.linspace(a, b, n_wall + 1)  # (n_wall + 1,)
    collar_z = -np.sqrt(radii[None, :] ** 2 - r_wall[:, None] ** 2)
    collar_nodes = np.stack([np.broadcast_to(r_wall[:, None], collar_z.shape), collar_z], axis=-1)
    collar = Block(collar_nodes, GLASS, {"i_min": "bore", "j_min": "inner_wall"})

    cap_theta = end_outer * s[j0 : j1 + 1]
    cap = _cap_block(_layer(ro, tc, n_cap, cg), cap_theta, theta0)
    return HeadBlocks(shell, collar, cap, ri, ro, a, b, r_wall, collar_z[:, -1].copy())
