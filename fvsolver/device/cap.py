"""The wet porous cap as a material whose properties follow its water saturation."""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from fvsolver.errors import CaseError
from fvsolver.materials import REFERENCE_TEMPERATURE
from fvsolver.properties import porous, water
from fvsolver.properties.moist_air import air_thermal_conductivity

WATER_CONDUCTIVITY = 0.598      # W/(m K) at 20 C (IAPWS 2011 formulation, from memory)
AIR_VOLUMETRIC_HEAT = 1.2 * 1006.0  # J/(m3 K), dry air near 20 C (common practice)


@dataclass(frozen=True)
class PorousCap:
    """Wool-felt-like cap: fibre skeleton, pores holding water (saturation s) and air.

    The saturation comes from ``context["cap"]["saturation"]``; the mixing model is one of
    Wang, Carson, North & Cleland (Int. J. Heat Mass Transfer 49, 2006).
    """

    name: str
    porosity: float
    fibre_density: float
    fibre_conductivity: float
    fibre_heat_capacity: float
    model: str = "maxwell_eucken"
    context_dependent = True

    def __post_init__(self) -> None:
        if not 0.0 < self.porosity < 1.0:
            raise CaseError(f"cap.porosity: got {self.porosity!r}, expected a value in (0, 1) (felt: 0.8-0.95)")

    @cached_property
    def water_volumetric_heat(self) -> float:
        t = 293.15
        return float(water.liquid_density(t) * water.liquid_heat_capacity(t))

    @cached_property
    def _air_conductivity(self) -> float:
        return float(air_thermal_conductivity(293.15))

    def _s(self, context) -> float:
        return 1.0 if context is None else float(context["cap"]["saturation"])

    def volumetric_heat_at(self, saturation: float) -> float:
        return float(porous.effective_volumetric_heat_capacity(
            self.porosity, saturation, self.fibre_density * self.fibre_heat_capacity,
            self.water_volumetric_heat, AIR_VOLUMETRIC_HEAT))

    def _properties(self, context) -> tuple[float, float]:
        """(k W/(m K), rho c J/(m3 K)) at the context's saturation clipped to [0, 1]; the last pair
        is kept, as every evaluation of a step asks for the same saturation (constant while a
        reservoir keeps the cap wet)."""
        s = min(max(self._s(context), 0.0), 1.0)
        last = self.__dict__.get("_last")
        if last is not None and last[0] == s:
            return last[1], last[2]
        if last is None or not 0.0 <= s <= 1.0:
            # the checked functions: the first time (they validate the fixed inputs) and for a NaN
            k = float(porous.effective_conductivity(self.porosity, s, self.fibre_conductivity, WATER_CONDUCTIVITY,
                                                    self._air_conductivity, self.model))
            rho_c = self.volumetric_heat_at(s)
        else:
            # their operations on plain floats (the inputs were validated on the first call)
            phi = self.porosity
            v_f, v_w, v_a = 1.0 - phi, phi * s, phi * (1.0 - s)
            k = float(porous.mixture_conductivity((v_f, v_w, v_a), (self.fibre_conductivity, WATER_CONDUCTIVITY,
                                                                    self._air_conductivity), self.model))
            rho_c = (v_f * (self.fibre_density * self.fibre_heat_capacity) + v_w * self.water_volumetric_heat
                     + v_a * AIR_VOLUMETRIC_HEAT)
        self.__dict__["_last"] = (s, k, rho_c)  # a cache, not a field: the dataclass stays frozen
        return k, rho_c

    def uniform_properties(self, context) -> tuple[float, float]:
        """(k W/(m K), rho c J/(m3 K)), the same in every cap cell at one context (they follow the
        saturation only): the conduction problem fills its per-cell arrays from these two numbers
        and keeps them while they stay the same."""
        return self._properties(context)

    def conductivity_at(self, T: np.ndarray, context=None) -> np.ndarray:
        return np.full(np.shape(T), self._properties(context)[0])

    def volumetric_energy(self, T: np.ndarray, context=None) -> np.ndarray:
        return self._properties(context)[1] * (np.asarray(T) - REFERENCE_TEMPERATURE)

    def volumetric_heat_capacity(self, T: np.ndarray, context=None) -> np.ndarray:
        return np.full(np.shape(T), self._properties(context)[1])

    @property
    def energy_slope(self) -> float:
        """d(volumetric energy)/ds per kelvin above the reference, J/(m3 K)."""
        return self.porosity * (self.water_volumetric_heat - AIR_VOLUMETRIC_HEAT)

    def denergy_dsaturation(self, T: np.ndarray) -> np.ndarray:
        """d(volumetric energy)/ds, J/m3."""
        return self.energy_slope * (T - REFERENCE_TEMPERATURE)
