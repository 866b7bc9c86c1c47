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
  it holds: an evaporating j is scaled by c+ / (c+ + c_ref), with c its condensate inventory
  (kg/m2) and c+ a smooth positive part of c.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fvsolver.boundary import STEFAN_BOLTZMANN
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
        dlat = (water.latent_heat(t + 0.01) - water.latent_heat(t - 0.01)) / 0.02
        es = self.emissivity * STEFAN_BOLTZMANN
        q = (cap["h"] * (self.air_temperature - T_s) + es * (self.surroundings_temperature**4 - T_s**4) - lat * m
             + self.extra_flux)
        dq = -cap["h"] - 4.0 * es * T_s**3 - lat * dm - dlat * m
        return q, dq

    def dheat_flux_dwet(self, T_s, context) -> np.ndarray:
        """dq / d(wet_fraction) at fixed T_s."""
        rho, _ = saturated_water_vapour_density(T_s)
        return -water.latent_heat(_water_range(T_s)) * context["cap"]["h_m"] * (rho - self.vapour_density_air)


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
        # the inventory limiter phi = c+ / (c+ + c_ref) with c+ = c_ref ln(1 + e^(c / c_ref)), a smooth
        # positive part: an evaporating face slows as it dries and stops just below zero.  j stays
        # monotone in T_s (only a kink where the face turns), which the surface solve needs.
        c = vap["inventory"][faces]
        cr = self.film_reference
        x = c / cr
        plus = cr * np.logaddexp(0.0, x)
        phi = plus / (plus + cr)
        dphi = cr / (plus + cr) ** 2 * 0.5 * (1.0 + np.tanh(0.5 * x))  # sigmoid(x) = dplus/dc
        scale = np.where(raw < 0.0, phi, 1.0)
        j = raw * scale
        return j, draw_dt * scale, draw_dp * scale, np.where(raw < 0.0, raw * dphi, 0.0)

    def heat_flux(self, T_s, time, centres, faces, context):
        j, dj, _, _ = self.mass_flux(T_s, faces, context)
        lat = self.fluid.latent_heat(self._clip(T_s))
        return lat * j, lat * dj

    def _clip(self, T_s: np.ndarray) -> np.ndarray:
        """Temperatures inside the fluid's data (trial values of the surface solve may stray);
        the run checks and reports real excursions outside the data range."""
        eq = self.fluid.vapour_pressure
        return np.clip(T_s, max(eq.t_min, self.fluid.liquid_range[0]), min(eq.t_max, self.fluid.liquid_range[1]))

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

    def heat_flux(self, T_s, time, centres, faces, context):
        h = context[self.exchange]["h"]
        es = self.emissivity * STEFAN_BOLTZMANN
        q = h * (self.air_temperature - T_s) + es * (self.surroundings_temperature**4 - T_s**4) + self.extra_flux
        return q, -h - 4.0 * es * T_s**3
