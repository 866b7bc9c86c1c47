"""The steady state of a problem, by Newton's method."""
from __future__ import annotations

import numpy as np

from fvsolver.errors import SolverError
from fvsolver.linear import Factoriser, solve


def solve_steady(problem, y_guess, time: float = 0.0, tolerance: float = 1e-10, max_iterations: int = 300):
    """Steady state F(y) = 0 by Newton's method (deferred terms converge by iteration).

    Returns
    -------
    y : (n,) steady state
    evaluation : the problem's evaluation at ``y``
    iterations : int
    """
    y = np.array(y_guess, dtype=float)
    lu = None
    factorise = Factoriser()
    for it in range(1, max_iterations + 1):
        ev = problem.evaluate(y, time)
        if lu is None or not problem.linear:
            _, dm = problem.capacity(y)
            lu = factorise(problem.jacobian(0.0, 1.0, dm, ev))
        delta = solve(lu, ev.rate)
        y += delta
        if float(np.max(np.abs(delta))) <= tolerance or (problem.exact_jacobian and it == 1):
            if problem.exact_jacobian:
                ev = problem.evaluate(y, time)
            return y, ev, it
    raise SolverError(
        f"steady solve: no convergence in {max_iterations} Newton iterations (last change "
        f"{float(np.max(np.abs(delta))):.3e}); check for a strongly nonlinear property or boundary condition"
    )
