"""Property equations evaluated face by face (numba): the surface solves call them a few times per
Newton iteration on a few dozen faces, where NumPy's per-call overhead is most of the cost.

Each has a NumPy twin in its property module (``fvsolver.properties.water._saturation_pressure_numpy``
and the like), written with the same operations in the same order; the tests compare them.
Short symbols only here: t temperature (K), n coefficients, out the result.
"""
from __future__ import annotations

import numpy as np

from fvsolver.kernels import jit


@jit
def if97_saturation_pressure(T, n, out):
    """IAPWS-IF97 eq. (30): p_sat (Pa)."""
    for i in range(T.shape[0]):
        t = T[i]
        th = t + n[8] / (t - n[9])
        a = th**2 + n[0] * th + n[1]
        b = n[2] * th**2 + n[3] * th + n[4]
        c = n[5] * th**2 + n[6] * th + n[7]
        x = 2.0 * c / (-b + np.sqrt(b**2 - 4.0 * a * c))
        out[i] = 1.0e6 * x**4


@jit
def if97_with_slope(t, n):
    """p_sat (Pa) and dp_sat/dT (Pa/K) of water at one temperature, IAPWS-IF97 eq. (30)."""
    th = t + n[8] / (t - n[9])
    a = th**2 + n[0] * th + n[1]
    b = n[2] * th**2 + n[3] * th + n[4]
    c = n[5] * th**2 + n[6] * th + n[7]
    da = 2.0 * th + n[0]
    db = 2.0 * n[2] * th + n[3]
    dc = 2.0 * n[5] * th + n[6]
    dth = 1.0 - n[8] / (t - n[9]) ** 2
    s = np.sqrt(b**2 - 4.0 * a * c)
    den = -b + s
    x = 2.0 * c / den
    ds = (b * db - 2.0 * (a * dc + c * da)) / s
    dx = (2.0 * dc * den - 2.0 * c * (-db + ds)) / den**2
    return 1.0e6 * x**4, 1.0e6 * 4.0 * x**3 * dx * dth


@jit
def if97_dsaturation_pressure_dT(T, n, out):
    """The analytic T-derivative of IAPWS-IF97 eq. (30), Pa/K."""
    for i in range(T.shape[0]):
        out[i] = if97_with_slope(T[i], n)[1]


@jit
def ppds12_latent_heat(T, tc, n, r_tc, m, out):
    """PPDS eq. 12: L = R Tc (A tau^1/3 + B tau^2/3 + C tau + D tau^2 + E tau^6) / M, tau = 1 - T/Tc."""
    for i in range(T.shape[0]):
        tau = 1.0 - T[i] / tc
        out[i] = r_tc * (n[0] * tau ** (1 / 3) + n[1] * tau ** (2 / 3) + n[2] * tau + n[3] * tau**2
                         + n[4] * tau**6) / m


@jit
def wagner_pressure(T, tc, pc, n, out):
    """Wagner's vapour-pressure form, ln(p/pc) = (a tau + b tau^1.5 + c tau^2.5 + d tau^5) Tc / T."""
    for i in range(T.shape[0]):
        tau = 1.0 - T[i] / tc
        f = n[0] * tau + n[1] * tau**1.5 + n[2] * tau**2.5 + n[3] * tau**5
        out[i] = pc * np.exp(f * tc / T[i])


@jit
def wagner_dlnp_dT(T, tc, n, out):
    """d ln(p_sat) / dT of Wagner's form, 1/K."""
    for i in range(T.shape[0]):
        tau = 1.0 - T[i] / tc
        f = n[0] * tau + n[1] * tau**1.5 + n[2] * tau**2.5 + n[3] * tau**5
        df = n[0] + 1.5 * n[1] * tau**0.5 + 2.5 * n[2] * tau**1.5 + 5.0 * n[3] * tau**4
        tr = T[i] / tc
        out[i] = -(df * tr + f) / (tc * tr**2)
