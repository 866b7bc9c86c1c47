"""Exact transient conduction solutions (constant properties, no generation).

Solutions
---------
* Plane wall, infinite cylinder and sphere with convection at the surface and
  a uniform initial temperature: exact eigenfunction series (Incropera,
  *Fundamentals of Heat and Mass Transfer*, eqs. 5.39, 5.49, 5.50) and the
  fractional energy loss Q/Q0 (eqs. 5.46, 5.54, 5.55 in exact-series form).
* Finite cylinder as the product of the plane-wall and cylinder solutions
  (Incropera sec. 5.8).

Truncation
----------
For n >= 2 every eigenvalue satisfies zeta_n >= (n - 1) pi and every term of
the temperature and energy series is bounded by ``4 exp(-zeta_n**2 Fo)``
(plane wall <= 4/(2 pi - 1) < 0.8; sphere <= 4(1 + pi)/(2 pi - 1) < 3.2;
cylinder < 1.6, from x (J0^2 + J1^2) >= 0.54 for x >= pi, found numerically;
the bound 4 is checked in the tests). Since
``exp(-z**2 Fo)`` decreases in z, the tail after N terms is at most
``4 [exp(-a**2 Fo) + erfc(a sqrt(Fo)) / (2 sqrt(pi Fo))]`` with ``a = N pi``
(a sum bounded by its first term plus an integral). :func:`required_series_terms`
returns the smallest N making that bound <= 1e-13, below the 1e-12 target on
the dimensionless temperature ``(T - T_inf)/(T_i - T_inf)``; the temperature
error is that times ``|T_i - T_inf|``. Small Fo needs more terms (about
``sqrt(30 / Fo) / pi``); past :data:`MAX_AUTO_TERMS` an error is raised.
"""
from __future__ import annotations

import math
from typing import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import optimize, special

from fvsolver.errors import FvsolverError
from fvsolver.verification.analytic import _array, _finite, _positive, _terms

FloatArray = NDArray[np.float64]

#: Target bound on the truncation error of the dimensionless series.
TRUNCATION_TOLERANCE: float = 1.0e-12
#: Largest number of terms chosen automatically (reached near Fo ~ 1.2e-7).
MAX_AUTO_TERMS: int = 5000
_TERM_BOUND = 4.0
_SAFETY = 0.1
_GEOMETRIES = ("plane_wall", "cylinder", "sphere")


# -------------------------------------------------------------- eigenvalues
def _sphere_num(z: FloatArray) -> FloatArray:
    """``sin z - z cos z`` without cancellation at small z."""
    out = np.sin(z) - z * np.cos(z)
    small = np.abs(z) < 0.5
    if np.any(small):
        zs, acc = z[small], np.zeros(np.count_nonzero(small))
        for j in range(1, 12):
            acc += (-1.0) ** (j + 1) * 2 * j * zs ** (2 * j + 1) / math.factorial(2 * j + 1)
        out[small] = acc
    return out


def _sphere_den(z: FloatArray) -> FloatArray:
    """``2 z - sin 2z`` without cancellation at small z."""
    out = 2.0 * z - np.sin(2.0 * z)
    small = np.abs(z) < 0.5
    if np.any(small):
        w, acc = 2.0 * z[small], np.zeros(np.count_nonzero(small))
        for j in range(1, 12):
            acc += (-1.0) ** (j + 1) * w ** (2 * j + 1) / math.factorial(2 * j + 1)
        out[small] = acc
    return out


def _residual(geometry: str) -> Callable[[float, float], float]:
    """Eigen-condition written without poles, as f(zeta, Bi) = 0."""
    if geometry == "plane_wall":
        return lambda z, bi: z * math.sin(z) - bi * math.cos(z)
    if geometry == "cylinder":
        return lambda z, bi: z * special.j1(z) - bi * special.j0(z)
    return lambda z, bi: (1.0 - bi) * float(np.sinc(z / math.pi)) - math.cos(z)


def _brackets(geometry: str, first: int, last: int) -> tuple[FloatArray, FloatArray]:
    """Intervals holding exactly one root each, for roots first..last (1-based)."""
    m = np.arange(first, last + 1, dtype=float)
    if geometry == "plane_wall":       # zeta_n in ((n-1) pi, (n-1/2) pi)
        return (m - 1.0) * math.pi, (m - 0.5) * math.pi
    if geometry == "sphere":           # zeta_n in ((n-1) pi, n pi)
        return (m - 1.0) * math.pi, m * math.pi
    j0 = special.jn_zeros(0, last)     # zeta_n in (j_{1,n-1}, j_{0,n}), j_{1,0} = 0
    j1 = np.concatenate(([0.0], special.jn_zeros(1, last - 1))) if last > 1 else np.zeros(1)
    return j1[first - 1:last], j0[first - 1:last]


_ROOT_CACHE: dict[tuple[str, float], FloatArray] = {}


def _eigenvalues(geometry: str, Bi: float, n: int) -> FloatArray:
    """First `n` positive eigenvalues, cached per (geometry, Bi)."""
    bi = _positive("Bi", Bi)
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise FvsolverError(f"n: received {n!r}; expected an integer >= 1; pass the number "
                            f"of eigenvalues wanted")
    have = _ROOT_CACHE.get((geometry, bi), np.empty(0))
    if have.size < n:
        lo, hi = _brackets(geometry, have.size + 1, int(n))
        f = _residual(geometry)
        new = [optimize.brentq(f, a, b, args=(bi,), xtol=1e-14, rtol=4 * np.finfo(float).eps,
                               maxiter=200) for a, b in zip(lo, hi)]
        have = np.concatenate((have, np.asarray(new, dtype=float)))
        if len(_ROOT_CACHE) > 256:
            _ROOT_CACHE.clear()
        _ROOT_CACHE[(geometry, bi)] = have
    return have[:n].copy()


def plane_wall_eigenvalues(Bi: float, n: int) -> FloatArray:
    """First `n` roots of ``zeta tan zeta = Bi`` (Incropera eq. 5.39c), Bi = h L / k.

    Each root is found by Brent's method on ``zeta sin zeta - Bi cos zeta``
    in its own interval ((n-1) pi, (n-1/2) pi). Returns shape (n,), ascending.
    """
    return _eigenvalues("plane_wall", Bi, n)


def cylinder_eigenvalues(Bi: float, n: int) -> FloatArray:
    """First `n` roots of ``zeta J1(zeta)/J0(zeta) = Bi`` (eq. 5.49c), Bi = h r0 / k.

    Each root is bracketed by consecutive Bessel zeros (j_{1,n-1}, j_{0,n}).
    Returns shape (n,), ascending.
    """
    return _eigenvalues("cylinder", Bi, n)


def sphere_eigenvalues(Bi: float, n: int) -> FloatArray:
    """First `n` roots of ``1 - zeta cot zeta = Bi`` (eq. 5.50c), Bi = h r0 / k.

    Solved as ``(1 - Bi) sin(zeta)/zeta - cos zeta = 0`` in ((n-1) pi, n pi).
    Returns shape (n,), ascending.
    """
    return _eigenvalues("sphere", Bi, n)


def series_coefficients(geometry: str, Bi: float, n: int) -> tuple[FloatArray, FloatArray]:
    """Eigenvalues zeta_n and coefficients C_n of the series for a uniform initial state.

    Parameters
    ----------
    geometry : {"plane_wall", "cylinder", "sphere"}
    Bi : float
        Biot number h L / k (plane wall) or h r0 / k, > 0.
    n : int
        Number of terms.

    Returns
    -------
    zeta, C : numpy.ndarray
        Each of shape (n,), dimensionless (Incropera eqs. 5.39b, 5.49b, 5.50b).
    """
    if geometry not in _GEOMETRIES:
        raise FvsolverError(f"geometry: received {geometry!r}; expected one of {_GEOMETRIES}; "
                            f"pick one of those names")
    z = _eigenvalues(geometry, Bi, n)
    if geometry == "plane_wall":
        c = 4.0 * np.sin(z) / (2.0 * z + np.sin(2.0 * z))
    elif geometry == "cylinder":
        j0, j1 = special.j0(z), special.j1(z)
        c = 2.0 / z * j1 / (j0 * j0 + j1 * j1)
    else:
        c = 4.0 * _sphere_num(z) / _sphere_den(z)
    return z, c


def _shape(geometry: str, arg: FloatArray) -> FloatArray:
    """Spatial eigenfunction X(zeta r*) with X(0) = 1."""
    if geometry == "plane_wall":
        return np.cos(arg)
    if geometry == "cylinder":
        return special.j0(arg)
    return np.sinc(arg / math.pi)


def _energy_weight(geometry: str, z: FloatArray) -> FloatArray:
    """Volume average of X(zeta r*) over the body."""
    if geometry == "plane_wall":
        return np.sin(z) / z
    if geometry == "cylinder":
        return 2.0 * special.j1(z) / z
    return 3.0 * _sphere_num(z) / z**3


def required_series_terms(fo: float, tolerance: float = TRUNCATION_TOLERANCE) -> int:
    """Smallest number of terms whose proven tail bound is below ``0.1 * tolerance``.

    Parameters
    ----------
    fo : float
        Smallest Fourier number alpha t / L^2 to be evaluated, > 0.
    tolerance : float
        Bound on the truncation error of the dimensionless series.

    Returns
    -------
    int
        Number of terms N (see the module notes for the bound used).
    """
    fo, tolerance = _positive("fo", fo), _positive("tolerance", tolerance)
    a = np.arange(1, MAX_AUTO_TERMS + 1) * math.pi
    tail = _TERM_BOUND * (np.exp(-a * a * fo)
                          + special.erfc(a * math.sqrt(fo)) / (2.0 * math.sqrt(math.pi * fo)))
    ok = np.flatnonzero(tail <= _SAFETY * tolerance)
    if ok.size == 0:
        raise FvsolverError(f"t: gives Fo = {fo!r}; expected Fo large enough for "
                            f"{MAX_AUTO_TERMS} series terms (about 1.2e-7 or more); use "
                            f"semi_infinite_convection for such short times or pass n_terms")
    return int(ok[0] + 1)


def _theta_series(geometry: str, pos: FloatArray, fo: FloatArray, bi: float,
                  n_terms: int | None) -> FloatArray:
    """Dimensionless temperature (T - T_inf)/(T_i - T_inf); pos, fo broadcast."""
    n = n_terms if n_terms is not None else required_series_terms(float(np.min(fo)))
    z, c = series_coefficients(geometry, bi, n)
    pos, fo = np.broadcast_arrays(pos, fo)
    terms = c * np.exp(-fo[..., None] * z * z) * _shape(geometry, pos[..., None] * z)
    return terms.sum(axis=-1)


def _transient(geometry: str, pos: ArrayLike, pos_name: str, t: ArrayLike, size: float,
               size_name: str, alpha: float, k: float, h: float, T_i: float, T_inf: float,
               n_terms: int | None) -> FloatArray:
    """Shared validation and scaling for the three one-dimensional series."""
    size = _positive(size_name, size)
    alpha, k, h = _positive("alpha", alpha), _positive("k", k), _positive("h", h)
    T_i, T_inf = _finite("T_i", T_i), _finite("T_inf", T_inf)
    low = -size if geometry == "plane_wall" else 0.0
    p = _array(pos_name, pos, low, size)
    ta = _array("t", t, 0.0, math.inf, open_low=True)
    theta = _theta_series(geometry, p / size, alpha * ta / size**2, h * size / k,
                          _terms("n_terms", n_terms))
    return T_inf + (T_i - T_inf) * theta


def plane_wall_temperature(x: ArrayLike, t: ArrayLike, L: float, alpha: float, k: float,
                           h: float, T_i: float, T_inf: float,
                           n_terms: int | None = None) -> FloatArray:
    """Plane wall -L <= x <= L, convection on both faces, uniform start (eq. 5.39).

    Parameters
    ----------
    x : array_like
        Distance from the mid-plane, m, in [-L, L]; broadcast against `t`.
    t : array_like
        Time, s, > 0.
    L : float
        Half-thickness, m.
    alpha, k, h : float
        Diffusivity m^2/s, conductivity W/(m K), coefficient W/(m^2 K).
    T_i, T_inf : float
        Initial and fluid temperatures, K.
    n_terms : int or None
        Series terms; None keeps the truncation error below 1e-12 (module notes).

    Returns
    -------
    numpy.ndarray
        Temperature, K, of the broadcast shape of `x` and `t`.
    """
    return _transient("plane_wall", x, "x", t, L, "L", alpha, k, h, T_i, T_inf, n_terms)


def cylinder_temperature(r: ArrayLike, t: ArrayLike, r0: float, alpha: float, k: float,
                         h: float, T_i: float, T_inf: float,
                         n_terms: int | None = None) -> FloatArray:
    """Infinite cylinder 0 <= r <= r0, convection at r0, uniform start (eq. 5.49).

    Parameters
    ----------
    r : array_like
        Radius, m, in [0, r0]; broadcast against `t`.
    t : array_like
        Time, s, > 0.
    r0 : float
        Outer radius, m.
    alpha, k, h, T_i, T_inf, n_terms
        As in :func:`plane_wall_temperature`.

    Returns
    -------
    numpy.ndarray
        Temperature, K, of the broadcast shape of `r` and `t`.
    """
    return _transient("cylinder", r, "r", t, r0, "r0", alpha, k, h, T_i, T_inf, n_terms)


def sphere_temperature(r: ArrayLike, t: ArrayLike, r0: float, alpha: float, k: float,
                       h: float, T_i: float, T_inf: float,
                       n_terms: int | None = None) -> FloatArray:
    """Sphere 0 <= r <= r0, convection at r0, uniform start (eq. 5.50).

    The centre uses the limit sin(zeta r*)/(zeta r*) -> 1.

    Parameters
    ----------
    r : array_like
        Radius, m, in [0, r0]; broadcast against `t`.
    t : array_like
        Time, s, > 0.
    r0 : float
        Outer radius, m.
    alpha, k, h, T_i, T_inf, n_terms
        As in :func:`plane_wall_temperature`.

    Returns
    -------
    numpy.ndarray
        Temperature, K, of the broadcast shape of `r` and `t`.
    """
    return _transient("sphere", r, "r", t, r0, "r0", alpha, k, h, T_i, T_inf, n_terms)


def _energy(geometry: str, t: ArrayLike, size: float, size_name: str, alpha: float, k: float,
            h: float, n_terms: int | None) -> FloatArray:
    """Q/Q0 = 1 - sum C_n w_n exp(-zeta_n^2 Fo), w_n the volume mean of X_n."""
    size = _positive(size_name, size)
    alpha, k, h = _positive("alpha", alpha), _positive("k", k), _positive("h", h)
    ta = _array("t", t, 0.0, math.inf, open_low=True)
    fo = alpha * ta / size**2
    n = _terms("n_terms", n_terms) or required_series_terms(float(np.min(fo)))
    z, c = series_coefficients(geometry, h * size / k, n)
    return 1.0 - (c * _energy_weight(geometry, z) * np.exp(-fo[..., None] * z * z)).sum(-1)


def plane_wall_energy_fraction(t: ArrayLike, L: float, alpha: float, k: float, h: float,
                               n_terms: int | None = None) -> FloatArray:
    """Fraction Q/Q0 of the energy lost by the plane wall (eq. 5.46, every term).

    Q0 = rho c V (T_i - T_inf) is the largest possible energy transfer.

    Parameters
    ----------
    t : array_like
        Time, s, > 0.
    L : float
        Half-thickness, m.
    alpha, k, h : float
        Diffusivity m^2/s, conductivity W/(m K), coefficient W/(m^2 K).
    n_terms : int or None
        Series terms; None chooses them automatically.

    Returns
    -------
    numpy.ndarray
        Q/Q0, dimensionless, shape of `t`.
    """
    return _energy("plane_wall", t, L, "L", alpha, k, h, n_terms)


def cylinder_energy_fraction(t: ArrayLike, r0: float, alpha: float, k: float, h: float,
                             n_terms: int | None = None) -> FloatArray:
    """Fraction Q/Q0 lost by the infinite cylinder of radius `r0`, m (eq. 5.54).

    Arguments and result as in :func:`plane_wall_energy_fraction`.
    """
    return _energy("cylinder", t, r0, "r0", alpha, k, h, n_terms)


def sphere_energy_fraction(t: ArrayLike, r0: float, alpha: float, k: float, h: float,
                           n_terms: int | None = None) -> FloatArray:
    """Fraction Q/Q0 lost by the sphere of radius `r0`, m (eq. 5.55).

    Arguments and result as in :func:`plane_wall_energy_fraction`.
    """
    return _energy("sphere", t, r0, "r0", alpha, k, h, n_terms)


def finite_cylinder_temperature(r: ArrayLike, z: ArrayLike, t: ArrayLike, r0: float, L: float,
                                alpha: float, k: float, h: float, T_i: float,
                                T_inf: float) -> FloatArray:
    """Finite cylinder with the same h on every face, as a product solution.

    ``theta(r, z, t) = theta_wall(z, t; L) * theta_cylinder(r, t; r0)`` with
    ``theta = (T - T_inf)/(T_i - T_inf)`` (Incropera sec. 5.8).

    Parameters
    ----------
    r : array_like
        Radius, m, in [0, r0]. `r`, `z` and `t` broadcast together.
    z : array_like
        Axial distance from the mid-plane, m, in [-L, L].
    t : array_like
        Time, s, > 0.
    r0, L : float
        Radius and half-length, m.
    alpha, k, h, T_i, T_inf : float
        As in :func:`cylinder_temperature`.

    Returns
    -------
    numpy.ndarray
        Temperature, K, of the broadcast shape of `r`, `z`, `t`.
    """
    r0, L = _positive("r0", r0), _positive("L", L)
    alpha, k, h = _positive("alpha", alpha), _positive("k", k), _positive("h", h)
    T_i, T_inf = _finite("T_i", T_i), _finite("T_inf", T_inf)
    ra, za = _array("r", r, 0.0, r0), _array("z", z, -L, L)
    ta = _array("t", t, 0.0, math.inf, open_low=True)
    ra, za, ta = np.broadcast_arrays(ra, za, ta)
    wall = _theta_series("plane_wall", za / L, alpha * ta / L**2, h * L / k, None)
    cyl = _theta_series("cylinder", ra / r0, alpha * ta / r0**2, h * r0 / k, None)
    return T_inf + (T_i - T_inf) * wall * cyl
