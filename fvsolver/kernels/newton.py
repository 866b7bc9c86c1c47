"""The time stepper's per-iteration arithmetic over the unknowns (numba): a residual, an update's
size, the extrapolating predictor and the error estimate, each one pass instead of a few NumPy calls
(on a few hundred unknowns those calls' overhead is most of their cost).

Each is written with the NumPy sequence's operations in the same order, so the results are the
same bit for bit; the twins in ``fvsolver.kernels.reference`` are what the tests compare against.
Short symbols only here: m content, F rate, d update, s scale, w weight.
"""
from __future__ import annotations

import numpy as np

from fvsolver.kernels import jit


@jit
def negative_residual(a0, m, hist, dt, rate, out):
    """out = -(a0 m + hist - dt F): the right-hand side of a Newton iteration."""
    for i in range(out.shape[0]):
        out[i] = -((a0 * m[i] + hist[i]) - dt * rate[i])


@jit
def update_size(delta, scale, weight):
    """(max |d| / s, max |d| w, every d finite); w may be empty (not wanted: 0 returned)."""
    norm = 0.0
    weighted = 0.0
    finite = True
    use_weight = weight.shape[0] == delta.shape[0]
    for i in range(delta.shape[0]):
        d = delta[i]
        if not np.isfinite(d):
            finite = False
        a = abs(d)
        r = a / scale[i]
        if r > norm:
            norm = r
        if use_weight:
            r = a * weight[i]
            if r > weighted:
                weighted = r
    return norm, weighted, finite


@jit
def predict_quadratic(y0, y1, y2, l1, l2, out):
    """out = y0 + l1 (y1 - y0) + l2 (y2 - y0): the quadratic extrapolation through three states."""
    for i in range(out.shape[0]):
        out[i] = (y0[i] + l1 * (y1[i] - y0[i])) + l2 * (y2[i] - y0[i])


@jit
def error_norm(factor, y, pred, tolerance, scale, relative):
    """max(factor |y - pred| / (tolerance s + relative |y|)): the step's error in tolerance units."""
    worst = 0.0
    for i in range(y.shape[0]):
        e = (factor * abs(y[i] - pred[i])) / (tolerance * scale[i] + relative * abs(y[i]))
        if e > worst or e != e:
            worst = e
    return worst
