"""The per-face surface-temperature solve of flux patches."""
from __future__ import annotations

import numpy as np
from scipy.optimize import brentq

from fvsolver.boundary import Convection, Radiation
import fvsolver.surface_balance as surface_balance


class Counting:
    """A boundary term that counts how many faces it was evaluated on."""

    def __init__(self, term):
        self.term, self.faces_evaluated, self.calls = term, 0, 0

    def heat_flux(self, T_s, time, centres):
        self.faces_evaluated += T_s.size
        self.calls += 1
        return self.term.heat_flux(T_s, time, centres)


def setup(n=40, seed=3):
    rng = np.random.default_rng(seed)
    kappa = 50.0 + 2000.0 * rng.random(n)
    t_foot = 280.0 + 60.0 * rng.random(n)
    terms = [Counting(Radiation(0.9, 250.0)), Convection(12.0, 300.0)]
    return terms, kappa, t_foot, np.zeros((n, 2))


def roots(terms, kappa, t_foot, centres):
    """The surface balance solved face by face with scipy's brentq (the reference)."""
    out = []
    for i in range(kappa.size):
        def f(x):
            q = sum(np.asarray(t.heat_flux(np.array([x]), 0.0, centres[i:i + 1])[0]).ravel()[0] for t in terms)
            return kappa[i] * (x - t_foot[i]) - q
        out.append(brentq(f, 150.0, 450.0, xtol=1e-13, rtol=1e-15))
    return np.array(out)


def test_surface_solve_matches_brentq_and_converges_quadratically():
    terms, kappa, t_foot, centres = setup()
    exact = roots([t.term if isinstance(t, Counting) else t for t in terms], kappa, t_foot, centres)
    ts = surface_balance.solve_surface(terms, kappa, t_foot, None, 0.0, centres, None, None)
    assert np.max(np.abs(ts - exact)) < 1e-10
    # Newton from the cell temperature: a handful of evaluations per face, bracket included
    assert terms[0].faces_evaluated <= 8 * kappa.size


def test_a_guess_on_the_root_is_kept_without_bisecting():
    """A guess that is already the root (the previous Newton iterate of a converged step)
    used to make each later Newton target land on the bracket end and be refused, so the
    solve bisected for ~50 iterations; the closed bracket accepts it at once."""
    terms, kappa, t_foot, centres = setup()
    exact = surface_balance.solve_surface(terms, kappa, t_foot, None, 0.0, centres, None, None)
    terms[0].faces_evaluated = terms[0].calls = 0
    again = surface_balance.solve_surface(terms, kappa, t_foot, exact, 0.0, centres, None, None)
    assert np.max(np.abs(again - exact)) < 1e-10
    assert terms[0].calls <= 6
    assert terms[0].faces_evaluated <= 4 * kappa.size
