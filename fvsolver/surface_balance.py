"""The surface balance of a flux patch, solved face by face for the surface temperature.

.. math:: \\kappa (T_s - T_P) = \\sum_m q_m(T_s), \\qquad \\kappa = k_P / \\delta
"""
from __future__ import annotations

import numpy as np

SURFACE_ITERATIONS = 50


def solve_surface(terms, kappa, t_foot, guess, time, centres, faces, context):
    """Surface temperatures solving kappa (T_s - T_foot) = q(T_s), face by face (vectorised).

    F(T_s) = kappa (T_s - T_foot) - q(T_s) increases with T_s for every physical term, so a
    Newton iteration safeguarded by bisection inside a bracket always converges, even where
    q(T_s) turns sharply (a face switching from condensing to dry).
    """
    ts = t_foot.copy() if guess is None else guess.copy()
    lo, hi = ts - 0.5, ts + 0.5

    def residual(idx, x):
        """F and dF/dT_s at ``x`` on the faces ``idx`` (indices into this patch's faces)."""
        sub = faces[idx] if faces is not None else None
        q, dq = term_sum(terms, x, time, centres[idx], sub, context)
        return kappa[idx] * (x - t_foot[idx]) - q, kappa[idx] - dq

    every = np.arange(ts.size)
    # both ends in one call of the terms (they act face by face): half the calls, the same values
    f_both = residual(np.concatenate([every, every]), np.concatenate([lo, hi]))[0]
    f_lo, f_hi = f_both[: ts.size].copy(), f_both[ts.size:].copy()
    for _ in range(60):  # widen the bracket until F(lo) <= 0 <= F(hi), on the faces that need it
        bad_lo, bad_hi = np.flatnonzero(f_lo > 0.0), np.flatnonzero(f_hi < 0.0)
        if not (bad_lo.size or bad_hi.size):
            break
        width = hi - lo
        lo[bad_lo] -= width[bad_lo]
        hi[bad_hi] += width[bad_hi]
        f_both = residual(np.concatenate([bad_lo, bad_hi]), np.concatenate([lo[bad_lo], hi[bad_hi]]))[0]
        f_lo[bad_lo], f_hi[bad_hi] = f_both[: bad_lo.size], f_both[bad_lo.size:]
    active = np.arange(ts.size)
    for _ in range(SURFACE_ITERATIONS * 2):
        # only the faces not yet converged are iterated (a face switching from condensing to
        # dry converges more slowly than the rest)
        x, l, h, fl, fh = ts[active], lo[active], hi[active], f_lo[active], f_hi[active]
        f, df = residual(active, x)
        below = f <= 0.0
        l, fl = np.where(below, x, l), np.where(below, f, fl)
        h, fh = np.where(~below, x, h), np.where(~below, f, fh)
        newton = x - f / df
        # outside the bracket (across a kink), fall back on the secant through the bracket
        secant = (l * fh - h * fl) / np.where(fh - fl > 0.0, fh - fl, 1.0)
        secant = np.where((secant > l) & (secant < h), secant, 0.5 * (l + h))
        # the closed bracket: an end that an earlier iterate put on the root is a valid target
        new = np.where((newton >= l) & (newton <= h), newton, secant)
        done = (np.abs(new - x) <= 2e-15 * np.abs(x)) | (h - l <= 4e-15 * np.abs(x))
        ts[active], lo[active], hi[active], f_lo[active], f_hi[active] = new, l, h, fl, fh
        active = active[~done]
        if active.size == 0:
            break
    return ts


def term_sum(terms, ts, time, centres, faces, context):
    """Sum of the flux terms' q and dq/dT_s on one patch's faces."""
    g0 = np.zeros_like(ts)
    g1 = np.zeros_like(ts)
    for term in terms:
        if getattr(term, "coupled", False):
            a, b = term.heat_flux(ts, time, centres, faces, context)
        else:
            a, b = term.heat_flux(ts, time, centres)
        g0 += a
        g1 += b
    return g0, g1
