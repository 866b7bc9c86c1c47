"""Exact conduction solutions: semi-infinite solid and steady radial/plane layers.

Solutions
---------
* Semi-infinite solid with surface convection (Carslaw & Jaeger; Incropera,
  *Fundamentals of Heat and Mass Transfer*, eq. 5.60), temperature and
  surface heat flux.
* Steady one-dimensional conduction without generation through one or more
  layers (plane wall, hollow cylinder, hollow sphere), each side held at a
  fixed surface temperature or exposed to a fluid through a convection
  coefficient. The heat rate follows from thermal resistances in series:
  plane ``L/k`` and ``1/h`` per unit area; cylinder ``ln(r2/r1)/(2 pi k)`` and
  ``1/(2 pi r h)`` per unit length; sphere ``(1/r1 - 1/r2)/(4 pi k)`` and
  ``1/(4 pi r^2 h)``. Inside each layer the profile is linear in x, in
  ``ln r`` (``T = a + b ln r``) or in ``1/r``; temperature and heat flux are
  continuous at interfaces (perfect contact).

The eigenfunction series for plane walls, cylinders and spheres are in
:mod:`fvsolver.verification.analytic_transient`.
"""
from __future__ import annotations

import math
from typing import NamedTuple, Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from fvsolver.errors import FvsolverError

FloatArray = NDArray[np.float64]


# --------------------------------------------------------------- validation
def _positive(name: str, value: object, *, allow_inf: bool = False) -> float:
    """Return ``value`` as a float > 0 or raise :class:`FvsolverError`."""
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        v = math.nan
    if not (v > 0.0) or (math.isinf(v) and not allow_inf):
        limit = "a positive number (inf allowed)" if allow_inf else "a finite positive number"
        raise FvsolverError(f"{name}: received {value!r}; expected {limit} in SI units; "
                            f"pass a value > 0")
    return v


def _finite(name: str, value: object) -> float:
    """Return ``value`` as a finite float or raise :class:`FvsolverError`."""
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        v = math.nan
    if not math.isfinite(v):
        raise FvsolverError(f"{name}: received {value!r}; expected a finite real number; "
                            f"pass a float")
    return v


def _array(name: str, value: ArrayLike, low: float, high: float,
           *, open_low: bool = False) -> FloatArray:
    """Return ``value`` as a float array inside [low, high] (or (low, high])."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise FvsolverError(f"{name}: received {value!r}; expected real numbers; "
                            f"pass a float or an array of floats") from None
    bad = ~np.isfinite(arr) | (arr > high) | ((arr <= low) if open_low else (arr < low))
    if np.any(bad):
        side = "(" if open_low else "["
        raise FvsolverError(f"{name}: received {arr[bad].ravel()[0]!r} (of {arr.size} values); "
                            f"expected finite values in {side}{low}, {high}]; "
                            f"restrict {name} to that range")
    return arr


def _terms(name: str, value: int | None) -> int | None:
    """Validate an optional explicit number of series terms."""
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
        raise FvsolverError(f"{name}: received {value!r}; expected None or an integer >= 1; "
                            f"pass None to choose the terms automatically")
    return int(value)


# ------------------------------------------------------------ semi-infinite
def semi_infinite_convection(x: ArrayLike, t: ArrayLike, alpha: float, k: float, h: float,
                             T_i: float, T_inf: float) -> FloatArray:
    """Temperature in a semi-infinite solid cooled or heated by convection at x = 0.

    ``(T - T_i)/(T_inf - T_i) = erfc(eta) - exp(h x/k + h**2 alpha t/k**2)
    erfc(eta + h sqrt(alpha t)/k)`` with ``eta = x / (2 sqrt(alpha t))``
    (Incropera eq. 5.60). The second term is evaluated as
    ``exp(-eta**2) erfcx(eta + h sqrt(alpha t)/k)``, identical in exact
    arithmetic and free of overflow for any h or t.

    Parameters
    ----------
    x : array_like
        Depth below the surface, m, >= 0. Broadcast against `t`.
    t : array_like
        Time since the surface was exposed, s, > 0.
    alpha : float
        Thermal diffusivity, m^2/s.
    k : float
        Thermal conductivity, W/(m K).
    h : float
        Heat transfer coefficient, W/(m^2 K); ``inf`` gives a fixed surface
        temperature T_inf.
    T_i, T_inf : float
        Initial and fluid temperatures, K.

    Returns
    -------
    numpy.ndarray
        Temperature, K, of the broadcast shape of `x` and `t`.
    """
    xa = _array("x", x, 0.0, math.inf)
    ta = _array("t", t, 0.0, math.inf, open_low=True)
    alpha, k = _positive("alpha", alpha), _positive("k", k)
    h = _positive("h", h, allow_inf=True)
    T_i, T_inf = _finite("T_i", T_i), _finite("T_inf", T_inf)
    root = np.sqrt(alpha * ta)
    eta = xa / (2.0 * root)
    beta = h * root / k
    theta = special.erfc(eta) - np.exp(-eta * eta) * special.erfcx(eta + beta)
    return T_i + (T_inf - T_i) * theta


def semi_infinite_surface_flux(t: ArrayLike, alpha: float, k: float, h: float,
                               T_i: float, T_inf: float) -> FloatArray:
    """Heat flux into a semi-infinite solid through its convective surface.

    ``q''_s = h (T_inf - T_s) = h (T_inf - T_i) erfcx(h sqrt(alpha t)/k)``,
    which tends to ``k (T_inf - T_i) / sqrt(pi alpha t)`` as h -> inf.

    Parameters
    ----------
    t : array_like
        Time, s, > 0.
    alpha, k, h, T_i, T_inf : float
        As in :func:`semi_infinite_convection`.

    Returns
    -------
    numpy.ndarray
        Flux in the +x direction (into the solid), W/m^2, shape of `t`.
    """
    ta = _array("t", t, 0.0, math.inf, open_low=True)
    alpha, k = _positive("alpha", alpha), _positive("k", k)
    h = _positive("h", h, allow_inf=True)
    dT = _finite("T_inf", T_inf) - _finite("T_i", T_i)
    root = np.sqrt(alpha * ta)
    if math.isinf(h):
        return k * dT / (math.sqrt(math.pi) * root)
    return h * dT * special.erfcx(h * root / k)


# ------------------------------------------------------------------- steady
class SteadySolution(NamedTuple):
    """Steady one-dimensional conduction through layers in series.

    Attributes
    ----------
    temperature : numpy.ndarray
        Temperature at the requested positions, K, their shape.
    heat_rate : float
        Heat flowing from the inner (left) side to the outer (right) side:
        W/m^2 for a plane wall, W/m for a cylinder, W for a sphere.
    surface_temperatures : tuple of float
        Temperatures of the inner (left) and outer (right) surfaces, K.
    interface_temperatures : numpy.ndarray
        Temperatures at the layer interfaces, K, shape (n_layers - 1,).
    """

    temperature: FloatArray
    heat_rate: float
    surface_temperatures: tuple[float, float]
    interface_temperatures: FloatArray


def _conduction_resistance(kind: str, a: FloatArray, b: FloatArray,
                           k: FloatArray) -> FloatArray:
    """Resistance of a layer from a to b (K m^2/W, K m/W or K/W)."""
    if kind == "plane":
        return (b - a) / k
    if kind == "cylinder":
        return np.log(b / a) / (2.0 * math.pi * k)
    return (1.0 / a - 1.0 / b) / (4.0 * math.pi * k)


def _film_resistance(kind: str, r: float, h: float | None) -> float:
    """Convection resistance at a surface of position r; 0 for a fixed temperature."""
    if h is None:
        return 0.0
    area = {"plane": 1.0, "cylinder": 2.0 * math.pi * r, "sphere": 4.0 * math.pi * r * r}[kind]
    return 1.0 / (h * area)


def _layered(kind: str, position: ArrayLike, pos_name: str, bounds: Sequence[float],
             bounds_name: str, conductivities: Sequence[float] | float, T_in: float,
             T_out: float, h_in: float | None, h_out: float | None) -> SteadySolution:
    """Series-resistance solution shared by every steady geometry."""
    try:
        edges = np.asarray(bounds, dtype=float).ravel()
        ks = np.asarray(conductivities, dtype=float).ravel()
    except (TypeError, ValueError):
        raise FvsolverError(f"{bounds_name}/conductivities: received {bounds!r}, "
                            f"{conductivities!r}; expected sequences of numbers; "
                            f"pass floats in m and W/(m K)") from None
    low = 0.0 if kind == "plane" else 1e-300
    if (edges.size < 2 or not np.all(np.isfinite(edges)) or np.any(np.diff(edges) <= 0)
            or edges[0] < low):
        raise FvsolverError(f"{bounds_name}: received {bounds!r}; expected at least two "
                            f"finite, strictly increasing positions (radii > 0); "
                            f"list the layer boundaries from the inside out")
    if ks.size != edges.size - 1:
        raise FvsolverError(f"conductivities: received {ks.size} values; expected "
                            f"{edges.size - 1} (one per layer); give one k per layer")
    for j, kj in enumerate(ks):
        _positive(f"conductivities[{j}]", kj)
    T_in, T_out = _finite("T_in", T_in), _finite("T_out", T_out)
    hi = None if h_in is None else _positive("h_in", h_in)
    ho = None if h_out is None else _positive("h_out", h_out)
    pos = _array(pos_name, position, edges[0], edges[-1])
    r_layers = _conduction_resistance(kind, edges[:-1], edges[1:], ks)
    r_in, r_out = _film_resistance(kind, edges[0], hi), _film_resistance(kind, edges[-1], ho)
    q = (T_in - T_out) / (r_in + r_layers.sum() + r_out)
    faces = (T_in - q * r_in) - q * np.concatenate(([0.0], np.cumsum(r_layers)))
    j = np.clip(np.searchsorted(edges, pos, side="right") - 1, 0, ks.size - 1)
    temperature = faces[j] - q * _conduction_resistance(kind, edges[j], pos, ks[j])
    return SteadySolution(temperature, float(q), (float(faces[0]), float(faces[-1])),
                          faces[1:-1].copy())


_STEADY_DOC = """
    T_in, T_out : float
        Inner (left) and outer (right) temperatures, K: the surface
        temperature where the matching coefficient is None, else the fluid
        temperature.
    h_in, h_out : float or None
        Convection coefficients, W/(m^2 K), or None for a fixed surface
        temperature.

    Returns
    -------
    SteadySolution
        Profile (shape of the positions), heat rate, surface and interface
        temperatures.
"""


def hollow_cylinder_temperature(r: ArrayLike, r_in: float, r_out: float, k: float,
                                T_in: float, T_out: float, h_in: float | None = None,
                                h_out: float | None = None) -> SteadySolution:
    """Steady hollow cylinder, ``T = a + b ln r``; heat rate per unit length, W/m.

    With fixed surfaces ``q' = 2 pi k (T_in - T_out) / ln(r_out/r_in)``; with
    outer convection ``q' = (T_in - T_out) / (ln(r_out/r_in)/(2 pi k)
    + 1/(2 pi r_out h_out))``.

    Parameters
    ----------
    r : array_like
        Radii, m, in [r_in, r_out].
    r_in, r_out : float
        Inner and outer radii, m, 0 < r_in < r_out.
    k : float
        Thermal conductivity, W/(m K).
    """
    return _layered("cylinder", r, "r", (r_in, r_out), "r_in/r_out", k, T_in, T_out,
                    h_in, h_out)


def hollow_sphere_temperature(r: ArrayLike, r_in: float, r_out: float, k: float,
                              T_in: float, T_out: float, h_in: float | None = None,
                              h_out: float | None = None) -> SteadySolution:
    """Steady hollow sphere, ``T = a + b / r``; heat rate in W.

    ``q = (T_in - T_out) / (1/(h_in 4 pi r_in^2) + (1/r_in - 1/r_out)/(4 pi k)
    + 1/(h_out 4 pi r_out^2))``, a film term dropping out when its h is None.

    Parameters
    ----------
    r : array_like
        Radii, m, in [r_in, r_out].
    r_in, r_out : float
        Inner and outer radii, m, 0 < r_in < r_out.
    k : float
        Thermal conductivity, W/(m K).
    """
    return _layered("sphere", r, "r", (r_in, r_out), "r_in/r_out", k, T_in, T_out,
                    h_in, h_out)


def composite_plane_wall_temperature(x: ArrayLike, thicknesses: Sequence[float],
                                     conductivities: Sequence[float], T_in: float,
                                     T_out: float, h_in: float | None = None,
                                     h_out: float | None = None) -> SteadySolution:
    """Steady plane wall of layers in perfect contact; heat flux in W/m^2.

    Parameters
    ----------
    x : array_like
        Distance from the left face, m, in [0, sum(thicknesses)].
    thicknesses : sequence of float
        Layer thicknesses from left to right, m, each > 0.
    conductivities : sequence of float
        Layer conductivities, W/(m K), one per layer.
    """
    try:
        widths = np.asarray(thicknesses, dtype=float).ravel()
    except (TypeError, ValueError):
        widths = np.array([math.nan])
    if widths.size == 0 or not np.all(np.isfinite(widths)) or np.any(widths <= 0):
        raise FvsolverError(f"thicknesses: received {thicknesses!r}; expected one or more "
                            f"finite values > 0, m; give each layer's thickness")
    edges = np.concatenate(([0.0], np.cumsum(widths)))
    return _layered("plane", x, "x", edges, "thicknesses", conductivities, T_in, T_out,
                    h_in, h_out)


def composite_cylinder_temperature(r: ArrayLike, radii: Sequence[float],
                                   conductivities: Sequence[float], T_in: float,
                                   T_out: float, h_in: float | None = None,
                                   h_out: float | None = None) -> SteadySolution:
    """Steady cylindrical shell of layers in perfect contact; heat rate in W/m.

    Parameters
    ----------
    r : array_like
        Radii, m, in [radii[0], radii[-1]].
    radii : sequence of float
        Layer boundaries from the inside out, m, e.g. (r1, r2, r3) for two layers.
    conductivities : sequence of float
        Layer conductivities, W/(m K), one per layer.
    """
    return _layered("cylinder", r, "r", radii, "radii", conductivities, T_in, T_out,
                    h_in, h_out)


def composite_sphere_temperature(r: ArrayLike, radii: Sequence[float],
                                 conductivities: Sequence[float], T_in: float,
                                 T_out: float, h_in: float | None = None,
                                 h_out: float | None = None) -> SteadySolution:
    """Steady spherical shell of layers in perfect contact; heat rate in W.

    Parameters
    ----------
    r : array_like
        Radii, m, in [radii[0], radii[-1]].
    radii : sequence of float
        Layer boundaries from the inside out, m, e.g. (r1, r2, r3) for two layers.
    conductivities : sequence of float
        Layer conductivities, W/(m K), one per layer.
    """
    return _layered("sphere", r, "r", radii, "radii", conductivities, T_in, T_out,
                    h_in, h_out)


for _f in (hollow_cylinder_temperature, hollow_sphere_temperature,
           composite_plane_wall_temperature, composite_cylinder_temperature,
           composite_sphere_temperature):
    _f.__doc__ = (_f.__doc__ or "").rstrip() + _STEADY_DOC
del _f
