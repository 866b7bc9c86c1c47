"""The coupled surfaces' balances, solved face by face in one compiled loop (numba).

Every face of a coupled patch carries one row of parameters (``PARAMETERS`` columns) and a
kind: a dry surface (convection, radiation, an imposed flux; a pool's contact is convection to
the pool's temperature), the wet cap (the same plus evaporation of water) or a condensing wall
(Hertz-Knudsen-Schrage condensation of the working fluid, q = L j). The balance

.. math:: \\kappa (T_s - T_P) = q(T_s)

is solved by Newton's method safeguarded by bisection inside a bracket that its iterates build
(q decreases with T_s for every kind, so the root is unique). The Python twin is the terms' own ``heat_flux`` through
``fvsolver.surface_balance.solve_surface``; the tests compare them.

Short symbols only here: t temperature (K), q heat flux into the body (W/m2), m mass flux
(kg/(m2 s); condensation positive on a wall, evaporation positive on the cap), L latent heat.
"""
from __future__ import annotations

import numpy as np

from fvsolver.kernels import jit
from fvsolver.kernels.conduction import cell_gradients, correction_flux_sum, face_flux_sum
from fvsolver.kernels.properties import if97_with_slope as _if97

# kinds of face
DRY, CAP, WALL = 0, 1, 2
# parameter columns (per face)
H, T_AIR, RADIATION, T_SURROUNDINGS, EXTRA, EVAPORATION, RHO_AIR, P_VAPOUR, INVENTORY = range(9)
PARAMETERS = 9
# output columns (per face)
TS, Q, DQ, M, DM, DM_DP, DM_DC, LATENT = range(8)
OUTPUTS = 8
# fluid constants of a condensing wall (one vector)
(BETA, FILM_REFERENCE, T_LOW, T_HIGH, WAGNER_TC, WAGNER_PC, WA, WB, WC, WD, LATENT_TC, L0, L1, L2, L3, L4,
 LATENT_RTC, MOLAR_MASS, FLUX_SMOOTHING) = range(19)
FLUID_CONSTANTS = 19
# water: IAPWS-IF97 region 4 and PPDS12, from fvsolver.properties.water
WATER_T_MIN, WATER_T_MAX = 273.16, 372.0


def water_constants() -> tuple[np.ndarray, np.ndarray]:
    """IF97's n1..n10 and [PPDS12 tc, R tc, M, M/R, A..E] of water, from fvsolver.properties.water."""
    from fvsolver.properties import water as w

    latent = np.array([w._PPDS12_TC, w._R * w._PPDS12_TC, w.MOLAR_MASS, w.MOLAR_MASS / w._R, *w._PPDS12])
    return np.ascontiguousarray(w._N_ARRAY, dtype=np.float64), latent


@jit
def _ppds12(t, tc, c0, c1, c2, c3, c4, r_tc, m):
    """Latent heat (J/kg) and its T-derivative, PPDS eq. 12."""
    tau = 1.0 - t / tc
    # one fractional power: tau^(2/3), tau^(-1/3) and tau^(-2/3) follow from tau^(1/3) (round-off apart)
    r1 = tau ** (1 / 3)
    r2 = r1 * r1
    lat = r_tc * (c0 * r1 + c1 * r2 + c2 * tau + c3 * tau**2 + c4 * tau**6) / m
    dtau = (c0 / 3.0 / r2 + 2.0 * c1 / 3.0 / r1 + c2 + 2.0 * c3 * tau
            + 6.0 * c4 * tau**5)
    return lat, -r_tc * dtau / (m * tc)


@jit
def _face_flux(kind, ts, p, fl, water, wl):
    """q, dq/dT_s, m, dm/dT_s, dm/dp_v, dm/dc and L of one face at T_s = ts."""
    q = p[H] * (p[T_AIR] - ts) + p[RADIATION] * (p[T_SURROUNDINGS] ** 4 - ts**4) + p[EXTRA]
    dq = -p[H] - 4.0 * p[RADIATION] * ts**3
    m = 0.0
    dm = 0.0
    dm_dp = 0.0
    dm_dc = 0.0
    lat = 0.0
    if kind == CAP:
        t = min(max(ts, WATER_T_MIN), WATER_T_MAX)
        ps, dps = _if97(t, water)
        k = wl[3]  # M_w / R
        rho = k * ps / t
        drho = k * (dps / t - ps / t**2)
        m = p[EVAPORATION] * (rho - p[RHO_AIR])
        dm = p[EVAPORATION] * drho
        lat, dlat = _ppds12(t, wl[0], wl[4], wl[5], wl[6], wl[7], wl[8], wl[1], wl[2])
        q -= lat * m
        dq -= lat * dm + dlat * m
    elif kind == WALL:
        t = min(max(ts, fl[T_LOW]), fl[T_HIGH])
        tc = fl[WAGNER_TC]
        tau = 1.0 - t / tc
        f = fl[WA] * tau + fl[WB] * tau**1.5 + fl[WC] * tau**2.5 + fl[WD] * tau**5
        df = fl[WA] + 1.5 * fl[WB] * tau**0.5 + 2.5 * fl[WC] * tau**1.5 + 5.0 * fl[WD] * tau**4
        ps = fl[WAGNER_PC] * np.exp(f * tc / t)
        tr = t / tc
        dps = ps * (-(df * tr + f) / (tc * tr**2))
        root = np.sqrt(t)
        excess = p[P_VAPOUR] - ps
        beta = fl[BETA]
        raw = beta * excess / root
        draw_dt = -beta * (dps / root + 0.5 * excess / (t * root))
        draw_dp = beta / root
        # j = phi raw + (1 - phi) s(raw): s a smooth positive part of raw (width eps), so only the
        # re-evaporating part is limited by phi = c / (c + c_ref), what the face holds
        c = max(p[INVENTORY], 0.0)
        cr = fl[FILM_REFERENCE]
        phi = c / (c + cr)
        dphi = cr / (c + cr) ** 2  # the right derivative at c = 0
        eps = fl[FLUX_SMOOTHING]
        x = raw / eps
        if x > 40.0:
            plus = raw
            sig = 1.0
        elif x < -40.0:
            plus = eps * np.exp(x)
            sig = np.exp(x)
        else:
            plus = eps * np.log1p(np.exp(x))
            sig = 1.0 / (1.0 + np.exp(-x))
        m = phi * raw + (1.0 - phi) * plus
        dj_draw = phi + (1.0 - phi) * sig
        dm = dj_draw * draw_dt
        dm_dp = dj_draw * draw_dp
        dm_dc = (raw - plus) * dphi
        lat, dlat = _ppds12(t, fl[LATENT_TC], fl[L0], fl[L1], fl[L2], fl[L3], fl[L4], fl[LATENT_RTC], fl[MOLAR_MASS])
        q += lat * m
        dq += lat * dm + dlat * m
    return q, dq, m, dm, dm_dp, dm_dc, lat


@jit
def _solve_face(kind, p, kp, tf, x, fluid, water, water_latent):
    """T_s of one face: kappa (T_s - T_foot) = q(T_s) from the start x (K), and ``_face_flux``'s
    values there."""
    # Newton's method on F = kappa (T_s - T_foot) - q(T_s), increasing in T_s: every iterate
    # sets one side of the bracket [lo, hi] by the sign of F there. A side not yet known is
    # approached by Newton steps no longer than `reach` (doubled at every such step, as a
    # bracket is widened); once both are known, a step leaving them is a secant step or a
    # halving. From a good guess (the last evaluation's) this costs the Newton iterations only.
    lo = -np.inf
    hi = np.inf
    flo = -1.0
    fhi = 1.0
    reach = 0.5
    for _ in range(400):
        q, dq, m, dm, dm_dp, dm_dc, lat = _face_flux(kind, x, p, fluid, water, water_latent)
        f = kp * (x - tf) - q
        df = kp - dq
        if f <= 0.0:
            lo = x
            flo = f
        else:
            hi = x
            fhi = f
        new = x - f / df if df > 0.0 else (x + reach if f <= 0.0 else x - reach)
        if hi == np.inf or lo == -np.inf:  # one side unknown: a bounded step towards it
            if new > x + reach:
                new = x + reach
            elif new < x - reach:
                new = x - reach
            if not (new >= lo and new <= hi):
                new = x + reach if f <= 0.0 else x - reach
            reach *= 2.0
        elif not (new >= lo and new <= hi):  # outside the bracket (across a kink): secant, or halve
            den = fhi - flo
            new = (lo * fhi - hi * flo) / den if den > 0.0 else 0.5 * (lo + hi)
            if not (new > lo and new < hi):
                new = 0.5 * (lo + hi)
        done = abs(new - x) <= 2e-15 * abs(x) or hi - lo <= 4e-15 * abs(x)
        if done and new == x:
            # the last step rounded away (the usual end of Newton's quadratic run): the flux just
            # computed is the answer's, no evaluation at the same point again
            return x, q, dq, m, dm, dm_dp, dm_dc, lat
        x = new
        if done:
            break
    q, dq, m, dm, dm_dp, dm_dc, lat = _face_flux(kind, x, p, fluid, water, water_latent)
    return x, q, dq, m, dm, dm_dp, dm_dc, lat


@jit
def _store(i, x, q, dq, m, dm, dm_dp, dm_dc, lat, out):
    out[i, TS] = x
    out[i, Q] = q
    out[i, DQ] = dq
    out[i, M] = m
    out[i, DM] = dm
    out[i, DM_DP] = dm_dp
    out[i, DM_DC] = dm_dc
    out[i, LATENT] = lat


@jit
def solve_surfaces(kinds, params, kappa, t_foot, guess, fluid, water, water_latent, out):
    """Surface temperatures of coupled faces: kappa (T_s - T_foot) = q(T_s), face by face.

    kinds : (n,) int64; params : (n, PARAMETERS); kappa, t_foot, guess : (n,) (guess <= 0: start
    at t_foot); fluid : (FLUID_CONSTANTS,); water : IF97 n1..n10; water_latent : PPDS12 tc, R tc,
    M, M/R, A..E (``water_constants()``); out : (n, OUTPUTS).
    """
    for i in range(kinds.shape[0]):
        tf = t_foot[i]
        x, q, dq, m, dm, dm_dp, dm_dc, lat = _solve_face(kinds[i], params[i], kappa[i], tf,
                                                         guess[i] if guess[i] > 0.0 else tf, fluid, water,
                                                         water_latent)
        _store(i, x, q, dq, m, dm, dm_dp, dm_dc, lat, out)


@jit
def solve_boundary_faces(kinds, params, faces, kappa, t_foot, guess, fluid, water, water_latent, t_s, q,
                         dq_dtp, g1, terms):
    """``solve_surfaces`` on the boundary faces ``faces`` (n,), gathering and scattering in place:
    kappa, t_foot, guess (n_boundary,) (guess empty: start at t_foot); writes t_s, the heat flux
    into the body q = kappa (T_s - T_foot), dq/dT_P = kappa g1 / (kappa - g1), g1 = dq/dT_s
    (n_boundary,) and the rows of terms (n_boundary, OUTPUTS) at ``faces``."""
    for i in range(faces.shape[0]):
        b = faces[i]
        kp = kappa[b]
        tf = t_foot[b]
        x0 = tf
        if guess.shape[0] > 0 and guess[b] > 0.0:
            x0 = guess[b]
        x, qs, d, m, dm, dm_dp, dm_dc, lat = _solve_face(kinds[i], params[i], kp, tf, x0, fluid, water, water_latent)
        _store(b, x, qs, d, m, dm, dm_dp, dm_dc, lat, terms)
        t_s[b] = x
        g1[b] = d
        q[b] = kp * (x - tf)
        dq_dtp[b] = kp * d / (kp - d)


@jit
def evaluate_heat_rate(T, g, owner, neighbour, boundary_cell, boundary_areas, correct, lsq_owner, lsq_neighbour,
                       lsq_boundary, face_k, weight_owner, tangent, kinds, params, faces, kappa, guess, fluid, water,
                       water_latent, work, dq_dtp, grad, rate, bjac, t_s, q, g1, boundary_heat, terms):
    """A conduction problem's whole heat rate in one call, where its only boundary work is the
    coupled faces (``faces``) and term-less (insulated) faces: the two-point face fluxes
    (``kernels.conduction.face_flux_sum``), the coupled faces' surface solve
    (``solve_boundary_faces`` at the cells' own temperatures), with ``correct`` the least-squares
    gradients and the non-orthogonal correction (``cell_gradients``, ``correction_flux_sum``, called
    here), and the boundary faces' heat and dq/dT_P summed into their cells (the NumPy bincounts),
    each in the order of the calls it replaces, so the values are theirs bit for bit.

    T (n,); g, owner, neighbour, face_k, weight_owner (n_faces,), tangent, lsq_owner, lsq_neighbour
    (n_faces, 2); boundary_cell, boundary_areas, kappa, guess (n_boundary,) (guess empty: start at
    T_P), lsq_boundary (n_boundary, 2); kinds, params, faces as ``solve_boundary_faces``. Work arrays:
    work (n,), dq_dtp (n_boundary,), grad (n, 2). Writes rate, bjac (n,), t_s, q, g1, boundary_heat
    (n_boundary,) and terms (n_boundary, OUTPUTS) (NaN off the coupled faces).
    """
    n = rate.shape[0]
    nb = boundary_cell.shape[0]
    for i in range(n):
        rate[i] = 0.0
        bjac[i] = 0.0
        work[i] = 0.0
    face_flux_sum(T, owner, neighbour, g, rate)
    for b in range(nb):
        t_s[b] = T[boundary_cell[b]]
        q[b] = 0.0
        dq_dtp[b] = 0.0
        g1[b] = 0.0
        for c in range(terms.shape[1]):
            terms[b, c] = np.nan
    solve_boundary_faces(kinds, params, faces, kappa, t_s, guess, fluid, water, water_latent, t_s, q, dq_dtp, g1,
                         terms)
    if correct:
        cell_gradients(T, owner, neighbour, lsq_owner, lsq_neighbour, boundary_cell, lsq_boundary, t_s, grad)
        correction_flux_sum(grad, owner, neighbour, face_k, weight_owner, tangent, rate)
    # the boundary's sums per cell first, then added (as rate += np.bincount(...))
    for b in range(nb):
        heat = boundary_areas[b] * q[b]
        boundary_heat[b] = heat
        work[boundary_cell[b]] += heat
        bjac[boundary_cell[b]] += boundary_areas[b] * dq_dtp[b]
    for i in range(n):
        rate[i] += work[i]
