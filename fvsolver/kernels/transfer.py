"""Outside transfer coefficients of a sphere in air, one scalar at a time (numba).

The device asks for its head's (and body's) convection coefficient h and the cap's mass-transfer
coefficient h_m once per evaluation, at one mean surface temperature: NumPy's per-call overhead
and the property modules' range checks were most of that cost. These kernels are the scalar twins
of ``fvsolver.properties.convection.sphere_convection`` (Churchill natural, Whitaker forced, their
mixed combination) and ``mass_transfer_coefficient`` (Chilton-Colburn) with the moist-air laws of
``fvsolver.properties.moist_air`` they call, written with the same operations in the same order;
``tests/properties/test_transfer_kernel.py`` compares them over the correlations' range.

They check nothing: their callers validate the fixed inputs (diameter, air, pressure, speed) and
the surface temperature's clipping interval once, at set-up, with the checked NumPy functions
(``fvsolver.device.problem.TransferCoefficients``), and clip the surface temperature into that
interval before every call.

Short symbols only here: t temperature (K), p total pressure (Pa), pv vapour partial pressure (Pa),
d diameter (m), u air speed (m/s).
"""
from __future__ import annotations

import numpy as np

from fvsolver.kernels import jit

# modes (fvsolver.properties.convection.MODES, and a given coefficient)
NATURAL, FORCED, MIXED, GIVEN = 0, 1, 2, 3
MODE_CODES = {"natural": NATURAL, "forced": FORCED, "mixed": MIXED, "given": GIVEN}

# fvsolver.properties.moist_air's and convection's constants (repeated here so that the compiled
# cache holds them; tests/properties/test_transfer_kernel.py checks they agree)
R = 8.314462618
M_DRY = 0.028966
M_WATER = 0.01801528
MOLAR_RATIO = 0.621945
CP_DRY = 1006.0
CP_VAPOUR = 1860.0
P_STANDARD = 101325.0
D_REFERENCE = 2.6e-5
SUTHERLAND_BETA = 1.458e-6
SUTHERLAND_S = 110.4
KAPPA_COEFF = 2.64638e-3
KAPPA_S = 245.4
GRAVITY = 9.80665


@jit
def air_density(t, p, pv):
    """Moist air's density, kg/m3 (moist_air.air_density)."""
    return ((p - pv) * M_DRY + pv * M_WATER) / (R * t)


@jit
def air_dynamic_viscosity(t):
    """Sutherland's law, Pa s (moist_air.air_dynamic_viscosity)."""
    return SUTHERLAND_BETA * t**1.5 / (t + SUTHERLAND_S)


@jit
def air_thermal_conductivity(t):
    """W/(m K) (moist_air.air_thermal_conductivity)."""
    return KAPPA_COEFF * t**1.5 / (t + KAPPA_S * 10.0 ** (-12.0 / t))


@jit
def air_heat_capacity(p, pv):
    """J/(kg K) per kg of mixture (moist_air.air_heat_capacity; it does not depend on t)."""
    w = MOLAR_RATIO * pv / (p - pv)
    f = w / (1.0 + w)
    return (1.0 - f) * CP_DRY + f * CP_VAPOUR


@jit
def air_kinematic_viscosity(t, p, pv):
    """m2/s (moist_air.air_kinematic_viscosity)."""
    return air_dynamic_viscosity(t) / air_density(t, p, pv)


@jit
def prandtl_number(t, p, pv):
    """mu c_p / k (moist_air.prandtl_number)."""
    return air_dynamic_viscosity(t) * air_heat_capacity(p, pv) / air_thermal_conductivity(t)


@jit
def lewis_number(t, p, pv):
    """alpha / D of water vapour in air (moist_air.lewis_number)."""
    alpha = air_thermal_conductivity(t) / (air_density(t, p, pv) * air_heat_capacity(p, pv))
    diffusivity = D_REFERENCE * (t / 298.0) ** 1.75 * (P_STANDARD / p)
    return alpha / diffusivity


@jit
def sphere_coefficient(d, ts, ta, p, u, mode, pv_s, pv_a):
    """h (W/(m2 K)) of a sphere in air (convection.sphere_convection's h; mode NATURAL, FORCED or
    MIXED)."""
    tf = 0.5 * (ts + ta)
    pvf = 0.5 * (pv_s + pv_a)
    kf = air_thermal_conductivity(tf)
    prf = prandtl_number(tf, p, pvf)
    nuf = air_kinematic_viscosity(tf, p, pvf)
    drho = abs(air_density(ta, p, pv_a) - air_density(ts, p, pv_s))
    gr = GRAVITY * d**3.0 * drho / (air_density(tf, p, pvf) * (nuf * nuf))
    ra = gr * prf
    re = u * d / air_kinematic_viscosity(ta, p, pv_a)
    nn = 0.0
    if mode != FORCED:
        nn = 2.0 + 0.589 * ra**0.25 / (1.0 + (0.469 / prf) ** (9.0 / 16.0)) ** (4.0 / 9.0)
    nf = 0.0
    if mode != NATURAL:
        ratio = air_dynamic_viscosity(ta) / air_dynamic_viscosity(ts)
        free = 2.0 + (0.4 * np.sqrt(re) + 0.06 * re ** (2.0 / 3.0)) * prandtl_number(ta, p, pv_a) ** 0.4 * ratio**0.25
        nf = free * air_thermal_conductivity(ta) / kf
    if mode == MIXED:
        nu = (nf**3.0 + nn**3.0) ** (1.0 / 3.0)
    else:
        nu = nn + nf
    return nu * kf / d


@jit
def mass_transfer(h, tf, p, lewis, pv):
    """h_m (m/s), Chilton-Colburn (convection.mass_transfer_coefficient); lewis <= 0: from the air."""
    le = lewis if lewis > 0.0 else lewis_number(tf, p, pv)
    rho_cp = air_density(tf, p, pv) * air_heat_capacity(p, pv)
    return h / (rho_cp * le ** (2.0 / 3.0))


@jit
def head_coefficients(d, ts, ta, p, u, mode, h_given, lewis):
    """h (W/(m2 K)) at the surface temperature ts and h_m (m/s) at the film temperature, dry air
    (as the device's context asks for them); mode GIVEN takes h = h_given."""
    h = h_given if mode == GIVEN else sphere_coefficient(d, ts, ta, p, u, mode, 0.0, 0.0)
    return h, mass_transfer(h, 0.5 * (ts + ta), p, lewis, 0.0)


@jit
def transfer_coefficients(d, ts, ta, p, u, mode, h_given, lewis, step):
    """(h, h_m, dh/dts, dh_m/dts): h and h_m as ``head_coefficients`` gives them, the derivatives
    by a central difference of +-step (K; second order, its error O(step^2 h''') plus round-off
    O(eps h / step)), or zero when step <= 0. The one entry point the device calls: each compiled
    entry point costs its own load from the cache when a process starts."""
    h, hm = head_coefficients(d, ts, ta, p, u, mode, h_given, lewis)
    if step <= 0.0:
        return h, hm, 0.0, 0.0
    hp, hmp = head_coefficients(d, ts + step, ta, p, u, mode, h_given, lewis)
    hn, hmn = head_coefficients(d, ts - step, ta, p, u, mode, h_given, lewis)
    return h, hm, (hp - hn) / (2.0 * step), (hmp - hmn) / (2.0 * step)
