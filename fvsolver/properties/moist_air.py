"""Psychrometrics and transport properties of (moist) air around the wet cap.

Sources
-------
* ASHRAE Handbook -- Fundamentals (SI), 2017, chapter 1 "Psychrometrics":
  molar masses (28.966 g/mol dry air), humidity ratio eq. (20) (also used at
  saturation), specific heats 1.006 and 1.86 kJ/(kg K) of the moist-air
  enthalpy eq. (30) and the wet-bulb balance eq. (33) (equation numbers as
  cited by psychrolib 2.5.0). The saturation pressure over liquid water
  is taken from :mod:`fvsolver.properties.water` (IAPWS-IF97) without an
  enhancement factor, as psychrolib does.
* U.S. Standard Atmosphere, 1976 (NOAA/NASA/USAF), eqs. (51) and (53):
  Sutherland viscosity (beta = 1.458e-6 kg/(m s K^0.5), S = 110.4 K) and the
  thermal-conductivity law of dry air (equation numbers and coefficients from
  memory; the tests compare both with CoolProp).
* Water-vapour diffusivity in air: 2.6e-5 m2/s at 298 K and 1 atm from
  Incropera, DeWitt, Bergman and Lavine, *Fundamentals of Heat and Mass
  Transfer*, 6th ed., Table A.8 (from memory), scaled as T^1.75/p following
  the temperature exponent of Fuller, Schettler and Giddings, Ind. Eng. Chem.
  58(5) (1966) 18-27.

Dynamic viscosity and thermal conductivity are dry-air values: at 25 C and
50 % relative humidity water vapour lowers them by about 0.5 % and 0.1 %
(CoolProp 8.0.0 HAPropsSI), well inside the accuracy of the laws used.
Density and heat capacity account for the vapour when ``p_vapour`` is given.
"""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fvsolver.errors import PropertyError
from fvsolver.properties import water
from fvsolver.properties.checks import checked, describe as _describe

UNIVERSAL_GAS_CONSTANT = 8.314462618
"""Molar gas constant [J/(mol K)] (CODATA 2018, exact)."""

MOLAR_MASS_DRY_AIR = 0.028966
"""Molar mass of dry air [kg/mol] (ASHRAE 2017 ch. 1)."""

MOLAR_MASS_RATIO = 0.621945
"""Water to dry-air molar-mass ratio [-], the rounded value of ASHRAE 2017 eq. (20)."""

CP_DRY_AIR = 1006.0
"""Specific heat of dry air [J/(kg K)] (ASHRAE 2017 ch. 1 eq. (30))."""

CP_WATER_VAPOUR = 1860.0
"""Specific heat of water vapour [J/(kg K)] (ASHRAE 2017 ch. 1 eq. (30))."""

STANDARD_PRESSURE = 101325.0
"""Standard atmosphere [Pa]."""

DIFFUSIVITY_REFERENCE = 2.6e-5
"""Water-vapour diffusivity in air at 298 K and 1 atm [m2/s] (Incropera Table A.8)."""

T_AIR_MIN = 220.0
"""Lower limit of the air transport laws as used here [K] (within 2 % of CoolProp)."""

T_AIR_MAX = 400.0
"""Upper limit of the air transport laws as used here [K] (within 2 % of CoolProp)."""

_SUTHERLAND_BETA = 1.458e-6
_SUTHERLAND_S = 110.4
_KAPPA_COEFF = 2.64638e-3
_KAPPA_S = 245.4



def _checked(value, name, low, high, unit, hint, low_open=False):
    return checked(value, name, low, high, hint, unit, low_open)


def _pressure(p: ArrayLike, name: str = "p") -> NDArray[np.float64]:
    return _checked(p, name, 0.0, np.inf, "Pa", "pass an absolute pressure in pascal", low_open=True)


def _air_temperature(T: ArrayLike) -> NDArray[np.float64]:
    return _checked(T, "T", T_AIR_MIN, T_AIR_MAX, "K",
                    "pass an air temperature in kelvin inside the range where the air laws are checked")


def _vapour(p_vapour: ArrayLike, p_total: NDArray[np.float64]) -> NDArray[np.float64]:
    pv = _checked(p_vapour, "p_vapour", 0.0, np.inf, "Pa", "pass a vapour partial pressure in pascal")
    bad = pv >= p_total
    if np.any(bad):
        raise PropertyError(f"p_vapour = {_describe(np.broadcast_to(pv, bad.shape)[bad])} Pa received; expected "
                            f"a partial pressure below the total pressure p_total = "
                            f"{_describe(np.broadcast_to(p_total, bad.shape)[bad])} Pa; check that both are in "
                            f"pascal and that the air is not pure steam")
    return pv


def humidity_ratio(p_vapour: ArrayLike, p_total: ArrayLike) -> NDArray[np.float64]:
    """Humidity ratio W [kg water / kg dry air], ASHRAE 2017 ch. 1 eq. (20).

    Parameters
    ----------
    p_vapour : float or array_like
        Partial pressure of water vapour [Pa], 0 <= p_vapour < p_total.
    p_total : float or array_like, broadcastable with ``p_vapour``
        Total (barometric) pressure [Pa].
    """
    p = _pressure(p_total, "p_total")
    pv = _vapour(p_vapour, p)
    return (MOLAR_MASS_RATIO * pv / (p - pv))[()]


def vapour_pressure_from_humidity_ratio(W: ArrayLike, p_total: ArrayLike) -> NDArray[np.float64]:
    """Vapour partial pressure [Pa] from the humidity ratio (inverse of :func:`humidity_ratio`).

    Parameters
    ----------
    W : float or array_like
        Humidity ratio [kg/kg dry air], >= 0; broadcasts with ``p_total`` [Pa].
    """
    w = _checked(W, "W", 0.0, np.inf, "kg/kg", "pass the humidity ratio as kg of water per kg of dry air")
    p = _pressure(p_total, "p_total")
    return (p * w / (MOLAR_MASS_RATIO + w))[()]


def saturation_humidity_ratio(T: ArrayLike, p_total: ArrayLike) -> NDArray[np.float64]:
    """Humidity ratio [kg/kg dry air] of air saturated over liquid water (ASHRAE eq. (20) at p_sat).

    Parameters
    ----------
    T : float or array_like
        Temperature [K], >= 273.15 K with p_sat(T) < p_total; broadcasts with ``p_total`` [Pa].
    """
    return humidity_ratio(water.saturation_pressure(T), p_total)


def vapour_pressure_from_relative_humidity(T: ArrayLike, rh: ArrayLike) -> NDArray[np.float64]:
    """Vapour partial pressure [Pa] from relative humidity over liquid water.

    Parameters
    ----------
    T : float or array_like
        Dry-bulb temperature [K], 273.15-647.096 K.
    rh : float or array_like, broadcastable with ``T``
        Relative humidity as a fraction, 0 <= rh <= 1 (not percent).
    """
    phi = _checked(rh, "rh", 0.0, 1.0, "(fraction)", "pass relative humidity as a fraction, e.g. 0.5 for 50 %")
    return (phi * water.saturation_pressure(T))[()]


def relative_humidity(T: ArrayLike, p_vapour: ArrayLike) -> NDArray[np.float64]:
    """Relative humidity over liquid water as a fraction (above 1: supersaturated).

    Parameters
    ----------
    T : float or array_like
        Dry-bulb temperature [K], 273.15-647.096 K.
    p_vapour : float or array_like, broadcastable with ``T``
        Vapour partial pressure [Pa], >= 0.
    """
    pv = _checked(p_vapour, "p_vapour", 0.0, np.inf, "Pa", "pass a vapour partial pressure in pascal")
    return (pv / water.saturation_pressure(T))[()]


def vapour_density(p_vapour: ArrayLike, T: ArrayLike) -> NDArray[np.float64]:
    """Mass concentration of water vapour [kg/m3], ideal gas.

    Parameters
    ----------
    p_vapour : float or array_like
        Vapour partial pressure [Pa], >= 0; broadcasts with ``T`` [K], > 0.
    """
    pv = _checked(p_vapour, "p_vapour", 0.0, np.inf, "Pa", "pass a vapour partial pressure in pascal")
    t = _checked(T, "T", 0.0, np.inf, "K", "pass an absolute temperature in kelvin", low_open=True)
    return (pv * water.MOLAR_MASS / (UNIVERSAL_GAS_CONSTANT * t))[()]


def dew_point(p_vapour: ArrayLike) -> NDArray[np.float64]:
    """Dew-point temperature [K], same shape as ``p_vapour``: over liquid water from 611.2127 Pa
    (0 C), over ice below it (the frost point, as ASHRAE 2017 ch. 1 defines the dew point below
    freezing). A dry room (20 % at 24 C, say) has its dew point there.

    Parameters
    ----------
    p_vapour : float or array_like
        Vapour partial pressure [Pa], from the frost point at 150 K to 22.064 MPa.
    """
    pv = _checked(p_vapour, "p_vapour", 0.0, water.CRITICAL_PRESSURE, "Pa",
                  "pass the vapour partial pressure in pascal", low_open=True)
    over_ice = pv < water.P_SATURATION_MIN
    out = np.empty_like(pv)
    if np.any(~over_ice):
        out[~over_ice] = water.saturation_temperature(pv[~over_ice])
    if np.any(over_ice):
        out[over_ice] = water.sublimation_temperature(pv[over_ice])
    return out[()]


# ASHRAE 2017 eq. (33) works in kJ/kg and degrees Celsius; these are its constants.
_H_FG0 = 2501.0
_CPW_MINUS_CPV = 2.326
_CPA = 1.006
_CPV = 1.86
_CPW = 4.186


def _wet_bulb_residual(t_star: NDArray[np.float64], T: NDArray[np.float64], W: NDArray[np.float64],
                       p: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Residual W*(t_star) - W of ASHRAE eq. (33) and its derivative in t_star [1/K]."""
    pws = water.saturation_pressure(t_star)
    dpws = water.dsaturation_pressure_dT(t_star)
    ws = MOLAR_MASS_RATIO * pws / (p - pws)
    dws = MOLAR_MASS_RATIO * p * dpws / (p - pws) ** 2
    tc_star = t_star - 273.15
    tc = T - 273.15
    num = (_H_FG0 - _CPW_MINUS_CPV * tc_star) * ws - _CPA * (tc - tc_star)
    den = _H_FG0 + _CPV * tc - _CPW * tc_star
    dnum = -_CPW_MINUS_CPV * ws + (_H_FG0 - _CPW_MINUS_CPV * tc_star) * dws + _CPA
    return num / den - W, (dnum * den + _CPW * num) / den**2


def wet_bulb_temperature(T: ArrayLike, rh: ArrayLike, p_total: ArrayLike) -> NDArray[np.float64]:
    """Thermodynamic (adiabatic-saturation) wet-bulb temperature.

    Solves ASHRAE 2017 ch. 1 eq. (33),
    ``W = ((2501 - 2.326 t*) Ws(t*) - 1.006 (t - t*)) / (2501 + 1.86 t - 4.186 t*)``
    (t in C, enthalpies in kJ/kg), for t* by a vectorised Newton iteration
    kept inside the bracket [273.15 K, min(T, T_sat(p_total))] by bisection.

    Parameters
    ----------
    T : float or array_like
        Dry-bulb temperature [K], 273.15-373.15 K.
    rh : float or array_like
        Relative humidity over liquid water as a fraction, 0-1.
    p_total : float or array_like
        Total pressure [Pa], above the triple-point pressure of water.
        ``T``, ``rh`` and ``p_total`` broadcast together.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Wet-bulb temperature [K], converged to 1e-9 K.

    Raises
    ------
    PropertyError
        On out-of-range inputs, or when the wet-bulb temperature would fall
        below 273.15 K (the evaporating surface would freeze; the ice branch
        of the psychrometric equations is not covered).
    """
    t_dry = _checked(T, "T", 273.15, 373.15, "K", "pass the dry-bulb temperature in kelvin")
    p = _checked(p_total, "p_total", water.P_SATURATION_MIN, np.inf, "Pa",
                 "pass the barometric pressure in pascal (e.g. 101325.0)", low_open=True)
    t_dry, phi, p = np.broadcast_arrays(t_dry, np.asarray(rh, dtype=float), p)
    w = humidity_ratio(vapour_pressure_from_relative_humidity(t_dry, phi), p)
    # Above T_sat(p) the saturation humidity ratio has no meaning; 0.999 p keeps W* finite.
    p_cap = np.minimum(0.999 * p, water.CRITICAL_PRESSURE)
    hi = np.minimum(t_dry, water.saturation_temperature(np.maximum(p_cap, water.P_SATURATION_MIN)))
    lo = np.full_like(hi, water.T_SATURATION_MIN)
    f_lo, _ = _wet_bulb_residual(lo, t_dry, w, p)
    frozen = f_lo > 0.0
    if np.any(frozen):
        raise PropertyError(
            f"wet-bulb temperature below 273.15 K for T = {_describe(t_dry[frozen])} K, "
            f"rh = {_describe(phi[frozen])}, p_total = {_describe(p[frozen])} Pa; expected a state whose "
            f"wet-bulb temperature is above freezing, because the wet surface would ice over and the "
            f"ice branch is not modelled; use warmer or more humid air")
    t = hi.copy()
    for _ in range(60):
        f, df = _wet_bulb_residual(t, t_dry, w, p)
        below = f < 0.0
        lo = np.where(below, t, lo)
        hi = np.where(below, hi, t)
        with np.errstate(divide="ignore", invalid="ignore"):
            t_new = t - f / df
        outside = ~np.isfinite(t_new) | (t_new < lo) | (t_new > hi)
        t_new = np.where(outside, 0.5 * (lo + hi), t_new)
        step = np.max(np.abs(t_new - t)) if t.size else 0.0
        t = t_new
        if step < 1.0e-9:
            return t[()]
    raise PropertyError(f"wet-bulb iteration did not converge for T = {_describe(t_dry)} K, rh = {_describe(phi)}, "
                        f"p_total = {_describe(p)} Pa; expected convergence in 60 steps; report this state")


def air_density(T: ArrayLike, p: ArrayLike, p_vapour: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Density of (moist) air as an ideal mixture of dry air and water vapour.

    Parameters
    ----------
    T : float or array_like
        Temperature [K], 220-400 K.
    p : float or array_like
        Total pressure [Pa].
    p_vapour : float or array_like, optional
        Vapour partial pressure [Pa]; 0 for dry air. All three broadcast.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Density [kg/m3].
    """
    t = _air_temperature(T)
    pt = _pressure(p)
    pv = _vapour(p_vapour, pt)
    return (((pt - pv) * MOLAR_MASS_DRY_AIR + pv * water.MOLAR_MASS) / (UNIVERSAL_GAS_CONSTANT * t))[()]


def air_dynamic_viscosity(T: ArrayLike) -> NDArray[np.float64]:
    """Dynamic viscosity of dry air [Pa s], Sutherland's law, U.S. Standard Atmosphere 1976.

    Parameters
    ----------
    T : float or array_like
        Temperature [K], 220-400 K; the result has the shape of ``T``.
    """
    t = _air_temperature(T)
    return (_SUTHERLAND_BETA * t**1.5 / (t + _SUTHERLAND_S))[()]


def air_thermal_conductivity(T: ArrayLike) -> NDArray[np.float64]:
    """Thermal conductivity of dry air [W/(m K)], U.S. Standard Atmosphere 1976 eq. (53).

    Parameters
    ----------
    T : float or array_like
        Temperature [K], 220-400 K; the result has the shape of ``T``.
    """
    t = _air_temperature(T)
    return (_KAPPA_COEFF * t**1.5 / (t + _KAPPA_S * 10.0 ** (-12.0 / t)))[()]


def air_heat_capacity(T: ArrayLike, p: ArrayLike, p_vapour: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Isobaric specific heat of moist air per kg of mixture.

    Uses the constant ASHRAE values (1006 and 1860 J/(kg K)) so that heat
    balances stay consistent with the wet-bulb equation; for dry air this is
    within 0.6 % of CoolProp between 220 and 400 K.

    Parameters
    ----------
    T : float or array_like
        Temperature [K], 220-400 K (checked; sets the output shape).
    p : float or array_like
        Total pressure [Pa].
    p_vapour : float or array_like, optional
        Vapour partial pressure [Pa]; 0 for dry air.

    Returns
    -------
    numpy.ndarray or numpy.float64, broadcast shape
        Heat capacity [J/(kg K)].
    """
    t = _air_temperature(T)
    w = humidity_ratio(p_vapour, p)
    vapour_fraction = w / (1.0 + w)
    cp = (1.0 - vapour_fraction) * CP_DRY_AIR + vapour_fraction * CP_WATER_VAPOUR
    return (cp + np.zeros_like(t))[()]


def air_kinematic_viscosity(T: ArrayLike, p: ArrayLike, p_vapour: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Kinematic viscosity mu/rho [m2/s]; arguments as :func:`air_density`."""
    return (air_dynamic_viscosity(T) / air_density(T, p, p_vapour))[()]


def air_thermal_diffusivity(T: ArrayLike, p: ArrayLike, p_vapour: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Thermal diffusivity k/(rho c_p) [m2/s]; arguments as :func:`air_density`."""
    rho_cp = air_density(T, p, p_vapour) * air_heat_capacity(T, p, p_vapour)
    return (air_thermal_conductivity(T) / rho_cp)[()]


def prandtl_number(T: ArrayLike, p: ArrayLike, p_vapour: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Prandtl number mu c_p / k [-]; arguments as :func:`air_density`."""
    cp = air_heat_capacity(T, p, p_vapour)
    return (air_dynamic_viscosity(T) * cp / air_thermal_conductivity(T))[()]


def water_vapour_diffusivity(T: ArrayLike, p: ArrayLike) -> NDArray[np.float64]:
    """Binary diffusion coefficient of water vapour in air [m2/s].

    ``D = 2.6e-5 m2/s (T / 298 K)^1.75 (101325 Pa / p)``: reference value from
    Incropera Table A.8, temperature exponent of Fuller's method.

    Parameters
    ----------
    T : float or array_like
        Temperature [K], 220-400 K; broadcasts with the total pressure ``p`` [Pa].
    """
    t = _air_temperature(T)
    pt = _pressure(p)
    return (DIFFUSIVITY_REFERENCE * (t / 298.0) ** 1.75 * (STANDARD_PRESSURE / pt))[()]


def lewis_number(T: ArrayLike, p: ArrayLike, p_vapour: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Lewis number alpha / D of water vapour in air [-]; arguments as :func:`air_density`."""
    return (air_thermal_diffusivity(T, p, p_vapour) / water_vapour_diffusivity(T, p))[()]
