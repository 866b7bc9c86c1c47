"""Implicit time stepping: backward Euler and variable-step BDF2, adaptive or fixed steps.

A problem gives the conserved content m(y) and the rate F(y, t) with
dm/dt = F.  Each step solves, by Newton's method,

.. math:: \\alpha_0 m(y^{n+1}) + \\alpha_1 m(y^n) + \\alpha_2 m(y^{n-1}) = \\Delta t\\,F(y^{n+1}, t^{n+1})

(BDF2: :math:`\\alpha_0 = (1+2\\omega)/(1+\\omega)`, :math:`\\alpha_1 = -(1+\\omega)`,
:math:`\\alpha_2 = \\omega^2/(1+\\omega)`, :math:`\\omega = \\Delta t_n/\\Delta t_{n-1}`; backward Euler:
1, -1, 0).  Because the scheme is written for m, the totals of m balance exactly: per step,
:math:`\\Delta M^{n+1} = W^{n+1}` with the scheme's own quadrature of the inflow
:math:`W^{n+1} = (\\Delta t\\,Q^{n+1} + \\alpha_2 W^n)/\\alpha_0`, which the stepper checks.

The error estimate compares the corrector with an extrapolating predictor (Milne's device).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from fvsolver.errors import CaseError, FvsolverError, SolverError
from fvsolver.kernels import conduction as kern
from fvsolver.linear import Factoriser, factorise, solve

SCHEMES = ("backward_euler", "bdf2")
# a Newton update this small (in tolerance units: K for temperatures) is the round-off of the unknowns
ROUND_OFF_UPDATE = 1e-12
# a total's balance error below this many ulps of its contents is at its round-off
ROUND_OFF_ULPS = 16.0
# an iteration that contracts its update by less than this refactorises the Jacobian
REFACTOR_CONTRACTION = 0.3
# a step whose error estimate at a contracting Newton iterate exceeds this many tolerances is rejected
# there, before its Newton loop ends
EARLY_REJECTION = 2.0
_EPS = float(np.finfo(float).eps)


@dataclass
class Counters:
    """Work done so far."""

    steps: int = 0
    rejected: int = 0
    newton_iterations: int = 0
    factorisations: int = 0
    evaluations: int = 0
    newton_failures: int = 0


@dataclass(frozen=True)
class StepperOptions:
    """Numerical options of the time stepper.

    Parameters
    ----------
    scheme : {"backward_euler", "bdf2"}
    adaptive : bool, steps from the error estimate (else fixed ``initial_step``)
    initial_step : float, s
    tolerance : float, absolute local error allowed per step on each unknown (K for temperature)
    relative_tolerance : float
    min_step, max_step : float, s
    max_growth : float, largest ratio of successive steps (BDF2 stays zero-stable below 2.4)
    newton_tolerance : float, absolute change of the unknowns that ends the Newton loop
    newton_fraction : float, adaptive steps: the Newton loop also ends once its estimated remaining
        error (the last update times rho / (1 - rho), rho its observed contraction) is below this
        fraction of the step's error tolerance on every unknown
    balance_tolerance : float, the Newton loop ends only once every conserved total balances over
        the step to this relative error (non-affine problems)
    max_newton_iterations : int
    """

    scheme: str = "bdf2"
    adaptive: bool = True
    initial_step: float = 1.0
    tolerance: float = 1e-2
    relative_tolerance: float = 0.0
    min_step: float = 1e-9
    max_step: float = math.inf
    max_growth: float = 2.0
    newton_tolerance: float = 1e-9
    newton_fraction: float = 1e-2
    balance_tolerance: float = 1e-10
    max_newton_iterations: int = 30

    def validate(self, where: str = "numerics") -> None:
        if self.scheme not in SCHEMES:
            raise CaseError(f"{where}.scheme: got {self.scheme!r}, expected one of {SCHEMES}")
        for name in ("initial_step", "tolerance", "min_step", "max_step", "newton_tolerance", "newton_fraction",
                     "balance_tolerance"):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and v > 0):
                raise CaseError(f"{where}.{name}: got {v!r}, expected a positive number")
        if not 1.0 < self.max_growth < 2.4:
            raise CaseError(f"{where}.max_growth: got {self.max_growth!r}, expected a value in (1, 2.4)")
        if self.min_step > self.initial_step:
            raise CaseError(
                f"{where}.min_step: got {self.min_step!r} > initial_step {self.initial_step!r}; lower it"
            )


@dataclass
class _History:
    t: list = field(default_factory=list)      # newest first
    y: list = field(default_factory=list)
    m: list = field(default_factory=list)


class TimeStepper:
    """Advance ``problem`` from ``y0`` at ``t0`` to ``t_end``.

    Parameters
    ----------
    problem : object with ``n``, ``capacity(y)``, ``evaluate(y, t)``, ``jacobian(a0, dt, dm, ev)``,
        ``balance_groups()`` and the flags ``exact_jacobian``, ``constant_jacobian``. The
        Jacobian may be a sparse matrix or a :class:`fvsolver.linear.LowRankUpdate`.
    y0 : (n,) initial state
    t0, t_end : float, s
    options : StepperOptions
    stop_times : sequence of float, times the steps must land on exactly (outputs)

    Attributes
    ----------
    status : {"running", "finished", "failed"}
    message : str
    t, y : current time and state
    counters : Counters
    balance_error : dict, relative balance error of the last step for each conserved total
    """

    def __init__(self, problem, y0, t0: float, t_end: float, options: StepperOptions | None = None,
                 stop_times=()):
        self.options = options or StepperOptions()
        self.options.validate()
        if not t_end > t0:
            raise CaseError(f"end_time: got {t_end!r}, expected a time after the start {t0!r}")
        self.problem = problem
        self.t_end = float(t_end)
        self.t = float(t0)
        self.y = np.array(y0, dtype=float)
        if self.y.shape != (problem.n,) or not np.all(np.isfinite(self.y)):
            raise CaseError(f"initial state: expected {problem.n} finite values (got shape {self.y.shape})")
        self.stop_times = np.unique(np.asarray([s for s in stop_times if t0 < s < t_end], dtype=float))
        self.status = "running"
        self.message = ""
        self.counters = Counters()
        self.dt = float(min(self.options.initial_step, self.options.max_step))
        self.last_dt = 0.0
        self.order = 1
        self.balance_error: dict[str, float] = {}
        self.cumulative_inflow: dict[str, float] = {}
        self._groups = problem.balance_groups()
        # per-unknown scale of the tolerances: 1 for temperatures (K), problem-defined otherwise
        self._scale = np.broadcast_to(np.asarray(getattr(problem, "tolerance_scale", 1.0), dtype=float),
                                      (problem.n,))
        m0, dm0 = problem.capacity(self.y)
        self._history = _History([self.t], [self.y.copy()], [m0])
        # a balance scale that cannot vanish: the content change that moves every unknown of the
        # group by 1e-6 of its tolerance unit (1 microkelvin of the whole body for the energy), so a
        # step that exchanges next to nothing compares its round-off with that, not with ~0
        self._balance_floor = {g: 1e-6 * float(np.abs(np.broadcast_to(dm0, self.y.shape)[sl] * self._scale[sl]).sum())
                               for g, sl in self._groups.items()}
        self._dts: list[float] = []           # newest first
        self._inflow: dict[str, float] = {g: 0.0 for g in self._groups}
        self._lu_cache: dict = {}
        self._absolute_tolerance = None  # tolerance * scale, for _tolerance
        self._old_contents = None  # (m at a step's start, each total's content sum |m| there)
        self._factorise = Factoriser()  # orders the Jacobian's pattern once per run
        self._f0: np.ndarray | None = None
        self._landing: float | None = None
        self._gross: dict[str, float] = {}
        self._last_evaluation = None
        affine = getattr(problem, "affine_operator", None)
        self._affine = affine() if affine is not None else None
        self._affine_rate = None  # F at the current state, for affine problems
        self._pending_rate = None

    # -- public contract -------------------------------------------------------------------
    @property
    def last_evaluation(self):
        """The problem's evaluation at the current state (computed when first asked for)."""
        if self._last_evaluation is None and self.counters.steps > 0:
            self._last_evaluation = self.problem.evaluate(self.y, self.t)
        return self._last_evaluation

    def step(self) -> bool:
        """Take one accepted step (retrying rejected ones).  Returns False once not running."""
        if self.status != "running":
            return False
        opt = self.options
        if opt.adaptive and len(self._history.t) == 1 and self._f0 is None:
            self.dt = self._first_step(self.dt)
        retaken = False  # a try of this step was rejected or failed
        while True:
            dt = self._limit(self.dt)
            try:
                result = self._try_step(dt)
            except (SolverError, FvsolverError, FloatingPointError) as exc:
                # a property asked outside its range by a straying iterate counts as a failed step
                self.counters.newton_failures += 1
                result = None
                reason = str(exc)
            else:
                reason = "Newton's method did not converge"
                if result is None:
                    self.counters.newton_failures += 1
            if result is None:
                retaken = True
                self.dt = dt / 4.0
                if self.dt < opt.min_step:
                    self.status = "failed"
                    self.message = (f"at t = {self.t:.6g} s the step fell below min_step "
                                    f"{opt.min_step:g} s: {reason}")
                    return False
                continue
            y_new, m_new, err, ev, order, w_new, alpha0 = result
            if opt.adaptive and err > 1.0:
                self.counters.rejected += 1
                retaken = True
                # a rejected step's error is taken to scale as dt^order, one order below the
                # smooth asymptotic dt^(order + 1): the steps rejected within a run are those
                # across a face drying out, where the demo's retakes showed err ~ dt (with the
                # asymptotic exponent a step was rejected two or three times in a row); a start
                # (no history yet) keeps the asymptotic exponent
                exponent = order if len(self._history.t) >= 2 else order + 1
                self.dt = dt * min(0.9, max(0.1, 0.9 * err ** (-1.0 / exponent)))
                if self.dt < opt.min_step:
                    self.status = "failed"
                    self.message = f"at t = {self.t:.6g} s the error estimate needs steps below min_step"
                    return False
                continue
            break
        landing = self._landing
        self._accept(dt, y_new, m_new, ev, order, w_new)
        if opt.adaptive:
            factor = opt.max_growth if err == 0.0 else min(opt.max_growth, max(0.2, 0.9 * err ** (-1.0 / (order + 1))))
            if 1.0 <= factor < 1.25:
                factor = 1.0  # keep the step (and its factorisation) unless growth is worth it
            elif retaken and factor > 1.0:
                # no growth right after a retake (common practice, e.g. Hairer and Wanner's codes):
                # the error just jumped there; in the demo, 3 of its 8 rejections were steps grown
                # twofold from a retake's small error (with this, 7 rejections in all)
                factor = 1.0
            proposal = min(dt * factor, opt.max_step)
            # a step shortened to land on a stop time does not shrink the nominal step
            self.dt = proposal if landing is None else (max(self.dt, proposal) if factor >= 1 else min(self.dt, proposal))
        if landing is not None and landing == self.t_end:
            self.status = "finished"
        return self.status == "running"

    def run(self) -> None:
        """Step until finished; raise SolverError on failure."""
        while self.step():
            pass
        if self.status == "failed":
            raise SolverError(self.message)

    def reset(self, y: np.ndarray, dt: float | None = None) -> None:
        """Restart from a changed state at the current time (water added, a switch thrown):
        the history is dropped, so the next step is a backward-Euler start."""
        self.y = np.array(y, dtype=float)
        m, _ = self.problem.capacity(self.y)
        self._history = _History([self.t], [self.y.copy()], [m])
        self._dts = []
        self._inflow = {g: 0.0 for g in self._groups}
        self._f0 = None
        self._affine_rate = None
        self.dt = float(dt if dt is not None else self.options.initial_step)

    def rewind(self, t: float, y: np.ndarray) -> None:
        """Go back to the state ``y`` at ``t`` that the last accepted step started from (an event
        located inside that step is to be landed on instead): the step's inflow leaves the running
        totals and the next step is a backward-Euler start."""
        if self.counters.steps == 0 or not self._history.t[1:] or self._history.t[1] != t:
            raise SolverError(f"rewind to t = {t!r} s: expected the start of the last accepted step")
        for g, w in self._inflow.items():  # the undone step's own inflow
            self.cumulative_inflow[g] -= w
        self.counters.steps -= 1
        self.counters.rejected += 1
        self.t = float(t)
        self.status = "running"  # the step that was undone may have been the last one
        self._last_evaluation = None
        # the retaken stretch starts afresh (backward Euler): short steps keep its error at the
        # tolerance's level
        self.reset(y, min(self.options.initial_step, self.last_dt))

    def add_stop_time(self, t: float) -> None:
        """A time the steps must land on exactly (an event), after the current time."""
        if t > self.t:
            self.stop_times = np.unique(np.append(self.stop_times, float(t)))

    def dense(self, t: float) -> np.ndarray:
        """State at a time inside the last step, by the scheme's interpolating polynomial."""
        h = self._history
        if len(h.t) < 2:
            return h.y[0].copy()
        # a BDF2 run interpolates quadratically also over a step taken first-order (an inventory
        # drying out): the linear interpolant of a long step misplaces events inside it
        pts = min(len(h.t), 3 if self.options.scheme == "bdf2" else self.order + 1)
        ts, ys = h.t[:pts], h.y[:pts]
        out = np.zeros_like(ys[0])
        for i in range(pts):
            li = 1.0
            for j in range(pts):
                if j != i:
                    li *= (t - ts[j]) / (ts[i] - ts[j])
            out += li * ys[i]
        return out

    # -- internals --------------------------------------------------------------------------
    def _limit(self, dt: float) -> float:
        self._landing = None
        t_next = self.t + dt
        stop = self.t_end
        if self.stop_times.size:
            later = self.stop_times[self.stop_times > self.t * (1 + 1e-14) + 1e-300]
            if later.size:
                stop = min(stop, later[0])
        if t_next >= stop - 1e-9 * dt:
            self._landing = stop
            remaining = stop - self.t
            # keep the nominal step (and its factorisation) when it lands within round-off
            return dt if abs(remaining - dt) <= 1e-9 * dt else remaining
        if t_next > stop - 0.2 * dt:  # avoid a sliver of a step before the stop
            return 0.5 * (stop - self.t)
        return dt

    def _coefficients(self, dt: float):
        n_hist = len(self._history.t)
        use_bdf2 = self.options.scheme == "bdf2" and n_hist >= 2 and (not self.options.adaptive or n_hist >= 3)
        if not use_bdf2:
            return 1, 1.0, -1.0, 0.0
        w = dt / self._dts[0]
        return 2, (1 + 2 * w) / (1 + w), -(1 + w), w * w / (1 + w)

    def _history_part(self, order, a0, a1, a2):
        """The step's coefficients and history a1 m_n + a2 m_n-1, first-order where BDF2 has no
        solution inside the domain.

        BDF2's history part -(a1 m_n + a2 m_n-1) / a0 of an unknown that must stay >= 0 (an
        inventory drying out) can itself be negative: no solution >= 0 exists then, and the step is
        taken first-order (backward Euler keeps it >= 0). A negative part below the round-off of
        those unknowns' total (a dried face decaying towards zero) is set to zero instead.
        """
        h = self._history
        hist = a1 * h.m[0] + (a2 * h.m[1] if a2 else 0.0)
        keep = getattr(self.problem, "nonnegative", None)
        if order == 2 and keep is not None and len(keep):
            part = hist[keep]
            excess = float(part[part > 0.0].sum())
            if excess > 0.0:
                if excess <= 1e-16 * float(np.abs(h.m[0][keep]).sum()):
                    hist[keep] = np.minimum(part, 0.0)
                else:
                    order, a0, a1, a2 = 1, 1.0, -1.0, 0.0
                    hist = a1 * h.m[0]
        return order, a0, a1, a2, hist

    def _slope(self, y: np.ndarray, t: float) -> np.ndarray:
        """dy/dt at ``(y, t)``: the rate over the content's derivative (zero for an unknown without
        content, a lumped state held fixed)."""
        ev = self.problem.evaluate(y, t)
        self.counters.evaluations += 1
        _, dm = self.problem.capacity(y)
        dm = np.broadcast_to(dm, ev.rate.shape)
        return np.divide(ev.rate, dm, out=np.zeros_like(ev.rate), where=dm != 0.0)

    def _first_step(self, dt: float) -> float:
        """The first step of a start (no history): ``dt``, shortened to what the start's error
        estimate allows.

        A start's error is estimated from backward Euler against the explicit Euler predictor,
        err ~ 0.5 dt^2 |y''| / tol.  One probe evaluation a hundredth of ``dt`` along the start's
        slope f0 gives y'' ~ (f(y0 + h f0) - f0) / h, and the step with err = 0.8 follows.  A start
        after a sudden change (a cap dipped in water, a device standing up) needs far shorter steps
        than any fixed guess: the running device retook every tip's first step three times and
        every stand-up's twice (55 rejected starts in 615 steps) while the probe's step was within
        10 % of the one finally accepted.  The step is never lengthened (the caller's step is the
        longest it wants), nor shortened below ``min_step``; a probe state outside the properties'
        range leaves ``dt`` as it is (its retakes then find the step)."""
        opt = self.options
        self._f0 = f0 = self._slope(self.y, self.t)
        h = 1e-2 * dt
        probe = self.y + h * f0
        project = getattr(self.problem, "project", None)
        if project is not None:
            project(probe)
        try:
            f1 = self._slope(probe, self.t + h)
        except (SolverError, FvsolverError, FloatingPointError):
            return dt
        scale = self._tolerance(self.y)
        curvature = float(np.max(np.abs(f1 - f0) / (h * scale)))
        if not math.isfinite(curvature) or curvature <= 0.0:
            return dt
        return min(dt, max(math.sqrt(2.0 * 0.8 / curvature), opt.min_step))

    def _predict(self, dt: float, order: int):
        """Extrapolated state and the factor turning |corrector - predictor| into the error."""
        h = self._history
        if len(h.t) == 1:
            if self._f0 is None:
                self._f0 = self._slope(self.y, self.t)
            return self.y + dt * self._f0, 0.5
        h0, y0, y1 = dt, h.y[0], h.y[1]
        h1 = self._dts[0]
        if order == 1 or len(h.t) < 3:
            w = h0 / h1
            return y0 + w * (y0 - y1), w / (2 * w + 1)
        h2 = self._dts[1]
        y2 = h.y[2]
        t = h.t[0] + h0
        ts = (h.t[0], h.t[1], h.t[2])
        # y0 + sum l_i (y_i - y0) (the weights sum to one): an unknown that has not changed is
        # extrapolated exactly, without a rounding Newton would then have to undo
        pred = y0.copy()
        for i, yi in enumerate((y1, y2), start=1):
            li = 1.0
            for j in range(3):
                if j != i:
                    li *= (t - ts[j]) / (ts[i] - ts[j])
            pred += li * (yi - y0)
        delta = h0**2 * (h0 + h1) ** 2 / (6 * (2 * h0 + h1))
        ep = h0 * (h0 + h1) * (h0 + h1 + h2) / 6
        return pred, delta / (delta + ep)

    def _lu(self, alpha0, dt, dm, ev, key_ok: bool):
        key = (alpha0, dt)
        if key_ok and key in self._lu_cache:
            return self._lu_cache[key]
        # a constant Jacobian is factorised once per (alpha0, dt): a fresh ordering, and its solves
        # stay SuperLU's own; a changing one is factorised every step, with the ordering kept
        factorise_ = factorise if self.problem.constant_jacobian else self._factorise
        lu = factorise_(self.problem.jacobian(alpha0, dt, dm, ev))
        self.counters.factorisations += 1
        if key_ok:
            if len(self._lu_cache) > 4:
                self._lu_cache.clear()
            self._lu_cache[key] = lu
        return lu

    def _try_step(self, dt: float):
        p, opt, h = self.problem, self.options, self._history
        order, a0, a1, a2 = self._coefficients(dt)
        op = self._affine
        if op is not None:
            return self._affine_step(op, dt, order, a0, a1, a2)
        t_new = self.t + dt
        order, a0, a1, a2, hist = self._history_part(order, a0, a1, a2)
        y_pred, est_factor = self._predict(dt, order) if opt.adaptive else (h.y[0], 0.0)
        project = getattr(p, "project", None)  # keeps iterates inside the unknowns' domain
        # a problem may say when its Jacobian changes too fast to be kept between iterations
        fast_changing = getattr(p, "jacobian_changes_fast", lambda y: False)
        # Newton starts from the extrapolated predictor (projected into the domain): its first
        # update is then of the size of the step's error instead of the step's change
        start = opt.adaptive and self._newton_from_predictor(order) and bool(np.isfinite(y_pred).all())
        y = y_pred.copy() if start else h.y[0].copy()
        if project is not None:
            project(y)
        # the Newton loop ends once the error left is a small fraction of the step's own tolerance
        # (adaptive steps), or below the absolute newton_tolerance
        weight = None
        small = opt.tolerance if opt.adaptive else 0.0
        if opt.adaptive:
            weight = 1.0 / (opt.newton_fraction * self._tolerance(h.y[0]))
        lu = None
        norms = []
        prev_norm = math.inf
        converged = False
        settled = False  # the last update passed the Newton test; the balance is checked at its state
        last_worst = math.inf
        errors = {}
        ev = p.evaluate(y, t_new)
        self.counters.evaluations += 1
        m, dm = p.capacity(y)
        for it in range(opt.max_newton_iterations + 1):
            residual = a0 * m + hist
            # the Newton right-hand side -(residual - dt F), formed as dt F - residual (the same numbers)
            rhs = dt * ev.rate
            rhs -= residual
            if settled:
                # the conserved totals must balance to round-off at the state the step ends on: the
                # evaluation there is the one the next iteration would start from, so an iteration
                # more costs only a solve with the kept factor and the next evaluation
                w_new, errors = self._balance(m, ev, dt, a0, a2)
                worst = max(errors.values(), default=0.0)
                # (or every total's error is at the round-off of the total itself, which no iteration
                # can lower; or it has stopped falling while the updates are at the round-off of the
                # unknowns)
                if (worst <= opt.balance_tolerance or self._at_round_off
                        or (worst > 0.5 * last_worst and norm <= ROUND_OFF_UPDATE)):
                    converged = True
                    break
                last_worst = worst
            if it == opt.max_newton_iterations:
                break
            if lu is None or not p.constant_jacobian and it > 0 and (rate_poor or clipped or fast_changing(y)):
                lu = self._lu(a0, dt, dm, ev, p.constant_jacobian)
            delta = solve(lu, rhs)  # (finite: solve raises SolverError otherwise)
            self.counters.newton_iterations += 1
            clipped = False
            if project is not None:
                before = y
                y = y + delta
                free = y.copy()
                project(y)
                # where the domain cut an update short, the Jacobian of the old iterate has misled it
                # (a drying face's inventory row scales with its flux): the next iteration factorises
                # afresh
                clipped = not (y == free).all()
                if clipped:
                    delta = y - before  # the change actually made
            else:
                y += delta
            size = np.abs(delta)
            norm = float((size / self._scale).max())
            rate_poor = norm > REFACTOR_CONTRACTION * prev_norm
            prev_before, prev_norm = prev_norm, norm
            if p.exact_jacobian:
                converged = True
                # affine problem: the rate and content at the new state follow exactly
                m = m + dm * delta
                break
            # an update that grows while still below the step's own tolerance is not yet divergence
            # (an inventory drying inside the step can make one iterate climb)
            if it >= 1 and norm > 2.0 * prev_before and norm > max(1e3 * opt.newton_tolerance, small):
                return None  # diverging: a shorter step will do better
            norms.append(norm)
            if it >= 4 and norm > 0.5 * norms[-4] and norm > 1e3 * opt.newton_tolerance:
                return None  # not even halving over three iterations (cycling): a shorter step
            # converged; or stalled at the round-off floor of the evaluation just above the tolerance
            settled = norm <= opt.newton_tolerance or (norm <= 1e3 * opt.newton_tolerance and norm > 0.5 * prev_before)
            if weight is not None and it >= 1 and not settled:
                contraction = norm / prev_before
                settled = (contraction < 0.5 and
                           float((size * weight).max()) * contraction / (1.0 - contraction) <= 1.0)
            if not np.isfinite(y).all():
                return None
            if weight is not None and not settled and (it == 0 or contraction < 0.5):
                # an iterate already this far from the predictor (the corrections left are a small
                # fraction of the update just made: contraction < 0.5, or after the first update,
                # whose contraction is not known yet, twice as far) is rejected without converging
                # it first; the retake's step follows from this estimate
                err = float((est_factor * np.abs(y - y_pred) / self._tolerance(y)).max())
                if err > (2.0 * EARLY_REJECTION if it == 0 else EARLY_REJECTION):
                    return y, None, err, None, order, None, a0
            ev = p.evaluate(y, t_new)
            self.counters.evaluations += 1
            m, dm = p.capacity(y)
        if not converged:
            return None
        if p.exact_jacobian:
            inflow = self._affine_inflow(ev, delta)
            w_new, errors = self._balance(m, ev, dt, a0, a2, inflow)
        m_new = m
        self.balance_error.update(errors)
        err = 0.0
        if opt.adaptive:
            est = est_factor * np.abs(y - y_pred)
            err = float((est / self._tolerance(y)).max())
        return y, m_new, err, ev, order, w_new, a0

    def _balance(self, m_new, ev, dt, a0, a2, inflow=None):
        """Each conserved total's inflow over the step by the scheme's quadrature, and the relative
        difference between it and the total's change (the balance error)."""
        h = self._history
        if inflow is None:
            inflow = {g: ev.inflow(g) for g in self._groups}
            self._gross = {g: ev.gross(g) for g in self._groups}
        old = h.m[0]
        kept = self._old_contents
        if kept is None or kept[0] is not old:  # each total's content at the step's start, once a step
            kept = self._old_contents = (old, {g: float(np.abs(old[sl]).sum()) for g, sl in self._groups.items()})
        w_new, errors = {}, {}
        at_round_off = True
        for g, sl in self._groups.items():
            w_new[g] = (dt * inflow[g] + a2 * self._inflow[g]) / a0
            stored = float((m_new[sl] - old[sl]).sum())  # differences first: no cancellation of totals
            content = float(np.abs(m_new[sl]).sum())
            # relative to the change, the gross exchange, or the round-off level of the total itself
            scale = max(abs(stored), dt * self._gross[g], 1e-13 * content, self._balance_floor[g], 1e-300)
            missing = abs(stored - w_new[g])
            errors[g] = missing / scale
            # the change of a total is known only to the round-off of the contents it is the difference
            # of: a step whose change is a few ulps of the total (a cap holding grams that loses
            # nanograms) balances no better than that, however many iterations follow
            at_round_off = at_round_off and missing <= ROUND_OFF_ULPS * _EPS * (content + kept[1][g])
        self._at_round_off = at_round_off
        return w_new, errors

    def _tolerance(self, y: np.ndarray) -> np.ndarray:
        """The error allowed on each unknown at the (finite) state y: tolerance * scale + relative
        tolerance * |y|; without a relative tolerance the first term, kept (adding 0 |y| = 0 to
        it changes nothing)."""
        opt = self.options
        if opt.relative_tolerance == 0.0:
            if self._absolute_tolerance is None:
                self._absolute_tolerance = opt.tolerance * self._scale
            return self._absolute_tolerance
        return opt.tolerance * self._scale + opt.relative_tolerance * np.abs(y)

    def _newton_from_predictor(self, order: int) -> bool:
        return getattr(self.problem, "newton_from_predictor", False)

    def _affine_step(self, op, dt, order, a0, a1, a2):
        """A step of F(T) = A T + f0: one residual update and one solve, nothing re-evaluated."""
        opt, h = self.options, self._history
        y0 = h.y[0]
        # F(y_n): carried from the last step's own equation, dt F(y_n) = sum a_i m_(n-i), when known
        rate = self._affine_rate if self._affine_rate is not None else op.A @ y0 + op.f0
        m0 = h.m[0]
        m1 = h.m[1] if a2 else m0  # (a2 = 0: not read)
        rhs = np.empty_like(y0)
        kern.affine_rhs(m0, m1, rate, a0 + a1, a2, dt, rhs)  # one pass instead of three
        lu = self._lu(a0, dt, op.capacity, op.evaluation, True)
        delta = solve(lu, rhs)
        self.counters.newton_iterations += 1
        y, m_new, new_rate = np.empty_like(y0), np.empty_like(y0), np.empty_like(y0)
        stored, heat = kern.affine_update(y0, delta, op.capacity, m0, m1, op.inflow, a0, a1, a2, dt,
                                          y, m_new, new_rate)
        self._pending_rate = new_rate
        gross = op.gross(y)
        inflow = heat + op.inflow0
        w_new = {}
        for g in self._groups:
            self._gross[g] = gross
            w_new[g] = (dt * inflow + a2 * self._inflow[g]) / a0
            # the round-off floor: 1e-13 of the content of the body 100 K from the reference
            scale = max(abs(stored), dt * gross, 1e-11 * op.capacity_total, self._balance_floor[g], 1e-300)
            self.balance_error[g] = abs(stored - w_new[g]) / scale
        err = 0.0
        if opt.adaptive:
            y_pred, est_factor = self._predict(dt, order)
            err = float(np.max(est_factor * np.abs(y - y_pred) / (opt.tolerance * self._scale
                                                                   + opt.relative_tolerance * np.abs(y))))
        return y, m_new, err, None, order, w_new, a0

    def _affine_inflow(self, ev, delta):
        """Heat in at the new state of an affine problem, from the problem's exact change."""
        change, gross = self.problem.inflow_change(ev, delta)
        self._gross = {g: ev.gross_heat + gross for g in self._groups}
        return {g: ev.heat_in + change for g in self._groups}

    def _accept(self, dt, y_new, m_new, ev, order, w_new):
        h = self._history
        self.last_dt = dt
        self.order = order
        self.t = self.t + dt
        self.y = y_new
        h.t.insert(0, self.t)
        h.y.insert(0, y_new.copy())
        h.m.insert(0, m_new)
        del h.t[3:], h.y[3:], h.m[3:]
        self._dts.insert(0, dt)
        del self._dts[3:]
        self._inflow = w_new
        for g, w in w_new.items():
            self.cumulative_inflow[g] = self.cumulative_inflow.get(g, 0.0) + w
        self.counters.steps += 1
        self._last_evaluation = ev
        self._affine_rate = self._pending_rate
        self._pending_rate = None


from fvsolver.steady import solve_steady  # noqa: E402,F401 - kept importable from here
