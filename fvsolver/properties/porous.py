"""Effective properties of the wet porous cap (a fibre felt holding water and air).

The cap is a three-phase medium: fibre (volume fraction ``1 - porosity``),
water (``porosity * saturation``) and air (``porosity * (1 - saturation)``).

Pore-fluid rule: water and air are kept as two separate phases with those
volume fractions inside every structural model, rather than being pre-mixed
into one pore fluid; each model below is the standard multi-phase form of the
two-phase model named.

Sources
-------
* J. Wang, J. K. Carson, M. F. North and D. J. Cleland, "A new approach to
  modelling the effective thermal conductivity of heterogeneous materials",
  Int. J. Heat Mass Transfer 49 (2006) 3075-3083 (pages from memory): the series and parallel
  bounds, the Maxwell-Eucken forms and the effective-medium-theory (EMT) form
  (Landauer, J. Appl. Phys. 23 (1952) 779, from memory).
* Drying curve: constant-rate period above a critical saturation, then a
  falling-rate period linear in saturation, the simplest characteristic
  drying curve in the sense of D. A. van Meel, Chem. Eng. Sci. 9 (1958) 36-44
  (from memory); the linear shape is common practice.
"""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fvsolver.errors import PropertyError
from fvsolver.properties.checks import checked

CONDUCTIVITY_MODELS = ("parallel", "series", "maxwell_eucken", "emt")
"""Accepted values of ``model`` in :func:`effective_conductivity`."""



def _checked(value, name, low, high, hint, low_open=False):
    return checked(value, name, low, high, hint, "", low_open)


def _phase_fractions(porosity: ArrayLike, saturation: ArrayLike) -> tuple[NDArray[np.float64], ...]:
    phi = _checked(porosity, "porosity", 0.0, 1.0, "pass the pore volume fraction, e.g. 0.85 for felt")
    s = _checked(saturation, "saturation", 0.0, 1.0, "pass the fraction of pore volume filled with water")
    return 1.0 - phi, phi * s, phi * (1.0 - s)


def _maxwell_eucken(fractions: tuple[NDArray[np.float64], ...],
                    conductivities: tuple[NDArray[np.float64], ...]) -> NDArray[np.float64]:
    """Multi-phase Maxwell-Eucken: phase 0 continuous, the others dispersed as spheres."""
    v_c, k_c = fractions[0], conductivities[0]
    numerator = v_c * k_c
    denominator = v_c + 0.0
    for v, k in zip(fractions[1:], conductivities[1:]):
        weight = v * 3.0 * k_c / (2.0 * k_c + k)
        numerator = numerator + weight * k
        denominator = denominator + weight
    return numerator / denominator


def _emt(fractions: tuple[NDArray[np.float64], ...],
         conductivities: tuple[NDArray[np.float64], ...]) -> NDArray[np.float64]:
    """Landauer's EMT, sum_i v_i (k_i - k)/(k_i + 2k) = 0, solved by bisection.

    The left side decreases strictly in k and changes sign between the
    smallest and largest phase conductivity, so bisection on that bracket is
    certain to converge; 64 halvings reach the float resolution.
    """
    stacked_k = np.stack(np.broadcast_arrays(*conductivities))
    lo = np.min(stacked_k, axis=0)
    hi = np.max(stacked_k, axis=0)
    for _ in range(64):
        mid = 0.5 * (lo + hi)
        g = sum(v * (k - mid) / (k + 2.0 * mid) for v, k in zip(fractions, conductivities))
        lo = np.where(g > 0.0, mid, lo)
        hi = np.where(g > 0.0, hi, mid)
    return 0.5 * (lo + hi)


def effective_conductivity(porosity: ArrayLike, saturation: ArrayLike, k_fibre: ArrayLike, k_water: ArrayLike,
                           k_air: ArrayLike, model: str = "maxwell_eucken") -> NDArray[np.float64]:
    """Effective thermal conductivity of a wet fibrous cap.

    Models (Wang et al. 2006), with v the volume fractions of fibre, water, air:

    * ``"parallel"``: ``sum v_i k_i`` (upper bound),
    * ``"series"``: ``1 / sum(v_i / k_i)`` (lower bound),
    * ``"maxwell_eucken"``: fibre continuous, water and air dispersed,
      ``k = (v_f k_f + sum_i v_i k_i F_i) / (v_f + sum_i v_i F_i)``,
      ``F_i = 3 k_f / (2 k_f + k_i)``; for two phases this is
      ``k1 (2k1 + k2 - 2(k1 - k2) v2) / (2k1 + k2 + (k1 - k2) v2)``,
    * ``"emt"``: effective medium theory, no phase continuous,
      ``sum v_i (k_i - k)/(k_i + 2k) = 0``.

    Parameters
    ----------
    porosity : float or array_like
        Pore volume fraction [-], 0-1.
    saturation : float or array_like
        Fraction of the pore volume filled with water [-], 0-1.
    k_fibre, k_water, k_air : float or array_like
        Phase conductivities [W/(m K)], > 0. All arguments broadcast.
    model : {"parallel", "series", "maxwell_eucken", "emt"}, optional

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Effective conductivity [W/(m K)].
    """
    if model not in CONDUCTIVITY_MODELS:
        raise PropertyError(f"model = {model!r} received; expected one of {CONDUCTIVITY_MODELS}; use "
                            f"'maxwell_eucken' for a felt whose fibres form a connected network")
    fractions = _phase_fractions(porosity, saturation)
    hint = "pass a phase conductivity in W/(m K)"
    conductivities = (_checked(k_fibre, "k_fibre", 0.0, np.inf, hint, low_open=True),
                      _checked(k_water, "k_water", 0.0, np.inf, hint, low_open=True),
                      _checked(k_air, "k_air", 0.0, np.inf, hint, low_open=True))
    result = mixture_conductivity(fractions, conductivities, model)
    shape = np.broadcast_shapes(*(np.shape(a) for a in fractions + conductivities))
    return np.broadcast_to(result, shape).copy()[()]


def mixture_conductivity(fractions: tuple, conductivities: tuple, model: str):
    """:func:`effective_conductivity`'s mixing rules on volume fractions (fibre, water, air) and
    phase conductivities already checked, with the same operations (plain floats give the same
    numbers as 0-d arrays: a caller that validated its inputs once calls this in its hot path)."""
    if model == "parallel":
        return sum(v * k for v, k in zip(fractions, conductivities))
    if model == "series":
        return 1.0 / sum(v / k for v, k in zip(fractions, conductivities))
    if model == "maxwell_eucken":
        return _maxwell_eucken(fractions, conductivities)
    return _emt(fractions, conductivities)


def effective_volumetric_heat_capacity(porosity: ArrayLike, saturation: ArrayLike, rho_c_fibre: ArrayLike,
                                       rho_c_water: ArrayLike, rho_c_air: ArrayLike) -> NDArray[np.float64]:
    """Volumetric heat capacity of the wet cap by the (exact) rule of mixtures.

    Parameters
    ----------
    porosity, saturation : float or array_like
        As in :func:`effective_conductivity` [-].
    rho_c_fibre, rho_c_water, rho_c_air : float or array_like
        Phase volumetric heat capacities rho c_p [J/(m3 K)], >= 0.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Effective rho c_p [J/(m3 K)].
    """
    v_f, v_w, v_a = _phase_fractions(porosity, saturation)
    hint = "pass density times specific heat in J/(m3 K)"
    total = (v_f * _checked(rho_c_fibre, "rho_c_fibre", 0.0, np.inf, hint)
             + v_w * _checked(rho_c_water, "rho_c_water", 0.0, np.inf, hint)
             + v_a * _checked(rho_c_air, "rho_c_air", 0.0, np.inf, hint))
    return np.asarray(total)[()]


def drying_rate_factor(saturation: ArrayLike, critical_saturation: ArrayLike,
                       residual_saturation: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Fraction of the wet-surface evaporation rate that a partly dry cap sustains.

    1 in the constant-rate period (``saturation >= critical_saturation``),
    falling linearly to 0 at ``residual_saturation`` and 0 below it.

    Parameters
    ----------
    saturation : float or array_like
        Water saturation of the cap [-], 0-1.
    critical_saturation : float or array_like
        Saturation at which the falling-rate period begins [-], in
        (``residual_saturation``, 1].
    residual_saturation : float or array_like, optional
        Saturation held too tightly to evaporate [-], 0 <= value < critical.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Rate factor [-], 0-1.
    """
    s = _checked(saturation, "saturation", 0.0, 1.0, "pass the fraction of pore volume filled with water")
    s_c = _checked(critical_saturation, "critical_saturation", 0.0, 1.0, "pass a saturation fraction")
    s_r = _checked(residual_saturation, "residual_saturation", 0.0, 1.0, "pass a saturation fraction")
    s_r_b, s_c_b = np.broadcast_arrays(s_r, s_c)
    bad = s_r_b >= s_c_b
    if np.any(bad):
        raise PropertyError(f"residual_saturation = {float(s_r_b[bad].flat[0]):.6g} received with "
                            f"critical_saturation = {float(s_c_b[bad].flat[0]):.6g}; expected residual < critical; "
                            f"lower the residual saturation or raise the critical one")
    return np.clip((s - s_r) / (s_c - s_r), 0.0, 1.0)[()]
