"""External convection and radiation from a sphere in air (the wet-capped bulb).

Sources
-------
* S. W. Churchill, "Free convection around immersed bodies", section 2.5.7 of
  the Heat Exchanger Design Handbook, Hemisphere 1983: laminar sphere
  correlation ``Nu = 2 + 0.589 Ra^(1/4) / [1 + (0.469/Pr)^(9/16)]^(4/9)``,
  Pr >= 0.7, Ra <= 1e11 (as quoted by Incropera et al., 6th ed., eq. 9.35).
* S. Whitaker, "Forced convection heat transfer correlations for flow in
  pipes, past flat plates, single cylinders, single spheres, and for flow in
  packed beds and tube bundles", AIChE J. 18 (1972) 361-371: sphere
  correlation with properties at the free-stream temperature and a
  viscosity-ratio correction (Incropera et al., 6th ed., eq. 7.56).
* S. W. Churchill, "Combined free and forced convection around immersed
  bodies", section 2.5.9 of the same handbook (1983): ``Nu^n = Nu_F^n + Nu_N^n``
  for assisting and transverse flows, n = 3 for spheres (Incropera et al.,
  6th ed., eq. 9.80).
* T. H. Chilton and A. P. Colburn, Ind. Eng. Chem. 26 (1934) 1183-1187:
  heat and mass transfer analogy ``h_m = h / (rho c_p Le^(2/3))``.

Section, page and equation numbers above are quoted from memory; the
formulas themselves are checked in the tests (against ht 1.2.0 for the
natural-convection form).
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fvsolver.errors import PropertyError
from fvsolver.properties import moist_air
from fvsolver.properties.fluids import PropertyRangeWarning
from fvsolver.properties.checks import checked

STANDARD_GRAVITY = 9.80665
"""Standard acceleration of gravity [m/s2] (CGPM 1901)."""

STEFAN_BOLTZMANN = 5.670374419e-8
"""Stefan-Boltzmann constant [W/(m2 K4)] (CODATA 2018)."""

MODES = ("natural", "forced", "mixed")
"""Accepted values of the ``mode`` argument of :func:`sphere_convection`."""

# Whitaker fitted air data whose Prandtl number is 0.70-0.71; air at room
# temperature (Pr ~ 0.707) is inside his data, so the nominal 0.71 limit is
# applied with that allowance rather than warning for every air calculation.
_WHITAKER_PR_MIN = 0.70
_WHITAKER_PR_MAX = 380.0
_WHITAKER_RE_MAX = 7.6e4



def _checked(value, name, low, high, hint, low_open=False):
    return checked(value, name, low, high, hint, "", low_open)


def nusselt_sphere_natural(Ra: ArrayLike, Pr: ArrayLike) -> NDArray[np.float64]:
    """Mean Nusselt number of natural convection from an isothermal sphere (Churchill 1983).

    Parameters
    ----------
    Ra : float or array_like
        Rayleigh number based on the diameter [-], 0 <= Ra <= 1e11.
    Pr : float or array_like, broadcastable with ``Ra``
        Prandtl number [-], Pr >= 0.7.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Nusselt number h D / k [-].

    Raises
    ------
    PropertyError
        Outside the stated range of the correlation.
    """
    ra = _checked(Ra, "Ra", 0.0, 1.0e11, "the laminar sphere correlation holds up to Ra = 1e11; "
                  "for larger spheres or temperature differences use a turbulent correlation")
    pr = _checked(Pr, "Pr", 0.7, np.inf, "the correlation was fitted for Pr >= 0.7 (gases and liquids); "
                  "liquid metals need another correlation")
    return (2.0 + 0.589 * ra**0.25 / (1.0 + (0.469 / pr) ** (9.0 / 16.0)) ** (4.0 / 9.0))[()]


def nusselt_sphere_forced(Re: ArrayLike, Pr: ArrayLike, mu_ratio: ArrayLike = 1.0) -> NDArray[np.float64]:
    """Mean Nusselt number of forced flow past a sphere (Whitaker 1972).

    ``Nu = 2 + (0.4 Re^(1/2) + 0.06 Re^(2/3)) Pr^0.4 (mu/mu_s)^(1/4)`` with all
    properties at the free-stream temperature. Stated range
    0.71 <= Pr <= 380, 3.5 <= Re <= 7.6e4; a :class:`PropertyRangeWarning` is
    issued for Re above or Pr outside it (Pr down to 0.70 is accepted, see the
    module notes). Reynolds numbers from 0 to 3.5 are not flagged: the
    correlation tends to the exact conduction limit Nu = 2.

    Parameters
    ----------
    Re : float or array_like
        Reynolds number based on the diameter [-], >= 0.
    Pr : float or array_like
        Prandtl number at the free-stream temperature [-], > 0.
    mu_ratio : float or array_like, optional
        Free-stream to surface viscosity ratio mu/mu_s [-], > 0.
        ``Re``, ``Pr`` and ``mu_ratio`` broadcast together.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Nusselt number h D / k [-].
    """
    re = _checked(Re, "Re", 0.0, np.inf, "a Reynolds number is non-negative; pass |V| D / nu")
    pr = _checked(Pr, "Pr", 0.0, np.inf, "pass the Prandtl number of the fluid", low_open=True)
    ratio = _checked(mu_ratio, "mu_ratio", 0.0, np.inf, "pass mu(T_free_stream) / mu(T_surface)", low_open=True)
    if np.any(re > _WHITAKER_RE_MAX):
        warnings.warn(f"Whitaker sphere correlation used at Re up to {float(np.max(re)):.6g}, above its range "
                      f"3.5-7.6e4; the Nusselt number is an extrapolation", PropertyRangeWarning, stacklevel=2)
    if np.any((pr < _WHITAKER_PR_MIN) | (pr > _WHITAKER_PR_MAX)):
        warnings.warn(f"Whitaker sphere correlation used at Pr = {float(np.min(pr)):.6g}..{float(np.max(pr)):.6g},"
                      f" outside its range 0.71-380; the Nusselt number is an extrapolation",
                      PropertyRangeWarning, stacklevel=2)
    return (2.0 + (0.4 * re**0.5 + 0.06 * re ** (2.0 / 3.0)) * pr**0.4 * ratio**0.25)[()]


def nusselt_mixed(nu_forced: ArrayLike, nu_natural: ArrayLike, n: float = 3.0) -> NDArray[np.float64]:
    """Combined forced and natural convection, ``Nu^n = Nu_F^n + Nu_N^n`` (Churchill 1983).

    The assisting/transverse-flow form; it never falls below either part.

    Parameters
    ----------
    nu_forced, nu_natural : float or array_like, broadcastable
        Nusselt numbers of the two mechanisms on the same length and
        conductivity basis [-], >= 0.
    n : float, optional
        Blending exponent, > 0; 3 is usual for spheres.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Mixed-convection Nusselt number [-].
    """
    nf = _checked(nu_forced, "nu_forced", 0.0, np.inf, "pass a Nusselt number")
    nn = _checked(nu_natural, "nu_natural", 0.0, np.inf, "pass a Nusselt number")
    exponent = float(_checked(n, "n", 0.0, np.inf, "pass a positive blending exponent, usually 3", low_open=True))
    return ((nf**exponent + nn**exponent) ** (1.0 / exponent))[()]


@dataclass(frozen=True)
class SphereConvection:
    """Result of :func:`sphere_convection`; arrays have the broadcast input shape.

    Attributes
    ----------
    h : ndarray
        Mean convective heat transfer coefficient [W/(m2 K)].
    Nu : ndarray
        h D / k with k at the film temperature [-].
    Re : ndarray
        Reynolds number, free-stream properties [-].
    Ra : ndarray
        Rayleigh number, film properties [-].
    Pr : ndarray
        Prandtl number at the film temperature [-].
    T_film : ndarray
        Film temperature (T_surface + T_air) / 2 [K].
    mode : str
        "natural", "forced" or "mixed".
    """

    h: NDArray[np.float64]
    Nu: NDArray[np.float64]
    Re: NDArray[np.float64]
    Ra: NDArray[np.float64]
    Pr: NDArray[np.float64]
    T_film: NDArray[np.float64]
    mode: str


def sphere_convection(diameter: ArrayLike, T_surface: ArrayLike, T_air: ArrayLike, p: ArrayLike,
                      air_speed: ArrayLike = 0.0, mode: str = "mixed", *,
                      p_vapour_surface: ArrayLike = 0.0, p_vapour_air: ArrayLike = 0.0) -> SphereConvection:
    """Convective heat transfer coefficient of a sphere in air.

    Natural convection (Churchill) uses properties at the film temperature and
    a Grashof number from the actual density difference between air at the
    surface and far away, so that the lighter humid air next to a wet surface
    is accounted for when vapour pressures are given (for dry air this equals
    the usual beta = 1/T_film form to second order in the temperature
    difference). Forced convection (Whitaker) uses free-stream properties and
    mu/mu_s, as the correlation was fitted. In mixed mode the two coefficients
    are combined with :func:`nusselt_mixed` on the film-conductivity basis.
    With the air laws of :mod:`moist_air`, Pr drops below Churchill's 0.7
    limit for film temperatures above about 327 K, where "natural" and
    "mixed" raise :class:`PropertyError`.

    Parameters
    ----------
    diameter : float or array_like
        Sphere diameter D [m], > 0.
    T_surface, T_air : float or array_like
        Surface and free-stream air temperatures [K], 220-400 K.
    p : float or array_like
        Air pressure [Pa].
    air_speed : float or array_like, optional
        Free-stream speed [m/s], >= 0 (ignored in "natural" mode).
    mode : {"natural", "forced", "mixed"}, optional
    p_vapour_surface, p_vapour_air : float or array_like, optional
        Water-vapour partial pressure at the surface and in the free stream
        [Pa]; 0 (dry air) by default. All array arguments broadcast together.

    Returns
    -------
    SphereConvection
    """
    if mode not in MODES:
        raise PropertyError(f"mode = {mode!r} received; expected one of {MODES}; pass 'mixed' unless the air is "
                            f"known to be still ('natural') or the flow dominates ('forced')")
    d = _checked(diameter, "diameter", 0.0, np.inf, "pass the sphere diameter in metres", low_open=True)
    speed = _checked(air_speed, "air_speed", 0.0, np.inf, "pass the free-stream speed in m/s (>= 0)")
    hint = "pass kelvin inside the range of the air property laws"
    t_s = _checked(T_surface, "T_surface", moist_air.T_AIR_MIN, moist_air.T_AIR_MAX, hint)
    t_inf = _checked(T_air, "T_air", moist_air.T_AIR_MIN, moist_air.T_AIR_MAX, hint)
    d, t_s, t_inf, pt, speed, pv_s, pv_inf = np.broadcast_arrays(
        d, t_s, t_inf, np.asarray(p, dtype=float), speed,
        np.asarray(p_vapour_surface, dtype=float), np.asarray(p_vapour_air, dtype=float))
    t_f = 0.5 * (t_s + t_inf)
    pv_f = 0.5 * (pv_s + pv_inf)
    k_f = moist_air.air_thermal_conductivity(t_f)
    pr_f = moist_air.prandtl_number(t_f, pt, pv_f)
    nu_f = moist_air.air_kinematic_viscosity(t_f, pt, pv_f)
    drho = np.abs(moist_air.air_density(t_inf, pt, pv_inf) - moist_air.air_density(t_s, pt, pv_s))
    gr = STANDARD_GRAVITY * d**3 * drho / (moist_air.air_density(t_f, pt, pv_f) * nu_f**2)
    ra = gr * pr_f
    re = speed * d / moist_air.air_kinematic_viscosity(t_inf, pt, pv_inf)

    nusselt_natural = nusselt_sphere_natural(ra, pr_f) if mode != "forced" else 0.0
    nusselt_forced = 0.0
    if mode != "natural":
        mu_ratio = moist_air.air_dynamic_viscosity(t_inf) / moist_air.air_dynamic_viscosity(t_s)
        nu_free_stream = nusselt_sphere_forced(re, moist_air.prandtl_number(t_inf, pt, pv_inf), mu_ratio)
        # Whitaker's Nu is based on k at T_air; rescale to the film conductivity before blending.
        nusselt_forced = nu_free_stream * moist_air.air_thermal_conductivity(t_inf) / k_f
    if mode == "mixed":
        nusselt = nusselt_mixed(nusselt_forced, nusselt_natural)
    else:
        nusselt = nusselt_natural + nusselt_forced
    nusselt = np.asarray(nusselt)
    h = nusselt * k_f / d
    return SphereConvection(h=h[()], Nu=nusselt[()], Re=re[()], Ra=ra[()], Pr=pr_f[()], T_film=t_f[()],
                            mode=mode)


def mass_transfer_coefficient(h: ArrayLike, T_film: ArrayLike, p: ArrayLike, lewis: ArrayLike | None = None,
                              p_vapour: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Mass transfer coefficient of water vapour from the heat transfer coefficient (Chilton-Colburn).

    ``h_m = h / (rho c_p Le^(2/3))``; the evaporation flux is then
    ``h_m (rho_v,surface - rho_v,air)`` [kg/(m2 s)].

    Parameters
    ----------
    h : float or array_like
        Convective heat transfer coefficient [W/(m2 K)], >= 0.
    T_film : float or array_like
        Film temperature [K], 220-400 K.
    p : float or array_like
        Air pressure [Pa].
    lewis : float or array_like, optional
        Lewis number [-]; computed with :func:`moist_air.lewis_number` if None.
    p_vapour : float or array_like, optional
        Vapour partial pressure used for the film properties [Pa].

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Mass transfer coefficient h_m [m/s].
    """
    hh = _checked(h, "h", 0.0, np.inf, "pass a heat transfer coefficient in W/(m2 K)")
    if lewis is None:
        le = moist_air.lewis_number(T_film, p, p_vapour)
    else:
        le = _checked(lewis, "lewis", 0.0, np.inf, "pass a positive Lewis number (about 0.85 for water vapour "
                      "in air)", low_open=True)
    rho_cp = moist_air.air_density(T_film, p, p_vapour) * moist_air.air_heat_capacity(T_film, p, p_vapour)
    return (hh / (rho_cp * le ** (2.0 / 3.0)))[()]


def radiation_coefficient(emissivity: ArrayLike, T_surface: ArrayLike, T_surroundings: ArrayLike
                          ) -> NDArray[np.float64]:
    """Linearised radiation coefficient of a small grey body in large surroundings.

    ``h_rad = eps sigma (Ts^2 + Tsur^2)(Ts + Tsur)``, so that the net flux is
    ``h_rad (Ts - Tsur)`` exactly.

    Parameters
    ----------
    emissivity : float or array_like
        Hemispherical emissivity of the surface [-], 0-1.
    T_surface, T_surroundings : float or array_like
        Absolute temperatures [K], > 0. All arguments broadcast.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        h_rad [W/(m2 K)].
    """
    eps = _checked(emissivity, "emissivity", 0.0, 1.0, "an emissivity is a fraction between 0 and 1")
    t_s = _checked(T_surface, "T_surface", 0.0, np.inf, "pass kelvin", low_open=True)
    t_sur = _checked(T_surroundings, "T_surroundings", 0.0, np.inf, "pass kelvin", low_open=True)
    return (eps * STEFAN_BOLTZMANN * (t_s**2 + t_sur**2) * (t_s + t_sur))[()]
