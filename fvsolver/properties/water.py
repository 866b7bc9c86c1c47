"""Saturation and liquid properties of water, the fluid that wets the porous cap.

Sources
-------
* IAPWS R7-97(2012), *Revised Release on the IAPWS Industrial Formulation 1997
  for the Thermodynamic Properties of Water and Steam*, section 8 (region 4):
  saturation-pressure equation (30) and its backward form (31).
* VDI Heat Atlas, 2nd ed., Springer 2010, part D3.1: PPDS equation 12 for the
  enthalpy of vaporization, coefficients for water (as tabulated in the
  ``chemicals`` 1.5.2 data file "VDI PPDS Enthalpies of vaporization").
* G. S. Kell, "Density, thermal expansivity, and compressibility of liquid
  water from 0 to 150 C", J. Chem. Eng. Data 20 (1975) 97-105: rational
  density correlation at 101.325 kPa (coefficients quoted from memory; the
  tests check them against IAPWS-95).
* Perry's Chemical Engineers' Handbook, 8th ed., Table 2-153 (DIPPR
  equation 100), liquid heat capacity of water.
* IAPWS R14-08(2011), *Revised Release on the Pressure along the Melting and
  Sublimation Curves of Ordinary Water Substance*, eq. (6): the sublimation
  pressure over ice Ih, 50 K to the triple point (for frost points).

All functions take floats or numpy arrays of any shape and return numpy
values of the broadcast shape. Inputs outside the stated validity range raise
:class:`fvsolver.errors.PropertyError`.
"""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fvsolver.errors import PropertyError
from fvsolver.properties.checks import checked

MOLAR_MASS = 0.01801528

TRIPLE_POINT_TEMPERATURE = 273.16
"""Triple point of water [K] (IAPWS R14-08)."""
TRIPLE_POINT_PRESSURE = 611.657
"""Triple-point pressure of water [Pa] (IAPWS R14-08)."""
# IAPWS R14-08(2011) eq. (6): p_subl / p_t = exp(theta^-1 sum a_i theta^b_i), theta = T / T_t
_SUBLIMATION_A = (-0.212144006e2, 0.273203819e2, -0.610598130e1)
_SUBLIMATION_B = (0.333333333e-2, 0.120666667e1, 0.170333333e1)
T_SUBLIMATION_MIN = 150.0
"""Lowest temperature [K] the frost-point inversion is used down to (the release holds from 50 K)."""
"""Molar mass of water [kg/mol]."""

CRITICAL_TEMPERATURE = 647.096
"""Critical temperature of water [K] (IAPWS)."""

CRITICAL_PRESSURE = 22.064e6
"""Critical pressure of water [Pa] (IAPWS)."""

T_SATURATION_MIN = 273.15
"""Lowest temperature of the IF97 saturation equation [K]."""

P_SATURATION_MIN = 611.212677
"""Saturation pressure at 273.15 K from IF97 eq. (30) [Pa]."""

T_LIQUID_MIN = 273.15
"""Lower limit of the liquid correlations of this module [K]."""

T_LIQUID_MAX = 373.15
"""Upper limit of the liquid correlations of this module [K]."""

# IAPWS-IF97 region 4 coefficients n1..n10 (Table 34 of the release).
_N = (
    0.11670521452767e4,
    -0.72421316703206e6,
    -0.17073846940092e2,
    0.12020824702470e5,
    -0.32325550322333e7,
    0.14915108613530e2,
    -0.48232657361591e4,
    0.40511340542057e6,
    -0.23855557567849e0,
    0.65017534844798e3,
)
_N_ARRAY = np.array(_N)

# VDI Heat Atlas PPDS12 coefficients for water: dimensionless A..E with
# R*Tc scaling; the table gives its own Tc, used here so the fit is unchanged.
_PPDS12_TC = 647.1
_PPDS12 = (6.85307, 7.43804, -2.937595, -3.282093, 8.397378)
_R = 8.314462618
_PPDS12_ARRAY = np.array(_PPDS12)

# Kell (1975) rational form, t in degrees Celsius (IPTS-68; the shift to
# ITS-90 is a few mK and below the fit accuracy).
_KELL_NUM = (999.83952, 16.945176, -7.9870401e-3, -46.170461e-6, 105.56302e-9, -280.54253e-12)
_KELL_DEN = 16.879850e-3

# Perry's Table 2-153, water, DIPPR EQ100 in J/(kmol K), T in K.
_CP_EQ100 = (276370.0, -2090.1, 8.125, -0.014116, 9.3701e-6)



def _checked(value, name, low, high, unit, hint, low_open=False):
    return checked(value, name, low, high, hint, unit, low_open)


def _out(arr: NDArray[np.float64]) -> NDArray[np.float64]:
    """Return 0-d results as numpy scalars and arrays unchanged."""
    return arr[()]


# arrays at least this long go to the compiled twins in fvsolver.kernels.properties
KERNEL_MIN_SIZE = 4


def _compiled(kernel, T: NDArray[np.float64], *args) -> NDArray[np.float64]:
    """``kernel(T, *args, out)`` on the flattened array, in T's shape."""
    flat = np.ascontiguousarray(T, dtype=np.float64).ravel()
    out = np.empty_like(flat)
    kernel(flat, *args, out)
    return out.reshape(T.shape)


def _saturation_abc(T: NDArray[np.float64]) -> tuple[NDArray[np.float64], ...]:
    """IF97 theta and the A, B, C polynomials of eq. (30) with their theta-derivatives."""
    n = _N
    theta = T + n[8] / (T - n[9])
    a = theta**2 + n[0] * theta + n[1]
    b = n[2] * theta**2 + n[3] * theta + n[4]
    c = n[5] * theta**2 + n[6] * theta + n[7]
    da = 2.0 * theta + n[0]
    db = 2.0 * n[2] * theta + n[3]
    dc = 2.0 * n[5] * theta + n[6]
    dtheta = 1.0 - n[8] / (T - n[9]) ** 2
    return a, b, c, da, db, dc, dtheta


def saturation_pressure(T: ArrayLike) -> NDArray[np.float64]:
    """Saturation pressure of water by IAPWS-IF97 eq. (30).

    Parameters
    ----------
    T : float or array_like, any shape
        Temperature [K], within 273.15-647.096 K.

    Returns
    -------
    numpy.ndarray or numpy.float64, same shape as ``T``
        Saturation pressure [Pa].

    Raises
    ------
    PropertyError
        If any temperature is outside 273.15-647.096 K or not finite.
    """
    T = _checked(T, "T", T_SATURATION_MIN, CRITICAL_TEMPERATURE, "K",
                 "pass the temperature in kelvin (not Celsius) on the liquid-vapour saturation line")
    if T.size >= KERNEL_MIN_SIZE:
        from fvsolver.kernels import properties as kp  # numba only where arrays are evaluated
        return _compiled(kp.if97_saturation_pressure, T, _N_ARRAY)
    return _out(_saturation_pressure_numpy(T))


def _saturation_pressure_numpy(T: NDArray[np.float64]) -> NDArray[np.float64]:
    """IF97 eq. (30) in NumPy (the twin of ``kernels.properties.if97_saturation_pressure``)."""
    a, b, c, *_ = _saturation_abc(T)
    x = 2.0 * c / (-b + np.sqrt(b**2 - 4.0 * a * c))
    return 1.0e6 * x**4


def dsaturation_pressure_dT(T: ArrayLike) -> NDArray[np.float64]:
    """Analytic temperature derivative of :func:`saturation_pressure`.

    Parameters
    ----------
    T : float or array_like, any shape
        Temperature [K], within 273.15-647.096 K (the derivative is singular
        exactly at the critical point, so the upper limit is exclusive in
        practice).

    Returns
    -------
    numpy.ndarray or numpy.float64, same shape as ``T``
        dp_sat/dT [Pa/K].

    Raises
    ------
    PropertyError
        If any temperature is outside 273.15-647.096 K or not finite.
    """
    T = _checked(T, "T", T_SATURATION_MIN, CRITICAL_TEMPERATURE, "K",
                 "pass the temperature in kelvin (not Celsius) on the liquid-vapour saturation line")
    if T.size >= KERNEL_MIN_SIZE:
        from fvsolver.kernels import properties as kp
        return _compiled(kp.if97_dsaturation_pressure_dT, T, _N_ARRAY)
    return _out(_dsaturation_pressure_dT_numpy(T))


def _dsaturation_pressure_dT_numpy(T: NDArray[np.float64]) -> NDArray[np.float64]:
    """dp_sat/dT in NumPy (the twin of ``kernels.properties.if97_dsaturation_pressure_dT``)."""
    a, b, c, da, db, dc, dtheta = _saturation_abc(T)
    s = np.sqrt(b**2 - 4.0 * a * c)
    den = -b + s
    x = 2.0 * c / den
    ds = (b * db - 2.0 * (a * dc + c * da)) / s
    dx_dtheta = (2.0 * dc * den - 2.0 * c * (-db + ds)) / den**2
    return 1.0e6 * 4.0 * x**3 * dx_dtheta * dtheta


def saturation_temperature(p: ArrayLike) -> NDArray[np.float64]:
    """Saturation temperature of water by the IAPWS-IF97 backward eq. (31).

    Parameters
    ----------
    p : float or array_like, any shape
        Pressure [Pa], within 611.212677 Pa-22.064 MPa.

    Returns
    -------
    numpy.ndarray or numpy.float64, same shape as ``p``
        Saturation temperature [K].

    Raises
    ------
    PropertyError
        If any pressure is outside the saturation line or not finite.
    """
    p = _checked(p, "p", P_SATURATION_MIN, CRITICAL_PRESSURE, "Pa",
                 "pass the pressure in pascal; below 611.2 Pa the vapour would be in equilibrium with ice, "
                 "which this liquid-water formulation does not cover")
    n = _N
    beta = (p * 1.0e-6) ** 0.25
    e = beta**2 + n[2] * beta + n[5]
    f = n[0] * beta**2 + n[3] * beta + n[6]
    g = n[1] * beta**2 + n[4] * beta + n[7]
    d = 2.0 * g / (-f - np.sqrt(f**2 - 4.0 * e * g))
    return _out(0.5 * (n[9] + d - np.sqrt((n[9] + d) ** 2 - 4.0 * (n[8] + n[9] * d))))


def _liquid_temperature(T: ArrayLike) -> NDArray[np.float64]:
    """Validate a liquid-water temperature against the 0-100 C range of the correlations."""
    return _checked(T, "T", T_LIQUID_MIN, T_LIQUID_MAX, "K",
                    "the liquid-water correlations are fitted between 0 and 100 C; pass kelvin inside that range")


def latent_heat(T: ArrayLike) -> NDArray[np.float64]:
    """Specific enthalpy of vaporization of water (VDI Heat Atlas PPDS eq. 12).

    ``L = R Tc (A tau^(1/3) + B tau^(2/3) + C tau + D tau^2 + E tau^6) / M`` with
    ``tau = 1 - T/Tc``. Within 0.2 % of IAPWS-95 between 273.16 and 373.15 K
    (checked in the tests).

    Parameters
    ----------
    T : float or array_like, any shape
        Temperature [K], within 273.15-373.15 K.

    Returns
    -------
    numpy.ndarray or numpy.float64, same shape as ``T``
        Latent heat [J/kg].

    Raises
    ------
    PropertyError
        If any temperature is outside 273.15-373.15 K or not finite.
    """
    T = _liquid_temperature(T)
    if T.size >= KERNEL_MIN_SIZE:
        from fvsolver.kernels import properties as kp
        return _compiled(kp.ppds12_latent_heat, T, _PPDS12_TC, _PPDS12_ARRAY, _R * _PPDS12_TC, MOLAR_MASS)
    return _out(_latent_heat_numpy(T))


def _latent_heat_numpy(T: NDArray[np.float64]) -> NDArray[np.float64]:
    """PPDS eq. 12 in NumPy (the twin of ``kernels.properties.ppds12_latent_heat``)."""
    tau = 1.0 - T / _PPDS12_TC
    a, b, c, d, e = _PPDS12
    molar = _R * _PPDS12_TC * (a * tau ** (1 / 3) + b * tau ** (2 / 3) + c * tau + d * tau**2 + e * tau**6)
    return molar / MOLAR_MASS


def liquid_density(T: ArrayLike) -> NDArray[np.float64]:
    """Density of liquid water at 101.325 kPa (Kell 1975).

    The compressibility of water shifts the density by about 5e-5 relative
    per bar, so the value also serves on the saturation line below 100 C.

    Parameters
    ----------
    T : float or array_like, any shape
        Temperature [K], within 273.15-373.15 K.

    Returns
    -------
    numpy.ndarray or numpy.float64, same shape as ``T``
        Density [kg/m3].

    Raises
    ------
    PropertyError
        If any temperature is outside 273.15-373.15 K or not finite.
    """
    t = _liquid_temperature(T) - 273.15
    num = np.polynomial.polynomial.polyval(t, _KELL_NUM)
    return _out(num / (1.0 + _KELL_DEN * t))


def liquid_heat_capacity(T: ArrayLike) -> NDArray[np.float64]:
    """Isobaric specific heat capacity of liquid water (DIPPR eq. 100, Perry's 8th ed.).

    Within 0.3 % of IAPWS-95 between 273.16 and 373.15 K (checked in the tests).

    Parameters
    ----------
    T : float or array_like, any shape
        Temperature [K], within 273.15-373.15 K.

    Returns
    -------
    numpy.ndarray or numpy.float64, same shape as ``T``
        Heat capacity [J/(kg K)].

    Raises
    ------
    PropertyError
        If any temperature is outside 273.15-373.15 K or not finite.
    """
    T = _liquid_temperature(T)
    molar_per_kmol = np.polynomial.polynomial.polyval(T, _CP_EQ100)
    return _out(molar_per_kmol * 1.0e-3 / MOLAR_MASS)


def _sublimation_log(T):
    """ln(p_subl / p_t) and its derivative in T, IAPWS R14-08 eq. (6)."""
    theta = T / TRIPLE_POINT_TEMPERATURE
    value = sum(a * theta ** (b - 1.0) for a, b in zip(_SUBLIMATION_A, _SUBLIMATION_B))
    slope = sum(a * (b - 1.0) * theta ** (b - 2.0) for a, b in zip(_SUBLIMATION_A, _SUBLIMATION_B))
    return value, slope / TRIPLE_POINT_TEMPERATURE


def sublimation_pressure(T: ArrayLike) -> NDArray[np.float64]:
    """Vapour pressure over ice Ih [Pa], IAPWS R14-08(2011) eq. (6), same shape as ``T``.

    Parameters
    ----------
    T : float or array_like, K, within 150 K to the triple point 273.16 K
    """
    t = _checked(T, "T", T_SUBLIMATION_MIN, TRIPLE_POINT_TEMPERATURE, "K",
                 "pass a temperature of ice in kelvin, at or below the triple point")
    value, _ = _sublimation_log(t)
    return _out(TRIPLE_POINT_PRESSURE * np.exp(value))


def sublimation_temperature(p: ArrayLike) -> NDArray[np.float64]:
    """Frost point [K]: the ice temperature whose sublimation pressure is ``p`` (Newton on
    IAPWS R14-08 eq. (6) in ln p, converged to round-off), same shape as ``p``.

    Parameters
    ----------
    p : float or array_like, Pa, from p_subl(150 K) to the triple-point pressure 611.657 Pa
    """
    # the bound's own round-off is allowed for, so that p_subl(150 K) from any source is accepted
    low = float(TRIPLE_POINT_PRESSURE * np.exp(_sublimation_log(T_SUBLIMATION_MIN)[0])) * (1.0 - 1e-9)
    q = _checked(p, "p", low, TRIPLE_POINT_PRESSURE, "Pa",
                 "pass a vapour pressure in pascal between the frost point at 150 K and the triple point")
    target = np.log(q / TRIPLE_POINT_PRESSURE)
    t = np.full_like(q, TRIPLE_POINT_TEMPERATURE)
    for _ in range(30):  # ln p_subl is smooth and monotone: Newton from the triple point
        value, slope = _sublimation_log(t)
        step = (value - target) / slope
        t = np.clip(t - step, T_SUBLIMATION_MIN, TRIPLE_POINT_TEMPERATURE)
        if np.all(np.abs(step) <= 1e-12 * t):
            break
    return _out(t)
