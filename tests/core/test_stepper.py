"""Time-stepper verification: temporal orders, adaptive control, stop times, steady state."""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest
import scipy.sparse as sp

from fvsolver.boundary import FixedTemperature, PatchCondition
from fvsolver.conduction import ConductionProblem, VolumetricSource
from fvsolver.materials import Material, TemperatureFunction
from fvsolver.stepper import StepperOptions, TimeStepper
from tests.core.helpers import rectangle_mesh

RHO, C, K, OMEGA = 1000.0, 1.0, 1.0, 1.0


def exact(x, t):
    """T = 300 + (1 + sin(omega t)/2) 10 x: linear in space, so the spatial error is zero."""
    return 300.0 + (1.0 + 0.5 * np.sin(OMEGA * t)) * 10.0 * x[:, 0]


def manufactured_problem(heat_capacity=None):
    mesh = rectangle_mesh(8, 2)
    cap = heat_capacity or TemperatureFunction.constant(C)
    mat = Material("solid", RHO, TemperatureFunction.constant(K), cap)

    def source(x, t):  # rho c(T) dT/dt, since the Laplacian of T vanishes
        return RHO * cap.value(exact(x, t)) * 0.5 * OMEGA * np.cos(OMEGA * t) * 10.0 * x[:, 0]

    conditions = [PatchCondition("left", (FixedTemperature(exact),)), PatchCondition("right", (FixedTemperature(exact),)),
                  PatchCondition("bottom", ()), PatchCondition("top", ())]
    return ConductionProblem(mesh, {"solid": mat}, conditions, (VolumetricSource(source),))


def temporal_order(scheme, heat_capacity=None):
    steps = np.array([0.1, 0.05, 0.025, 0.0125])
    errors = []
    for dt in steps:
        problem = manufactured_problem(heat_capacity)
        x = problem.mesh.cell_centres
        stepper = TimeStepper(problem, exact(x, 0.0), 0.0, 2.0,
                              StepperOptions(scheme=scheme, adaptive=False, initial_step=dt, newton_tolerance=1e-12))
        stepper.run()
        assert stepper.balance_error["energy"] < 1e-10
        errors.append(np.abs(stepper.y - exact(x, 2.0)).max())
    return np.polyfit(np.log(steps), np.log(errors), 1)[0], errors


def test_backward_euler_is_first_order():
    order, errors = temporal_order("backward_euler")
    assert abs(order - 1.0) < 0.15 and errors[-1] < 0.05


def test_bdf2_is_second_order():
    order, errors = temporal_order("bdf2")
    assert order >= 1.9 and errors[-1] < 5e-4


def test_bdf2_is_second_order_with_temperature_dependent_heat_capacity():
    cap = TemperatureFunction("polynomial", (-0.5, 0.005))
    order, _ = temporal_order("bdf2", cap)
    assert order >= 1.9


@pytest.mark.parametrize("scheme, slope", [("backward_euler", 0.5), ("bdf2", 2.0 / 3.0)])
def test_adaptive_error_falls_with_tolerance(scheme, slope):
    """Per-step control of a local error ~ dt^(q+1) gives a global error ~ tol^(q/(q+1)).

    Common practice (Hairer, Norsett & Wanner, Solving ODEs I, sec. II.4, from memory).
    """
    errors = []
    tolerances = (1e-2, 1e-3, 1e-4)
    for tol in tolerances:
        problem = manufactured_problem()
        x = problem.mesh.cell_centres
        stepper = TimeStepper(problem, exact(x, 0.0), 0.0, 2.0,
                              StepperOptions(scheme=scheme, tolerance=tol, initial_step=1e-3))
        stepper.run()
        errors.append(np.abs(stepper.y - exact(x, 2.0)).max())
    assert errors[0] > errors[1] > errors[2]
    observed = np.polyfit(np.log(tolerances), np.log(errors), 1)[0]
    assert abs(observed - slope) < 0.15


def test_steps_land_on_stop_times_and_end_time():
    problem = manufactured_problem()
    stops = [0.3, 0.77, 1.5]
    stepper = TimeStepper(problem, exact(problem.mesh.cell_centres, 0.0), 0.0, 2.0,
                          StepperOptions(initial_step=0.13), stop_times=stops)
    seen = []
    while stepper.step():
        seen.append(stepper.t)
    assert stepper.t == 2.0 and stepper.status == "finished"
    for s in stops:
        assert s in seen


def test_fixed_step_reuses_one_factorisation_per_scheme_coefficient():
    problem = manufactured_problem()
    stepper = TimeStepper(problem, exact(problem.mesh.cell_centres, 0.0), 0.0, 2.0,
                          StepperOptions(scheme="bdf2", adaptive=False, initial_step=0.1))
    stepper.run()
    assert stepper.counters.steps == 20
    assert stepper.counters.factorisations == 2  # the backward-Euler start and the BDF2 matrix


class LaggedDecay:
    """dy/dt = -lam y whose Jacobian leaves the decay out (backward Euler, J = 1), so Newton
    contracts the error by dt lam per iteration."""

    n = 1
    exact_jacobian = False
    constant_jacobian = False

    def __init__(self, lam: float):
        self.lam = lam

    def balance_groups(self) -> dict:
        return {}

    def capacity(self, y):
        return y.copy(), np.ones(1)

    def evaluate(self, y, t):
        return SimpleNamespace(rate=-self.lam * y, inflow=lambda g: 0.0, gross=lambda g: 0.0)

    def jacobian(self, a0, dt, dm, ev):
        return sp.csr_matrix(np.array([[a0 * dm[0]]]))


def test_a_newton_iteration_that_stalls_is_cut_short_and_the_step_shortened():
    """At dt = 0.5 the lagged Jacobian contracts by 0.9 per iteration: the stepper gives up
    after a few iterations (not max_newton_iterations = 30), retries at dt / 4 (contraction
    0.225) and still lands on the backward-Euler answer (1 + lam dt)^-steps."""
    problem = LaggedDecay(1.8)
    stepper = TimeStepper(problem, np.array([1.0]), 0.0, 1.0,
                          StepperOptions(initial_step=0.5, scheme="backward_euler", adaptive=False))
    stepper.step()
    assert stepper.counters.newton_failures == 1
    assert stepper.counters.newton_iterations <= 20  # 5 refused + ~14 at dt = 0.125
    assert stepper.t == pytest.approx(0.125)
    stepper.run()
    assert stepper.y[0] == pytest.approx((1.0 + 1.8 * 0.125) ** -8, rel=1e-8)


class LeakingStore:
    """A store of W0 = 6.4 g that loses a few nanograms a step, dW/dt = -k (W/W0)^2 (a wet cap
    holding grams that evaporates micrograms a second), with its exact Jacobian. Each step's
    change is about 1e-7 of the content: its balance is known only to the content's round-off,
    about 1e-9 of the change."""

    n = 1
    exact_jacobian = False
    constant_jacobian = False
    tolerance_scale = np.array([1e-8])  # kg

    def __init__(self, w0: float = 6.4e-3, k: float = 1e-7):
        self.w0, self.k = w0, k

    def balance_groups(self) -> dict:
        return {"water": slice(0, 1)}

    def capacity(self, y):
        return y.copy(), np.ones(1)

    def _rate(self, y):
        return -self.k * (y / self.w0) ** 2

    def evaluate(self, y, t):
        rate = self._rate(y)
        return SimpleNamespace(rate=rate, inflow=lambda g: float(rate[0]), gross=lambda g: abs(float(rate[0])))

    def jacobian(self, a0, dt, dm, ev):
        return sp.csr_matrix(np.array([[a0 * dm[0] + dt * 2.0 * self.k * self.y_last / self.w0**2]]))


def test_a_balance_at_the_round_off_of_its_total_ends_the_newton_loop():
    """A total whose change per step is a few ulps of its content balances only to that round-off
    (here about 1e-9 of the change, above the 1e-10 balance tolerance): Newton stops as soon as
    the balance is at that level, instead of iterating on to see it stall (2 more iterations a
    step). The answer is BDF2's, the balance error stays at round-off."""
    problem = LeakingStore()
    evaluate = problem.evaluate

    def remember(y, t):
        problem.y_last = float(y[0])
        return evaluate(y, t)

    problem.evaluate = remember
    stepper = TimeStepper(problem, np.array([problem.w0]), 0.0, 0.06,
                          StepperOptions(scheme="bdf2", adaptive=False, initial_step=0.003))
    stepper.run()
    c = stepper.counters
    assert c.steps == 20 and c.newton_failures == 0
    assert c.newton_iterations <= 2 * c.steps + 1
    # the exact loss over 0.06 s is k t (to 1e-7 relative: W hardly changes)
    lost = problem.w0 - stepper.y[0]
    assert lost == pytest.approx(problem.k * 0.06, rel=1e-6)
    assert stepper.balance_error["water"] < 1e-7
    total = stepper.cumulative_inflow["water"]
    assert abs((stepper.y[0] - problem.w0) - total) <= 64 * np.finfo(float).eps * problem.w0


class Relaxing:
    """dy/dt = -lam (y - 1) - mu (y - 1)^3 with its exact Jacobian: a store that relaxes quickly
    after each sudden change (a cap dipped in water, on the scale of one unknown)."""

    n = 1
    exact_jacobian = False
    constant_jacobian = False

    def __init__(self, lam: float = 20.0, mu: float = 5.0):
        self.lam, self.mu = lam, mu

    def balance_groups(self) -> dict:
        return {}

    def capacity(self, y):
        return y.copy(), np.ones(1)

    def evaluate(self, y, t):
        x = y - 1.0
        return SimpleNamespace(rate=-self.lam * x - self.mu * x**3, slope=-self.lam - 3 * self.mu * x**2,
                               inflow=lambda g: 0.0, gross=lambda g: 0.0)

    def jacobian(self, a0, dt, dm, ev):
        return sp.csr_matrix(np.array([[a0 * dm[0] - dt * ev.slope[0]]]))


def _kicked():
    """Ten kicks of +2 a second apart, each a restart from the changed state: each restart's
    retakes of its first step, and the stepper."""
    stepper = TimeStepper(Relaxing(), np.array([1.0]), 0.0, 10.5,
                          StepperOptions(scheme="bdf2", initial_step=0.2, tolerance=1e-3, max_step=0.5))
    rejected = []
    for k in range(1, 11):
        stepper.add_stop_time(float(k))
        while stepper.t < k and stepper.step():
            pass
        before = stepper.counters.rejected
        stepper.reset(stepper.y + 2.0)
        stepper.step()  # the restart's first step, with its retakes
        rejected.append(stepper.counters.rejected - before)
    stepper.run()
    return rejected, stepper


def test_a_start_after_a_sudden_change_takes_the_first_step_its_error_allows(monkeypatch):
    """A start's first step is shortened to what its error estimate allows, from one probe
    evaluation along the start's slope: no restart retakes its first step. From the fixed initial
    step of 0.2 s (hundreds of times too long right after a kick), every restart retook it at least
    twice; both end on the same answer within the tolerance, in about as many steps."""
    probed, stepper = _kicked()
    taken = stepper.counters.steps
    monkeypatch.setattr(TimeStepper, "_first_step", lambda self, dt: dt)
    fixed, plain = _kicked()
    assert sum(probed) == 0, probed
    assert all(r >= 2 for r in fixed), fixed
    assert taken <= plain.counters.steps + 10
    assert stepper.y[0] == pytest.approx(plain.y[0], abs=1e-3)


class Kinked(Relaxing):
    """Relaxing towards a target that starts to climb at 3 per second at t = 1.3 s: a kink in
    time that the steps must find (no stop time there), as a face drying out is found."""

    def evaluate(self, y, t):
        target = 1.0 + 3.0 * max(t - 1.3, 0.0)
        x = y - target
        return SimpleNamespace(rate=-self.lam * x - self.mu * x**3, slope=-self.lam - 3 * self.mu * x**2,
                               inflow=lambda g: 0.0, gross=lambda g: 0.0)


def test_a_step_taken_after_a_retake_does_not_grow_the_next_one(monkeypatch):
    """After a rejected or failed try the accepted step keeps its length for the next step
    (common practice: Hairer and Wanner's codes forbid growth right after a rejection); a step
    grown from the retake's small error tends to be rejected in turn."""
    tries = []
    original = TimeStepper._try_step

    def recorded(self, dt):
        result = original(self, dt)
        tries.append((dt, result is not None and result[2] <= 1.0))
        return result

    monkeypatch.setattr(TimeStepper, "_try_step", recorded)
    stepper = TimeStepper(Kinked(lam=2.0, mu=0.0), np.array([1.0]), 0.0, 4.0,
                          StepperOptions(scheme="bdf2", initial_step=0.05, tolerance=1e-4, max_step=1.0))
    stepper.run()
    after_retake = [(dt, tries[i + 2][0]) for i, (dt, ok) in enumerate(tries[1:-1])
                    if ok and not tries[i][1]]
    assert after_retake, tries  # the kink was found by a retake
    grown_elsewhere = [b / a for (a, ok_a), (b, _) in zip(tries[:-1], tries[1:]) if ok_a and b > 1.25 * a]
    assert grown_elsewhere  # steps do grow away from retakes
    assert all(following <= dt * (1 + 1e-12) for dt, following in after_retake), after_retake
