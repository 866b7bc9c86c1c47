"""Parametric builders of simple structured meshes (lengths in m).

Every builder returns a validated :class:`fvsolver.mesh.core.Mesh` made with
:func:`fvsolver.mesh.core.from_blocks`; every cell gets the tag ``material``
(``"solid"`` by default).  Patch names are part of the contract with the solver:

* ``rectangle``, ``warped_rectangle``: left (``"axis"`` when it lies on r = 0), right,
  bottom, top;
* ``solid_cylinder``: axis, outer, bottom, top; ``hollow_cylinder``: inner, outer,
  bottom, top;
* ``solid_sphere``: axis, surface; ``spherical_shell``: axis, inner, outer.

``spherical_shell`` is implemented in :mod:`fvsolver.mesh.head` next to the device
builders (glass shell with a porous cap, bulb with neck) and served from here too.
"""
from __future__ import annotations

import math
from collections.abc import Callable
from numbers import Integral, Real

import numpy as np

from fvsolver.errors import MeshError
from fvsolver.mesh.core import AXIS_PATCH, COORDINATE_SYSTEMS, Block, Mesh, from_blocks

__all__ = [
    "graded_points", "polar_nodes", "rectangle", "warped_rectangle", "solid_cylinder",
    "hollow_cylinder", "solid_sphere", "spherical_shell",
]

#: Largest admissible warping amplitude: the mapping of :func:`warped_rectangle` has a
#: positive Jacobian everywhere when ``|amplitude| < 1 / (3 pi)``.
MAX_WARP_AMPLITUDE = 1.0 / (3.0 * math.pi)


# ----------------------------------------------------------------------------- checks
def _is_number(value) -> bool:
    return isinstance(value, Real) and not isinstance(value, bool) and math.isfinite(value)


def check_length(name: str, value) -> float:
    """Return ``value`` as a float after checking it is a finite length > 0 (m)."""
    if not _is_number(value) or value <= 0.0:
        raise MeshError(f"{name}: got {value!r}, expected a finite length > 0 m; pass it in metres")
    return float(value)


def check_count(name: str, value, minimum: int = 1) -> int:
    """Return ``value`` as an int after checking it is an integer cell count >= ``minimum``."""
    if not isinstance(value, Integral) or isinstance(value, bool) or value < minimum:
        raise MeshError(
            f"{name}: got {value!r}, expected an integer cell count >= {minimum}; "
            "pass a whole number"
        )
    return int(value)


def check_ratio(name: str, value) -> float:
    """Return a grading ratio as a float after checking it is finite and > 0."""
    if not _is_number(value) or value <= 0.0:
        raise MeshError(
            f"{name}: got {value!r}, expected a finite cell-size ratio > 0; "
            "pass 1 for uniform cells"
        )
    return float(value)


def check_material(value) -> str:
    """Return the material tag after checking it is a non-empty string."""
    if not isinstance(value, str) or not value:
        raise MeshError(f"material: got {value!r}, expected a non-empty name; pass e.g. 'solid'")
    return value


def check_system(value) -> str:
    """Return the coordinate system after checking it is known."""
    if value not in COORDINATE_SYSTEMS:
        raise MeshError(
            f"coordinate_system: got {value!r}, expected one of {COORDINATE_SYSTEMS}; pick one"
        )
    return value


def check_radii(inner: float, outer: float) -> tuple[float, float]:
    """Return (inner_radius, outer_radius) after checking 0 < inner < outer (m)."""
    ri, ro = check_length("inner_radius", inner), check_length("outer_radius", outer)
    if ri >= ro:
        raise MeshError(
            f"inner_radius: got {ri!r} m >= outer_radius {ro!r} m, expected inner < outer; "
            "swap or correct the radii"
        )
    return ri, ro


def _check_point(name: str, value) -> tuple[float, float]:
    try:
        x, y = (float(v) for v in value)
    except (TypeError, ValueError):
        x = y = math.nan
    if not (math.isfinite(x) and math.isfinite(y)):
        raise MeshError(
            f"{name}: got {value!r}, expected a pair of finite coordinates; pass (x, y) in m"
        )
    return x, y


# ----------------------------------------------------------------------------- grading
def graded_points(
    start: float, stop: float, n: int, ratio: float = 1.0, both_ends: bool = False
) -> np.ndarray:
    """Points of a geometrically graded 1D grid.

    Parameters
    ----------
    start, stop : float
        End points (any unit, usually m or a dimensionless parameter); ``start != stop``.
    n : int
        Number of cells (>= 1).
    ratio : float
        One-sided (``both_ends=False``): size of the last cell over the first.
        Two-sided (``both_ends=True``): size of the middle cell(s) over the end cells,
        so ``ratio > 1`` concentrates cells at both ends.  1 gives uniform cells.
    both_ends : bool
        Grade symmetrically towards both ends.

    Returns
    -------
    (n + 1,) float
        Monotone points with ``points[0] == start`` and ``points[-1] == stop`` exactly.
    """
    n = check_count("n", n)
    ratio = check_ratio("ratio", ratio)
    if not (_is_number(start) and _is_number(stop)) or start == stop:
        raise MeshError(
            f"start, stop: got {start!r}, {stop!r}, expected two different finite end "
            "points; check the geometry"
        )
    k = np.arange(n, dtype=float)
    steps, top = (np.minimum(k, n - 1 - k), (n - 1) // 2) if both_ends else (k, n - 1)
    sizes = ratio ** (steps / top) if top > 0 else np.ones(n)
    frac = np.concatenate([[0.0], np.cumsum(sizes)]) / sizes.sum()
    points = start + (stop - start) * frac
    points[0], points[-1] = start, stop
    return points


# ----------------------------------------------------------------------------- helpers
def _grid(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Tensor-product node array (len(x), len(y), 2)."""
    gx, gy = np.meshgrid(x, y, indexing="ij")
    return np.stack([gx, gy], axis=-1)


def polar_nodes(radii: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """Nodes on circles of radius ``radii`` at polar angles ``theta`` from the top pole.

    Parameters
    ----------
    radii : (ni + 1,) float, m
    theta : (ni + 1, nj + 1) or (nj + 1,) float, rad, measured from +z towards +r

    Returns
    -------
    (ni + 1, nj + 1, 2) float
        (r, z) = (R sin(theta), R cos(theta)); r is exactly 0 where theta is 0 or pi.
    """
    radii = np.asarray(radii, dtype=float)[:, None]
    theta = np.broadcast_to(np.asarray(theta, dtype=float), (radii.shape[0], np.shape(theta)[-1]))
    r = radii * np.sin(theta)
    r = np.where((theta == 0.0) | (theta == math.pi), 0.0, r)
    return np.stack([r, radii * np.cos(theta)], axis=-1)


def _rectangle(
    width: float, height: float, n_x: int, n_y: int, coordinate_system: str,
    origin: tuple[float, float], material: str, nodes_of: Callable[..., np.ndarray],
) -> Mesh:
    """Check the common rectangle arguments and mesh ``nodes_of(x0, y0, W, H, n_x, n_y)``."""
    width, height = check_length("width", width), check_length("height", height)
    n_x, n_y = check_count("n_x", n_x), check_count("n_y", n_y)
    coordinate_system = check_system(coordinate_system)
    x0, y0 = _check_point("origin", origin)
    left = "left"
    if coordinate_system == "axisymmetric":
        if x0 < 0.0:
            raise MeshError(
                f"origin: radius {x0!r} m < 0, expected r >= 0 in the axisymmetric "
                "half-plane; move the origin to r >= 0"
            )
        left = AXIS_PATCH if x0 == 0.0 else left
    patches = {"i_min": left, "i_max": "right", "j_min": "bottom", "j_max": "top"}
    nodes = nodes_of(x0, y0, width, height, n_x, n_y)
    return from_blocks([Block(nodes, check_material(material), patches)], coordinate_system)


# ----------------------------------------------------------------------------- builders
def rectangle(
    width: float, height: float, n_x: int, n_y: int, coordinate_system: str = "planar",
    origin: tuple[float, float] = (0.0, 0.0), *, x_grading: float = 1.0,
    y_grading: float = 1.0, material: str = "solid",
) -> Mesh:
    """A rectangle of ``n_x`` by ``n_y`` cells.

    Parameters
    ----------
    width, height : float, m
    n_x, n_y : int
        Cells along x (r) and y (z).
    coordinate_system : {"planar", "axisymmetric"}
    origin : (float, float), m
        Lower-left corner.  In the axisymmetric system ``origin[0] >= 0``; when it is 0
        the left side is the patch ``"axis"``.
    x_grading, y_grading : float
        Last over first cell size along each direction.
    material : str

    Returns
    -------
    Mesh
        Patches ``"left"`` (or ``"axis"``), ``"right"``, ``"bottom"``, ``"top"``.
    """
    gx, gy = check_ratio("x_grading", x_grading), check_ratio("y_grading", y_grading)

    def nodes_of(x0: float, y0: float, w: float, h: float, nx: int, ny: int) -> np.ndarray:
        return _grid(graded_points(x0, x0 + w, nx, gx), graded_points(y0, y0 + h, ny, gy))

    return _rectangle(width, height, n_x, n_y, coordinate_system, origin, material, nodes_of)


def warped_rectangle(
    width: float, height: float, n_x: int, n_y: int, amplitude: float,
    coordinate_system: str = "planar", origin: tuple[float, float] = (0.0, 0.0), *,
    material: str = "solid",
) -> Mesh:
    """A rectangle meshed with a smooth non-orthogonal mapping of a uniform grid.

    With logical coordinates (u, v) in [0, 1]^2 the nodes are

    .. math::
        x = x_0 + W\\,[u + a \\sin(\\pi u) \\sin(2\\pi v)], \\qquad
        y = y_0 + H\\,[v + a \\sin(2\\pi u) \\sin(\\pi v)]

    so the sides stay straight (nodes slide along them) and the left side stays on
    x = x_0 (the axis when x_0 = 0 in the axisymmetric system).

    Parameters
    ----------
    width, height : float, m
    n_x, n_y : int
    amplitude : float
        Dimensionless warping ``a`` (fraction of the side lengths);
        ``|a| < 1 / (3 pi) ~ 0.106`` keeps the mapping one-to-one.
    coordinate_system : {"planar", "axisymmetric"}
    origin : (float, float), m
    material : str

    Returns
    -------
    Mesh
        Patches ``"left"`` (or ``"axis"``), ``"right"``, ``"bottom"``, ``"top"``.
    """
    if not _is_number(amplitude) or not abs(amplitude) < MAX_WARP_AMPLITUDE:
        raise MeshError(
            f"amplitude: got {amplitude!r}, expected |amplitude| < {MAX_WARP_AMPLITUDE:.4f} "
            "(1 / (3 pi), where the mapping stops being one-to-one); use a smaller amplitude"
        )
    a = float(amplitude)

    def nodes_of(x0: float, y0: float, w: float, h: float, nx: int, ny: int) -> np.ndarray:
        u = np.linspace(0.0, 1.0, nx + 1)[:, None]
        v = np.linspace(0.0, 1.0, ny + 1)[None, :]
        x = x0 + w * (u + a * np.sin(np.pi * u) * np.sin(2.0 * np.pi * v))
        y = y0 + h * (v + a * np.sin(2.0 * np.pi * u) * np.sin(np.pi * v))
        x[0, :], x[-1, :] = x0, x0 + w  # exactly straight sides
        y[:, 0], y[:, -1] = y0, y0 + h
        return np.stack([x, y], axis=-1)

    return _rectangle(width, height, n_x, n_y, coordinate_system, origin, material, nodes_of)


def solid_cylinder(
    radius: float, height: float, n_r: int, n_z: int, *, z0: float = 0.0,
    radial_grading: float = 1.0, axial_grading: float = 1.0, material: str = "solid",
) -> Mesh:
    """A solid cylinder r in [0, radius], z in [z0, z0 + height] (axisymmetric).

    Parameters
    ----------
    radius, height : float, m
    n_r, n_z : int
    z0 : float, m
        Axial position of the bottom face.
    radial_grading, axial_grading : float
        Last over first cell size along r and z.
    material : str

    Returns
    -------
    Mesh
        Patches ``"axis"``, ``"outer"``, ``"bottom"``, ``"top"``.
    """
    radius = check_length("radius", radius)
    grading = (radial_grading, axial_grading)
    return _cylinder(0.0, radius, height, n_r, n_z, grading, z0, material, AXIS_PATCH)


def hollow_cylinder(
    inner_radius: float, outer_radius: float, height: float, n_r: int, n_z: int,
    radial_grading: float = 1.0, *, z0: float = 0.0, axial_grading: float = 1.0,
    material: str = "solid",
) -> Mesh:
    """A tube wall r in [inner_radius, outer_radius], z in [z0, z0 + height] (axisymmetric).

    Parameters
    ----------
    inner_radius, outer_radius, height : float, m
        ``0 < inner_radius < outer_radius``.
    n_r, n_z : int
    radial_grading : float
        Last (outer) over first (inner) cell size along r.
    z0 : float, m
    axial_grading : float
    material : str

    Returns
    -------
    Mesh
        Patches ``"inner"``, ``"outer"``, ``"bottom"``, ``"top"``.
    """
    ri, ro = check_radii(inner_radius, outer_radius)
    grading = (radial_grading, axial_grading)
    return _cylinder(ri, ro, height, n_r, n_z, grading, z0, material, "inner")


def _cylinder(
    r0: float, r1: float, height: float, n_r: int, n_z: int, grading: tuple[float, float],
    z0: float, material: str, inner_patch: str,
) -> Mesh:
    """One axisymmetric block r in [r0, r1], z in [z0, z0 + height]."""
    height = check_length("height", height)
    n_r, n_z = check_count("n_r", n_r), check_count("n_z", n_z)
    z0 = _check_point("z0", (z0, 0.0))[0]
    r = graded_points(r0, r1, n_r, check_ratio("radial_grading", grading[0]))
    z = graded_points(z0, z0 + height, n_z, check_ratio("axial_grading", grading[1]))
    patches = {"i_min": inner_patch, "i_max": "outer", "j_min": "bottom", "j_max": "top"}
    return from_blocks([Block(_grid(r, z), check_material(material), patches)], "axisymmetric")


def solid_sphere(
    radius: float, n: int, *, n_radial: int | None = None, core_fraction: float = 0.5,
    material: str = "solid",
) -> Mesh:
    """A solid sphere as an O-grid of the meridional half-disk (axisymmetric).

    A core block covers r in [0, c], z in [-c, c] (c = ``core_fraction * radius``) with
    ``n`` by ``2 n`` cells.  A C-shaped block wraps it: its inner side runs along the
    core's top, right and bottom sides (4 n faces), its outer side along the semicircle
    at equal polar-angle steps pi / (4 n); node k of the inner side is joined to node k
    of the semicircle by a straight ray divided into ``n_radial`` equal parts.  The
    core's corners map to the polar angles pi/4 and 3 pi/4, so no node is collapsed.

    Parameters
    ----------
    radius : float, m
    n : int
        Cells along the core's radial side (>= 1).
    n_radial : int, optional
        Cells along the rays of the C block (default ``n``).
    core_fraction : float
        c / radius, in (0, 1/sqrt(2)) so the core's corners stay inside the sphere.
    material : str

    Returns
    -------
    Mesh
        Patches ``"axis"``, ``"surface"``.
    """
    radius = check_length("radius", radius)
    n = check_count("n", n)
    n_radial = n if n_radial is None else check_count("n_radial", n_radial)
    if not (_is_number(core_fraction) and 0.0 < core_fraction < 1.0 / math.sqrt(2.0)):
        raise MeshError(
            f"core_fraction: got {core_fraction!r}, expected a number in (0, 0.7071) so the "
            "core's corners lie inside the sphere; use e.g. 0.5"
        )
    material = check_material(material)
    c = core_fraction * radius
    side_r = np.linspace(0.0, c, n + 1)
    side_z = np.linspace(c, -c, 2 * n + 1)
    core = Block(_grid(side_r, side_z[::-1]), material, {"i_min": AXIS_PATCH})
    # inner path of the C block: top (r up), right side (z down), bottom (r down)
    path = np.concatenate(
        [
            np.column_stack([side_r, np.full(n + 1, c)]),
            np.column_stack([np.full(2 * n - 1, c), side_z[1:-1]]),
            np.column_stack([side_r[::-1], np.full(n + 1, -c)]),
        ]
    )
    surface = polar_nodes(np.array([radius]), np.linspace(0.0, math.pi, 4 * n + 1))[0]
    t = np.linspace(0.0, 1.0, n_radial + 1)[:, None, None]
    nodes = path[None] + t * (surface - path)[None]
    shell = Block(nodes, material, {"i_max": "surface", "j_min": AXIS_PATCH, "j_max": AXIS_PATCH})
    return from_blocks([core, shell], "axisymmetric")


def __getattr__(name: str):
    """Serve ``spherical_shell``, which lives in :mod:`fvsolver.mesh.head` with the other
    polar-block builders (imported on first use, since that module imports this one)."""
    if name == "spherical_shell":
        from fvsolver.mesh.head import spherical_shell

        return spherical_shell
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
