"""The device Jacobian against finite differences of the device's own step residual."""
from __future__ import annotations

import numpy as np

from fvsolver.case.build import build
from fvsolver.linear import LowRankUpdate, factorise, solve
from fvsolver.stepper import TimeStepper
from tests.device.helpers import device_case


def state_after(seconds: float):
    setup = build(device_case())
    stepper = TimeStepper(setup.problem, setup.initial, 0.0, seconds, setup.options)
    while stepper.step():
        pass
    return setup.problem, stepper.y.copy(), stepper.t


def fd_jacobian(problem, y, t, alpha0, dt):
    """d/dy of alpha0 m(y) - dt F(y) by forward differences, column by column."""
    F0 = problem.evaluate(y, t).rate
    m0, _ = problem.capacity(y)
    J = np.empty((problem.n, problem.n))
    for j in range(problem.n):
        h = 1e-6 * max(abs(y[j]), 1.0) if j < problem.n_cells else 1e-6 * max(abs(y[j]), 1e-6)
        yp = y.copy()
        yp[j] += h
        mp, _ = problem.capacity(yp)
        J[:, j] = (alpha0 * (mp - m0) - dt * (problem.evaluate(yp, t).rate - F0)) / h
    return J


def test_device_jacobian_gives_newton_a_fast_contraction():
    """Newton with the assembled Jacobian contracts the error by the spectral radius of
    I - J^-1 J_fd per iteration. The Jacobian leaves out only weak dependences and the
    deferred non-orthogonal correction, so the radius is a few hundredths (0.057 here, 0.05-0.08
    measured on the demo head)."""
    problem, y, t = state_after(10.0)
    alpha0, dt = 1.0, 2.0
    ev = problem.evaluate(y, t)
    _, dm = problem.capacity(y)
    J = problem.jacobian(alpha0, dt, dm, ev)
    assert isinstance(J, LowRankUpdate)
    exact = fd_jacobian(problem, y, t, alpha0, dt)
    contraction = np.eye(problem.n) - np.linalg.solve(J.tocsr().toarray(), exact)
    radius = max(abs(np.linalg.eigvals(contraction)))
    assert radius < 0.15
    # the lumped rows (vapour mass, inventories, cap water, second bulb) are exact to the
    # differencing error
    n = problem.n_cells
    lumped = J.tocsr().toarray()[n:]
    assert np.max(np.abs(lumped - exact[n:])) <= 1e-2 * np.max(np.abs(exact[n:]))
    # the rank-one coupling: warming every wall cell by 1 K warms the vapour (the wall mean) and
    # changes every face's condensation; without the update the lumped rows miss it by 4.6 %
    # and the wall rows by 2.7 % (measured), with it by 1e-7 and 0.3 %
    v = np.zeros(problem.n)
    wall = problem.mesh.boundary_cell[problem.inner]
    v[wall] = 1.0
    got, want = J @ v, exact @ v
    assert np.max(np.abs(got[n:] - want[n:])) <= 1e-4 * np.max(np.abs(want[n:]))
    assert np.max(np.abs(got[wall] - want[wall])) <= 1e-2 * np.max(np.abs(want[wall]))
    # and the bordered factor solves the formed product
    b = np.random.default_rng(0).normal(size=problem.n)
    x = solve(factorise(J), b)
    assert np.allclose(J.tocsr() @ x, b, atol=1e-9 * np.max(np.abs(b)))


def test_device_jacobian_is_exact_without_the_deferred_correction():
    """With the non-orthogonal correction off (the one dependence left to the Newton loop), the
    Jacobian of every coupled term, surface elimination and both low-rank couplings included,
    equals central differences of the step residual: each column of the cell temperatures, the
    vapour mass and the inventories to 1e-5 of its largest entry. So a converged step's totals
    balance to round-off (the energy rows' column sums are the heat inflow's derivatives)."""
    problem, y, t = state_after(10.0)
    problem.conduction.correct = False
    alpha0, dt = 1.5, 1.0
    ev = problem.evaluate(y, t)
    _, dm = problem.capacity(y)
    J = problem.jacobian(alpha0, dt, dm, ev).tocsr().toarray()

    def residual(v):
        m, _ = problem.capacity(v)
        return alpha0 * m - dt * problem.evaluate(v, t).rate

    n = problem.n_cells
    content = float(np.max(np.abs(alpha0 * problem.capacity(y)[0])))
    columns = list(range(n)) + [problem.i_mv] + list(problem.i_c)
    for j in columns:
        h = 1e-5 if j < n else (1e-5 * problem.vapour_mass(y) if j == problem.i_mv else 1e-3 * max(abs(y[j]), 1e-4))
        up, down = y.copy(), y.copy()
        up[j] += h
        down[j] -= h
        fd = (residual(up) - residual(down)) / (2 * h)
        # differencing error, and the round-off of the residual's largest terms over 2 h
        assert np.max(np.abs(J[:, j] - fd)) <= 1e-5 * np.max(np.abs(fd)) + 1e-14 * content / h, j


def test_a_whole_devices_jacobian_keeps_one_pattern_standing_and_tipped():
    """The Jacobian is assembled into a pattern recorded once per run (every entry given at every
    call, exact zeros included): tipping the device (the joined vapour spaces' flow and its
    derivatives appear) changes the values only, the factoriser keeps its one ordering, and the
    kept assembly gives what a fresh recording in the tipped state gives."""
    from fvsolver.linear import Factoriser
    from tests.device.cycle_helpers import whole_case
    setup = build(whole_case(time={"end": 1.0}))
    problem = setup.problem
    stepper = TimeStepper(problem, setup.initial, 0.0, 1.0, setup.options)
    while stepper.step():
        pass
    y, t = stepper.y.copy(), stepper.t
    alpha0, dt = 1.5, 0.2
    standing = problem.jacobian(alpha0, dt, problem.capacity(y)[1], problem.evaluate(y, t))
    problem.tipped = True
    problem._context_cache = None
    ev = problem.evaluate(y, t)
    assert ev.extras["joint_flow"] != 0.0  # the tipped state really couples the pool and the head
    dm = problem.capacity(y)[1]
    tipped = problem.jacobian(alpha0, dt, dm, ev)
    assert tipped.system.indices is standing.system.indices  # the same kept pattern
    assert np.abs(tipped.tocsr() - standing.tocsr()).max() > 0.0
    keeper = Factoriser()
    b = np.random.default_rng(2).normal(size=problem.n)
    for J in (standing, tipped):
        assert np.allclose(J @ solve(keeper(J), b), b, atol=1e-8 * np.abs(b).max())
    assert keeper.orderings == 1
    problem._triplets.forget()  # a fresh recording in the tipped state: the same matrix
    again = problem.jacobian(alpha0, dt, dm, ev)
    assert np.array_equal(again.tocsr().toarray(), tipped.tocsr().toarray())
