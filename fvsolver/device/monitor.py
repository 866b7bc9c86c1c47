"""What a device run watches: the pressure difference, the target crossing inside a step,
re-wettings, the safety figures, and why a design stalls."""
from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq

from fvsolver.materials import REFERENCE_TEMPERATURE
from fvsolver.properties import convection, moist_air


class DeviceMonitor:
    """Follows a device run step by step.

    Attributes
    ----------
    time_to_target : float or None, s (located inside the step by the stepper's interpolant)
    max_pressure_drop, max_pressure_drop_time : Pa, s
    dried_out_time : float or None, s (cap water below its residual level)
    """

    def __init__(self, problem, t0: float, y0: np.ndarray):
        self.problem, self.spec = problem, problem.spec
        self.time_to_target: float | None = None
        self.max_pressure_drop, self.max_pressure_drop_time = -math.inf, t0
        self.max_absolute_pressure = 0.0
        self.max_glass_temperature = -math.inf
        self.min_inner_wall_temperature = math.inf
        self.dried_out_time: float | None = None
        self.added_energy = 0.0
        self.added_water = 0.0
        self._previous = (t0, self.margin(y0))
        self._update_extremes(t0, y0)

    def target(self, y: np.ndarray) -> float:
        """The pressure difference to reach, Pa: the target's, or for a whole device the one whose
        column brings the centre of mass to the pivot."""
        if self.spec.cycle is not None:
            return self.problem.tip_pressure_drop(y)
        return self.spec.target.value(self.spec.vapour.fluid, float(y[self.problem.i_tb]))

    def margin(self, y: np.ndarray) -> float:
        """Pressure difference minus the target, Pa (>= 0: reached)."""
        return self.problem.pressures(y)["pressure_drop_pa"] - self.target(y)

    def _update_extremes(self, t: float, y: np.ndarray) -> None:
        p = self.problem.pressures(y)
        if p["pressure_drop_pa"] > self.max_pressure_drop:
            self.max_pressure_drop, self.max_pressure_drop_time = p["pressure_drop_pa"], t
        self.max_absolute_pressure = max(self.max_absolute_pressure, p["head_pa"], p["second_bulb_pa"])
        mesh = self.problem.mesh
        glass = mesh.cell_material == mesh.material_names.index("glass")
        self.max_glass_temperature = max(self.max_glass_temperature, float(y[: mesh.n_cells][glass].max()))
        self.min_inner_wall_temperature = min(self.min_inner_wall_temperature, self.problem.vapour_temperature(
            y[: mesh.n_cells]))
        self.last_time = t
        if self.dried_out_time is None:
            s = self.problem.saturation(y[self.problem.i_w])
            if s <= self.spec.cap_water.residual_saturation + 1e-9:
                self.dried_out_time = t

    def after_step(self, stepper) -> bool:
        """Record the step; True when the target has just been reached."""
        t, y = stepper.t, stepper.y
        self._update_extremes(t, y)
        t0, m0 = self._previous
        m1 = self.margin(y)
        self._previous = (t, m1)
        if self.time_to_target is None and m0 < 0.0 <= m1:
            f = lambda s: self.margin(stepper.dense(s))  # noqa: E731 - the interpolated margin
            self.time_to_target = t if f(t) <= 0.0 or f(t0) >= 0.0 else brentq(f, t0, t, xtol=1e-12 * max(t, 1.0))
            return True
        return False

    def rewet(self, y: np.ndarray, mass: float, temperature: float) -> np.ndarray:
        """State after adding ``mass`` kg of water at ``temperature`` K, spread through the cap
        (what the pores cannot hold drips off and is not counted)."""
        p = self.problem
        y = y.copy()
        cells = p.cap_cells
        v = p.mesh.cell_volumes[cells]
        before = p.conduction.capacity(y[: p.n_cells], p.context(y))[0][cells]
        taken = max(0.0, min(mass, p.pore_water_capacity - y[p.i_w]))
        added = taken * self.spec.cap_water.water_heat_capacity * (temperature - REFERENCE_TEMPERATURE)
        y[p.i_w] += taken
        rho_c = p.cap_material.volumetric_heat_at(min(max(p.saturation(y[p.i_w]), 0.0), 1.0))
        y[cells] = REFERENCE_TEMPERATURE + (before + added * v / v.sum()) / (v * rho_c)
        self.added_energy += added
        self.added_water += taken
        self.dried_out_time = None if taken > 0 else self.dried_out_time
        return y

    def stall_reason(self, y: np.ndarray, end_time: float) -> str:
        """Why the target was not reached, in plain words."""
        spec, p = self.spec, self.problem
        room = spec.room
        target = self.target(y)
        fluid = spec.vapour.fluid
        t_wb = room.wet_bulb_temperature
        t_b = float(y[p.i_tb])
        # the bound comes from the model's own coldest wet surface (its Lewis-number analogy and
        # radiation put it below the thermodynamic wet-bulb), so no run can exceed the stated bound
        t_ws = wet_surface_temperature(p)
        vap = spec.vapour
        limit = float(fluid.saturation_pressure(t_b) + vap.non_condensable_pressure(t_b)
                      - fluid.saturation_pressure(t_ws) - vap.non_condensable_pressure(t_ws))
        depression = room.air_temperature - t_ws
        reasons = []
        if limit < target:
            reasons.append(
                f"the room is too humid: at {room.air_temperature - 273.15:.1f} C and "
                f"{100 * room.relative_humidity:.0f} % relative humidity a fully wet cap with no heat from "
                f"inside settles at {t_ws - 273.15:.2f} C ({depression:.2f} K below the air; wet-bulb "
                f"{t_wb - 273.15:.2f} C), which allows at most about {_pressure(max(limit, 0.0))} "
                f"against the target {_pressure(target)}")
        if self.dried_out_time is not None:
            reasons.append(f"the cap dried out at t = {self.dried_out_time:.0f} s")
        extra = sum(room.extra_flux.values())
        head_mean = p.vapour_temperature(y[: p.n_cells])
        if extra > 0.0:
            reasons.append(f"heat reaches the head ({extra:.0f} W/m2 imposed on its outer surfaces), holding its "
                           f"inner wall at {head_mean - 273.15:.1f} C")
        elif head_mean >= room.air_temperature - 0.05 and limit >= target:
            reasons.append(f"heat reaches the head: its inner wall stays at {head_mean - 273.15:.1f} C, no colder "
                           "than the room")
        if not reasons:
            reasons.append(f"the end time ({end_time:.0f} s) came first")
        best = (f"; the largest difference reached was {_pressure(self.max_pressure_drop)} at "
                f"t = {self.max_pressure_drop_time:.0f} s (target {_pressure(target)})")
        return "; ".join(reasons) + best

    def warnings(self) -> list[str]:
        s = self.spec.safety
        out = []
        if self.max_absolute_pressure > s.max_absolute_pressure:
            out.append(f"internal pressure reached {self.max_absolute_pressure:.0f} Pa absolute, above the limit "
                       f"{s.max_absolute_pressure:.0f} Pa set for sealed glass")
        if self.max_glass_temperature > s.max_glass_temperature:
            out.append(f"glass temperature reached {self.max_glass_temperature:.2f} K, above the limit "
                       f"{s.max_glass_temperature:.2f} K")
        eq = self.spec.vapour.fluid.vapour_pressure
        if not eq.t_min <= self.min_inner_wall_temperature <= eq.t_max:
            out.append(f"the inner wall reached {self.min_inner_wall_temperature:.2f} K, outside the fluid's data "
                       f"range {eq.t_min:g}-{eq.t_max:g} K")
        return out

    def history_columns(self, stepper) -> dict:
        """Device columns of one history row."""
        p, y = self.problem, stepper.y
        pr = p.pressures(y)
        ev = stepper.last_evaluation
        mesh = p.mesh
        cap_cells = p.cap_cells
        row = {"pressure_drop_pa": pr["pressure_drop_pa"], "head_pressure_pa": pr["head_pa"],
               "second_bulb_pressure_pa": pr["second_bulb_pa"], "target_pressure_drop_pa": self.target(y),
               "mean_cap_temperature_k": float(np.average(y[cap_cells], weights=mesh.cell_volumes[cap_cells])),
               "mean_inner_wall_temperature_k": pr["vapour_temperature_k"],
               "second_bulb_temperature_k": float(y[p.i_tb]), "cap_water_kg": float(y[p.i_w]),
               "cap_saturation": float(p.saturation(y[p.i_w]))}
        if ev is not None and hasattr(ev, "evaporation"):
            row["evaporation_rate_kg_s"] = float(np.dot(mesh.boundary_areas[p.cap_faces], ev.evaporation))
            row["condensation_rate_kg_s"] = float(np.dot(p.inner_area, ev.condensation))
        else:
            row["evaporation_rate_kg_s"] = 0.0
            row["condensation_rate_kg_s"] = 0.0
        row["condensate_kg"] = float(np.dot(p.inner_area, y[p.i_c]))
        return row


def _pressure(pa: float) -> str:
    """A pressure as the report and the plots write it (one number, one spelling everywhere):
    Pa below 1 kPa (3 significant digits below 10 Pa), else kPa."""
    a = abs(pa)
    if a < 1e3:
        return f"{pa:.0f} Pa" if a >= 10 else f"{pa:.3g} Pa"
    return f"{pa / 1e3:.3g} kPa" if a < 1e5 else f"{pa / 1e3:.1f} kPa"


def wet_surface_temperature(problem) -> float:
    """The coldest temperature the model's cap can reach, K: a fully wet cap that receives no heat
    from inside, where convection and radiation from the room balance evaporation,

    .. math:: h (T_a - T_s) + \\varepsilon\\sigma (T_{sur}^4 - T_s^4) = L_w(T_s)\\,h_m (\\rho_{v,sat}(T_s) - \\rho_{v,\\infty})

    with the model's own h(T_s) and h_m (Chilton-Colburn) for the head's diameter.
    """
    room = problem.spec.room
    cap = problem.cap_term

    def coefficients(t_s: float) -> dict:
        t_s = min(max(t_s, 274.0), 320.0)  # the correlations' range, as in the run
        if room.convection == "given":
            h = room.heat_transfer_coefficient
        else:
            h = float(convection.sphere_convection(problem.outer_diameter, t_s, room.air_temperature,
                                                   room.pressure, room.air_speed, room.convection).h)
        h_m = float(convection.mass_transfer_coefficient(h, 0.5 * (t_s + room.air_temperature), room.pressure,
                                                         room.lewis_number))
        return {"cap": {"h": h, "h_m": h_m, "wet_fraction": 1.0}}

    def balance(t_s: float) -> float:
        q, _ = cap.heat_flux(np.array([t_s]), 0.0, None, None, coefficients(t_s))
        return float(q[0])

    hot = max(room.air_temperature, room.surroundings_temperature)
    if balance(hot) >= 0.0:  # a saturated room: nothing to cool by
        return hot
    if balance(273.16) <= 0.0:  # below the water data (the loader refuses such rooms)
        return 273.16
    return float(brentq(balance, 273.16, hot, xtol=1e-6))


def room_summary(room) -> dict:
    return {"air_temperature_k": room.air_temperature, "relative_humidity": room.relative_humidity,
            "wet_bulb_temperature_k": room.wet_bulb_temperature,
            # perfectly dry air (relative humidity 0) has no dew point
            "dew_point_k": float(moist_air.dew_point(room.vapour_pressure)) if room.vapour_pressure > 0 else None}
