"""The running device: tip, dip, stand up, again, until the period settles.

A cycle starts when the device stands up.  Standing, the head cools, the pressure difference
grows and the column rises with it; the device tips when the column reaches the height that
brings the centre of mass to the pivot (:class:`fvsolver.device.body.TipModel`).  That moment
is located inside the step by the stepper's interpolant and then landed on exactly (the step
is taken again to end there), so the events happen at the located time.  At the tip:

* the condensate on the head's wall above its initial film drains back into the pool (as liquid
  at the pool's temperature; the films' own heat capacity is not modelled);
* the column drains back into the pool (its liquid never left the pool's books);
* with a water glass, the cap dips and fills its pores with the glass's water at the glass's
  temperature (what the pores cannot hold drips off);
* the vapour spaces join for ``tipped_time``: the pool's vapour flows into the head and
  condenses on its cold wall, putting heat into the head.

Then it stands up again.  Outcomes: ``running`` (with its period once settled), ``never_tips``,
``held_tipped`` (the column refills within ``refill_time`` of standing up: too much heat below),
``stopped`` (it tipped, then stopped: a dried cap, or the end time came long after the last tip).
"""
from __future__ import annotations

import math

import numpy as np

from fvsolver.device.spec import GRAVITY
from fvsolver.materials import REFERENCE_TEMPERATURE
from fvsolver.properties import water


class CycleController:
    """Drives a whole device's run step by step beside the stepper.

    Attributes
    ----------
    phase : {"standing", "tipped"}
    tips : list of float, s (the located tip times)
    cycles : list of dict, one per completed cycle (tip to tip)
    outcome, outcome_reason : str, once :meth:`finish` has been called
    finished : bool, the run may stop (settled, held tipped, cycle count)
    """

    def __init__(self, problem, t0: float, y0: np.ndarray):
        self.problem, self.spec = problem, problem.spec.cycle
        self.phase = "standing"
        self.tips: list[float] = []
        self.stand_times: list[float] = [t0]
        self.cycles: list[dict] = []
        self.finished = False
        self.settled_period: float | None = None
        self.outcome: str | None = None
        self.outcome_reason: str | None = None
        self._pending: float | None = None
        self._stand_at: float | None = None
        self._previous = (t0, y0.copy(), self._margin(y0))
        self.drained = 0.0          # kg of condensate drained back into the pool
        self.dipped_water = 0.0     # kg of water taken up from the glass
        self.dipped_energy = 0.0    # J brought in with it (from 273.15 K)
        # what the events moved into each conserved total (the stepper's inflows cover the steps)
        self.event_inflow = {"energy": 0.0, "working_fluid": 0.0, "cap_water": 0.0, "pool_energy": 0.0}
        self._sums = self._zero_sums()
        self._tip_state: dict | None = None

    # -- per step ---------------------------------------------------------------------------
    def _margin(self, y: np.ndarray) -> float:
        if self.phase == "tipped":
            return -math.inf
        p = self.problem
        return p.pressures(y)["pressure_drop_pa"] - p.tip_pressure_drop(y)

    @staticmethod
    def _zero_sums() -> dict:
        return {"time": 0.0, "evaporated": 0.0, "evaporative_heat": 0.0, "dip_heat": 0.0, "dip_condensed": 0.0,
                "head_temperature": 0.0, "pool_temperature": 0.0}

    def located(self, stepper) -> bool:
        """After an accepted step: True when a tip lies inside it, in which case the stepper has
        been rewound to the step's start and told to land on the tip."""
        t, y = stepper.t, stepper.y
        t0, y0, m0 = self._previous
        if self.phase == "standing" and self._pending is None:
            m1 = self._margin(y)
            if m0 < 0.0 <= m1:
                f = lambda s: self._margin(stepper.dense(s))  # noqa: E731 - the interpolated margin
                from scipy.optimize import brentq

                when = t if f(t) <= 0.0 or f(t0) >= 0.0 else brentq(f, t0, t, xtol=1e-12 * max(t, 1.0))
                if when < t - 1e-9 * max(stepper.last_dt, 1e-12):
                    self._pending = when
                    stepper.rewind(t0, y0)
                    stepper.add_stop_time(when)
                    return True
                self._pending = t
        return False

    def after_step(self, stepper, monitor) -> None:
        """Account the step; tip or stand up when the step landed on the event."""
        t, y, dt = stepper.t, stepper.y, stepper.last_dt
        self._accumulate(stepper, dt)
        if self._pending is not None and abs(t - self._pending) <= 1e-9 * max(t, 1.0):
            self._tip(stepper, monitor)
        elif self._stand_at is not None and abs(t - self._stand_at) <= 1e-9 * max(t, 1.0):
            self._stand(stepper)
        self._previous = (stepper.t, stepper.y.copy(), self._margin(stepper.y))

    def _accumulate(self, stepper, dt: float) -> None:
        """Cycle sums over the step (the rates at its end, as backward Euler integrates them)."""
        p, ev, y = self.problem, stepper.last_evaluation, stepper.y
        if ev is None or dt <= 0.0:
            return
        mesh = p.mesh
        ts = ev.surface_temperature[p.cap_faces]
        evap = mesh.boundary_areas[p.cap_faces] * ev.evaporation
        s = self._sums
        s["time"] += dt
        s["evaporated"] += dt * float(evap.sum())
        s["evaporative_heat"] += dt * float(np.dot(evap, water.latent_heat(np.clip(ts, 273.16, 372.0))))
        s["head_temperature"] += dt * p.vapour_temperature(y[: p.n_cells])
        s["pool_temperature"] += dt * float(y[p.i_tb])
        if self.phase == "tipped":
            inner = ev.boundary_heat[p.inner]
            s["dip_heat"] += dt * float(inner.sum())
            s["dip_condensed"] += dt * float(np.dot(p.inner_area, ev.condensation))

    # -- events -----------------------------------------------------------------------------
    def _tip(self, stepper, monitor) -> None:
        p, t = self.problem, stepper.t
        y = stepper.y.copy()
        self._pending = None
        column = p.column(y)
        pr = p.pressures(y)
        if self.tips and t - self.stand_times[-1] <= self.spec.refill_time:
            self.tips.append(t)
            self._close_cycle(t, column, pr)
            self.outcome = "held_tipped"
            self.outcome_reason = (f"the column refilled {t - self.stand_times[-1]:.2f} s after the device stood up "
                                   f"(within refill_time = {self.spec.refill_time:g} s): the body's vapour pressure "
                                   "rises faster than the head can take it; too much heat reaches the body")
            self.finished = True
            return
        if monitor is not None and monitor.time_to_target is None:
            monitor.time_to_target = t
        self.tips.append(t)
        self._close_cycle(t, column, pr)
        # the head's condensate above its initial film runs back into the pool
        film = p.spec.vapour.initial_film
        excess = np.maximum(y[p.i_c] - film, 0.0)
        drained = float(np.dot(p.inner_area, excess))
        y[p.i_c] -= excess
        y[p.i_mp] += drained
        self.drained += drained
        # the drained liquid joins the pool at its temperature: the pool's content m c_l (T - T_ref) grows
        self.event_inflow["pool_energy"] += drained * p.body.liquid_heat_capacity * (
            float(y[p.i_tb]) - REFERENCE_TEMPERATURE)
        if self.spec.water_glass and p.spec.cap_water.mode == "charge":
            before = monitor.added_water if monitor is not None else 0.0
            before_e = monitor.added_energy if monitor is not None else 0.0
            y = monitor.rewet(y, max(p.pore_water_capacity - float(y[p.i_w]), 0.0), self.spec.water_temperature)
            self.dipped_water += monitor.added_water - before
            self.dipped_energy += monitor.added_energy - before_e
            self.event_inflow["cap_water"] += monitor.added_water - before
            self.event_inflow["energy"] += monitor.added_energy - before_e
        self.phase = "tipped"
        p.tipped = True
        self._stand_at = t + self.spec.tipped_time
        stepper.reset(y, min(stepper.options.initial_step, 0.1 * self.spec.tipped_time))
        stepper.add_stop_time(self._stand_at)
        if len(self.tips) >= self.spec.max_cycles + 1:
            self.finished = True

    def _stand(self, stepper) -> None:
        p = self.problem
        self._stand_at = None
        self.phase = "standing"
        p.tipped = False
        self.stand_times.append(stepper.t)
        stepper.reset(stepper.y, stepper.options.initial_step)

    def _close_cycle(self, t: float, column: dict, pr: dict) -> None:
        """One row per cycle, from the previous tip (or the start) to this tip."""
        s = self._sums
        start = self.tips[-2] if len(self.tips) >= 2 else 0.0
        period = t - start if len(self.tips) >= 2 else None
        span = max(s["time"], 1e-300)
        t_head, t_pool = s["head_temperature"] / span, s["pool_temperature"] / span
        rho = column["density"]
        lift = 0.5 * rho * self.problem.spec.cycle.tip.bore_area * GRAVITY * column["height_m"] ** 2
        cooling = s["evaporative_heat"] / span
        power = lift / period if period else None
        carnot = None
        if power is not None and t_pool > t_head and cooling > 0.0:
            carnot = power / (cooling * (1.0 - t_head / t_pool))
        self.cycles.append({
            "cycle": len(self.tips), "tip_time_s": t, "period_s": period,
            "standing_time_s": t - self.stand_times[-1],
            "column_at_tip_m": column["height_m"], "tip_column_m": column["tip_height_m"],
            "pressure_drop_at_tip_pa": pr["pressure_drop_pa"], "head_pressure_pa": pr["head_pa"],
            "body_pressure_pa": pr["second_bulb_pa"], "head_temperature_k": t_head, "pool_temperature_k": t_pool,
            "head_body_temperature_difference_k": t_pool - t_head,
            "water_evaporated_kg": s["evaporated"], "evaporative_cooling_w": cooling,
            "dip_heat_into_head_j": s["dip_heat"], "dip_condensed_kg": s["dip_condensed"],
            "lift_work_j": lift, "mechanical_power_w": power, "carnot_fraction": carnot,
        })
        self._sums = self._zero_sums()
        self._check_settled()

    def _check_settled(self) -> None:
        periods = [c["period_s"] for c in self.cycles if c["period_s"] is not None]
        k = self.spec.settle_cycles
        if len(periods) >= k:
            last = periods[-k:]
            if max(last) - min(last) <= self.spec.period_tolerance * min(last):
                self.settled_period = last[-1]
                if self.spec.stop_when_settled:
                    self.finished = True

    # -- checkpoints ------------------------------------------------------------------------
    _SAVED = ("phase", "tips", "stand_times", "cycles", "finished", "settled_period", "outcome", "outcome_reason",
              "_pending", "_stand_at", "drained", "dipped_water", "dipped_energy", "event_inflow", "_sums")

    def state(self) -> dict:
        """The controller's state, JSON-ready, for a checkpoint."""
        return {k: getattr(self, k) for k in self._SAVED}

    def restore(self, state: dict, stepper) -> None:
        """Back to a checkpointed state, beside a stepper restored at the same step."""
        from fvsolver.errors import CaseError

        if not isinstance(state, dict) or set(state) != set(self._SAVED) or state["phase"] not in ("standing",
                                                                                                     "tipped"):
            raise CaseError("--resume: the checkpoint's cycle state is missing or damaged; run again with "
                            "--overwrite")
        for k in self._SAVED:
            setattr(self, k, state[k])
        self.problem.tipped = self.phase == "tipped"
        self._previous = (stepper.t, stepper.y.copy(), self._margin(stepper.y))

    # -- the verdict ------------------------------------------------------------------------
    def finish(self, t_end: float, monitor, stall_reason, y: np.ndarray | None = None) -> None:
        """Decide the outcome at the end of the run (``stall_reason``: callable giving the
        monitor's plain-words reason the target was not reached; ``y``: the final state)."""
        if self.outcome is not None:
            return
        if not self.tips:
            self.outcome = "never_tips"
            self.outcome_reason = stall_reason()
            return
        periods = [c["period_s"] for c in self.cycles if c["period_s"] is not None]
        since = t_end - self.stand_times[-1]
        typical = max(periods) if periods else self.tips[0]
        # a cap that dried after the last stand-up explains the silence since; one that was dry
        # from the start (a body-driven device) does not stop it
        dried = (monitor is not None and monitor.dried_out_time is not None
                 and monitor.dried_out_time >= self.stand_times[-1])
        if self.settled_period is not None or (since <= 2.0 * typical and not dried):
            self.outcome = "running"
            self.outcome_reason = (f"settled at a period of {self.settled_period:.4g} s" if self.settled_period
                                   else "still tipping at the end of the run; its period has not settled yet")
            if self.settled_period is None and len(self.tips) >= self.spec.max_cycles + 1:
                self.outcome_reason += f" (the run stopped at cycle.max_cycles = {self.spec.max_cycles})"
            return
        self.outcome = "stopped"
        n = len(self.tips)
        why = (f"the cap dried out at t = {monitor.dried_out_time:.0f} s" if dried
               else f"no tip in the {since:.0f} s since the last stand-up ({2.0 * typical:.0f} s would be two "
                    "of its longest cycles)")
        cap = self._cap_state(y)
        if cap is not None and not dried and cap[1] < 0.5:
            why += (f"; the cap has dried to a saturation of {cap[0]:.3f}, where it evaporates at "
                    f"{100.0 * cap[1]:.0f} % of its wet rate, too little to cool the head to the tip")
        self.outcome_reason = f"stopped after {n} dip{'s' if n != 1 else ''} (last tip at t = {self.tips[-1]:.1f} s): {why}"

    def _cap_state(self, y: np.ndarray | None):
        """(saturation, drying-rate factor) of the cap in state ``y``; None without a finite charge."""
        from fvsolver.properties import porous

        cw = self.problem.spec.cap_water
        had_water = cw.initial_saturation > cw.residual_saturation or self.spec.water_glass
        if y is None or cw.mode != "charge" or not had_water:
            return None
        s = min(max(self.problem.saturation(float(y[self.problem.i_w])), 0.0), 1.0)
        return s, float(porous.drying_rate_factor(s, cw.critical_saturation, cw.residual_saturation))

    def summary(self) -> dict:
        """The cycle's keys of summary.json."""
        settled = [c for c in self.cycles if c["period_s"] is not None]
        last = settled[-1] if settled else (self.cycles[-1] if self.cycles else None)
        period = self.settled_period
        out = {
            "outcome": self.outcome, "outcome_reason": self.outcome_reason,
            "first_tip_s": self.tips[0] if self.tips else None, "period_s": period,
            "last_period_s": settled[-1]["period_s"] if settled else None,
            "n_cycles": len(self.tips),
            "dips_per_hour": 3600.0 / period if period else None,
            "water_per_dip_kg": last["water_evaporated_kg"] if last and settled else None,
            "water_per_day_kg": last["water_evaporated_kg"] * 86400.0 / period if period and last else None,
            "evaporative_cooling_w": last["evaporative_cooling_w"] if last else None,
            "dip_heat_into_head_j": last["dip_heat_into_head_j"] if last else None,
            "lift_work_per_dip_j": last["lift_work_j"] if last else None,
            "mechanical_power_w": last["mechanical_power_w"] if last else None,
            "carnot_fraction": last["carnot_fraction"] if last else None,
            "head_body_temperature_difference_k": last["head_body_temperature_difference_k"] if last else None,
            "column_at_tip_m": last["column_at_tip_m"] if last else None,
            "condensate_drained_kg": self.drained, "water_taken_from_glass_kg": self.dipped_water,
        }
        return out
