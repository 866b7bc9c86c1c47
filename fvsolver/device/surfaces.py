"""The two coupled surfaces of the head: the evaporating cap and the condensing inner wall.

Both are boundary-condition terms whose flux depends on the lumped state, which reaches
them through the evaluation ``context``:

* cap (evaporative flux), with the wetted fraction phi and the transfer coefficients:

  .. math:: q = h (T_a - T_s) + \\varepsilon\\sigma(T_{sur}^4 - T_s^4)
            - L_w(T_s)\\,\\phi\\,h_m(\\rho_{v,sat}(T_s) - \\rho_{v,\\infty})

* inner wall (Hertz-Knudsen-Schrage condensation, positive when condensing), with the vapour
  next to the interface at the interface's temperature (the vapour's bulk temperature T_v sets
  only its pressure, p_v = m_v R T_v / (M V)):

  .. math:: j = \\frac{2\\sigma}{2-\\sigma}\\sqrt{\\frac{M}{2\\pi R T_s}}
            \\left(p_v - p_{sat}(T_s)\\right),
            \\qquad q = L(T_s)\\,j

  so a pure vapour in contact with a wet face at rest is at that face's saturation pressure
  whatever the bulk temperature (Schrage 1953 with a film-side gas temperature; the usual
  linearised interfacial form, as in ht.condensation.h_kinetic).  A face re-evaporates only what
  it holds: an evaporating j is scaled by phi = c / (c + c_ref), with c >= 0 its condensate
  inventory (kg/m2), so that an inventory never goes below zero (backward Euler keeps
  c_new = c_old + dt j(c_new) >= 0 whenever c_old >= 0).

Each term also hands its parameters to the compiled face-by-face solve
(``fvsolver.kernels.surfaces``): ``surface_kind`` and ``surface_parameters(faces, centres,
context)``; the terms' own ``heat_flux`` is that kernel's Python twin.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fvsolver.boundary import STEFAN_BOLTZMANN
from fvsolver.kernels import surfaces as ks
from fvsolver.properties import water
from fvsolver.properties.fluids import UNIVERSAL_GAS_CONSTANT, WorkingFluid

WATER_T_MIN, WATER_T_MAX = 273.16, 372.0  # the water correlations' range (ice is not modelled)


def _water_range(T: np.ndarray) -> np.ndarray:
    return np.clip(T, WATER_T_MIN, WATER_T_MAX)


def saturated_water_vapour_density(T: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """rho_v,sat (kg/m3) and its T-derivative, ideal gas over IAPWS-IF97 p_sat."""
    t = _water_range(T)
    p = water.saturation_pressure(t)
    dp = water.dsaturation_pressure_dT(t)
    c = water.MOLAR_MASS / UNIVERSAL_GAS_CONSTANT
    return c * p / t, c * (dp / t - p / t**2)


def water_latent_heat(T: np.ndarray) -> np.ndarray:
    """Water's latent heat (J/kg) at T inside the correlations' range."""
    return water.latent_heat(_water_range(T))


def water_latent_heat_derivative(T: np.ndarray) -> np.ndarray:
    """dL/dT of water's latent heat (PPDS12, as fvsolver.properties.water.latent_heat), J/(kg K)."""
    tau = 1.0 - T / water._PPDS12_TC
    a, b, c, d, e = water._PPDS12
    dtau = a / 3.0 * tau ** (-2 / 3) + 2.0 * b / 3.0 * tau ** (-1 / 3) + c + 2.0 * d * tau + 6.0 * e * tau**5
    return -water._R * dtau / water.MOLAR_MASS


def _rows(n: int) -> np.ndarray:
    return np.zeros((n, ks.PARAMETERS))


@dataclass(frozen=True)
class EvaporativeCap:
    """The wetted cap surface: convection, radiation and evaporation of water.

    ``context["cap"]`` supplies ``h`` (W/(m2 K)), ``h_m`` (m/s) and ``wet_fraction`` (-).
    """

    air_temperature: float
    vapour_density_air: float
    emissivity: float
    surroundings_temperature: float
    extra_flux: float = 0.0
    coupled = True

    def validate(self, where: str) -> None:
        return None

    def mass_flux(self, T_s: np.ndarray, context) -> tuple[np.ndarray, np.ndarray]:
        """Evaporation, kg/(m2 s), and its derivative with respect to T_s."""
        cap = context["cap"]
        rho, drho = saturated_water_vapour_density(T_s)
        k = cap["wet_fraction"] * cap["h_m"]
        return k * (rho - self.vapour_density_air), k * drho

    def heat_flux(self, T_s, time, centres, faces, context):
        cap = context["cap"]
        m, dm = self.mass_flux(T_s, context)
        t = _water_range(T_s)
        lat = water.latent_heat(t)
        dlat = water_latent_heat_derivative(t)
        es = self.emissivity * STEFAN_BOLTZMANN
        q = (cap["h"] * (self.air_temperature - T_s) + es * (self.surroundings_temperature**4 - T_s**4) - lat * m
             + self.extra_flux)
        dq = -cap["h"] - 4.0 * es * T_s**3 - lat * dm - dlat * m
        return q, dq

    surface_kind = ks.CAP

    def surface_parameters(self, faces, centres, context) -> np.ndarray:
        """The compiled solve's parameter rows (``fvsolver.kernels.surfaces``), (n_faces, PARAMETERS)."""
        cap = context["cap"]
        p = _rows(len(faces))
        p[:, ks.H], p[:, ks.T_AIR], p[:, ks.EXTRA] = cap["h"], self.air_temperature, self.extra_flux
        p[:, ks.RADIATION], p[:, ks.T_SURROUNDINGS] = self.emissivity * STEFAN_BOLTZMANN, self.surroundings_temperature
        p[:, ks.EVAPORATION], p[:, ks.RHO_AIR] = cap["wet_fraction"] * cap["h_m"], self.vapour_density_air
        return p

    def update_surface_parameters(self, rows, faces, context) -> None:
        """Rewrite, in place, the columns of ``surface_parameters``' rows that the context sets."""
        cap = context["cap"]
        rows[:, ks.H] = cap["h"]
        rows[:, ks.EVAPORATION] = cap["wet_fraction"] * cap["h_m"]

    def dheat_flux_dwet(self, T_s, context) -> np.ndarray:
        """dq / d(wet_fraction) at fixed T_s."""
        t = _water_range(T_s)
        rho = water.MOLAR_MASS / UNIVERSAL_GAS_CONSTANT * water.saturation_pressure(t) / t  # (no slope needed)
        return -water.latent_heat(t) * context["cap"]["h_m"] * (rho - self.vapour_density_air)


@dataclass(frozen=True)
class CondensingWall:
    """An inner wall of the vapour space: condensation and re-evaporation of the working fluid.

    ``context["vapour"]`` supplies ``pressure`` (Pa, the fluid's partial pressure), ``temperature``
    (K), ``inventory`` (kg/m2 per boundary face; only this patch's entries are read).
    """

    fluid: WorkingFluid
    accommodation: float
    kinetic_multiplier: float = 1.0
    film_reference: float = 1e-5  # kg/m2, ~10 nm of liquid: below this a face dries smoothly
    # kg/(m2 s): the width over which the limiter turns on as a face turns from condensing to
    # re-evaporating (a smooth positive part of the raw flux instead of a kink, which Newton's
    # method would otherwise cycle across on a dry face at equilibrium)
    flux_smoothing: float = 1e-6
    coupled = True

    @property
    def coefficient(self) -> float:
        """(2 sigma / (2 - sigma)) sqrt(M / (2 pi R)), s/m x multiplier."""
        s = self.accommodation
        return self.kinetic_multiplier * 2.0 * s / (2.0 - s) * np.sqrt(
            self.fluid.molar_mass / (2.0 * np.pi * UNIVERSAL_GAS_CONSTANT))

    def validate(self, where: str) -> None:
        return None

    def mass_flux(self, T_s: np.ndarray, faces: np.ndarray, context):
        """Condensation j (kg/(m2 s)) and its derivatives: dj/dT_s, dj/dp_v, dj/dc."""
        vap = context["vapour"]
        beta = self.coefficient
        t = self._clip(T_s)
        ps = self.fluid.saturation_pressure(t)
        dps = self.fluid.dsaturation_pressure_dT(t)
        root = np.sqrt(t)
        excess = vap["pressure"] - ps
        raw = beta * excess / root
        draw_dt = -beta * (dps / root + 0.5 * excess / (t * root))
        draw_dp = beta / root
        # the inventory limiter phi = c / (c + c_ref) (c >= 0; the stepper keeps iterates there) on the
        # re-evaporating part: j = phi raw + (1 - phi) s(raw), s = eps ln(1 + e^(raw / eps)) a smooth
        # positive part of raw.  An evaporating face slows as it dries and stops at zero (at c = 0,
        # j = s(raw) >= 0); j stays monotone in T_s, which the surface solve needs.  dphi/dc is the
        # right derivative at c = 0, so that Newton's iterates on a drying face approach the root
        # from above zero.
        c = np.maximum(vap["inventory"][faces], 0.0)
        cr, eps = self.film_reference, self.flux_smoothing
        phi = c / (c + cr)
        dphi = cr / (c + cr) ** 2
        x = raw / eps
        plus = eps * np.logaddexp(0.0, x)
        sig = 0.5 * (1.0 + np.tanh(0.5 * x))  # the logistic function, ds/draw
        j = phi * raw + (1.0 - phi) * plus
        dj_draw = phi + (1.0 - phi) * sig
        return j, dj_draw * draw_dt, dj_draw * draw_dp, (raw - plus) * dphi

    def heat_flux(self, T_s, time, centres, faces, context):
        j, dj, _, _ = self.mass_flux(T_s, faces, context)
        t = self._clip(T_s)
        lat = self.fluid.latent_heat(t)
        return lat * j, lat * dj + self.fluid.dlatent_heat_dT(t) * j

    surface_kind = ks.WALL

    def surface_parameters(self, faces, centres, context) -> np.ndarray:
        """The compiled solve's parameter rows (``fvsolver.kernels.surfaces``), (n_faces, PARAMETERS)."""
        vap = context["vapour"]
        p = _rows(len(faces))
        p[:, ks.P_VAPOUR] = vap["pressure"]
        p[:, ks.INVENTORY] = vap["inventory"][faces]
        return p

    def update_surface_parameters(self, rows, faces, context) -> None:
        """Rewrite, in place, the columns of ``surface_parameters``' rows that the context sets."""
        vap = context["vapour"]
        rows[:, ks.P_VAPOUR] = vap["pressure"]
        rows[:, ks.INVENTORY] = vap["inventory"][faces]

    def fluid_constants(self) -> np.ndarray:
        """The compiled solve's fluid vector (``fvsolver.kernels.surfaces.FLUID_CONSTANTS`` entries)."""
        f, eq = self.fluid, self.fluid.vapour_pressure
        lo, hi = self._limits()
        return np.array([self.coefficient, self.film_reference, lo, hi, eq.critical_temperature,
                         eq.critical_pressure, eq.a, eq.b, eq.c, eq.d, f.critical_temperature,
                         *f.latent_heat_ppds12, UNIVERSAL_GAS_CONSTANT * f.critical_temperature, f.molar_mass,
                         self.flux_smoothing])

    def _clip(self, T_s: np.ndarray) -> np.ndarray:
        """Temperatures inside the fluid's data (trial values of the surface solve may stray);
        the run checks and reports real excursions outside the data range."""
        return np.clip(T_s, *self._limits())

    def _limits(self) -> tuple[float, float]:
        """The fluid's data range, closed just below the critical point (where the latent heat's
        slope is infinite)."""
        eq, f = self.fluid.vapour_pressure, self.fluid
        return max(eq.t_min, f.liquid_range[0]), min(eq.t_max, f.liquid_range[1]) * (1.0 - 1e-9)

    def latent_heat(self, T_s: np.ndarray) -> np.ndarray:
        return self.fluid.latent_heat(self._clip(T_s))


@dataclass(frozen=True)
class RoomSurface:
    """A dry outer surface in the room: convection with the room's coefficient, radiation and an
    optional imposed heat flux (a lamp, sunlight; W/m2 into the body).

    ``context[exchange]["h"]`` supplies the convection coefficient, W/(m2 K): ``"room"`` (the head's),
    ``"body"`` (the body bulb's) or a warm air stream's entry.
    """

    air_temperature: float
    emissivity: float
    surroundings_temperature: float
    extra_flux: float = 0.0
    exchange: str = "room"
    coupled = True

    def validate(self, where: str) -> None:
        return None

    surface_kind = ks.DRY

    def surface_parameters(self, faces, centres, context) -> np.ndarray:
        """The compiled solve's parameter rows (``fvsolver.kernels.surfaces``), (n_faces, PARAMETERS)."""
        p = _rows(len(faces))
        p[:, ks.H], p[:, ks.T_AIR], p[:, ks.EXTRA] = context[self.exchange]["h"], self.air_temperature, self.extra_flux
        p[:, ks.RADIATION], p[:, ks.T_SURROUNDINGS] = self.emissivity * STEFAN_BOLTZMANN, self.surroundings_temperature
        return p

    def update_surface_parameters(self, rows, faces, context) -> None:
        """Rewrite, in place, the column of ``surface_parameters``' rows that the context sets."""
        rows[:, ks.H] = context[self.exchange]["h"]

    def heat_flux(self, T_s, time, centres, faces, context):
        h = context[self.exchange]["h"]
        es = self.emissivity * STEFAN_BOLTZMANN
        q = h * (self.air_temperature - T_s) + es * (self.surroundings_temperature**4 - T_s**4) + self.extra_flux
        return q, -h - 4.0 * es * T_s**3
