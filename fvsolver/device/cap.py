"""The wet porous cap as a material whose properties follow its water saturation."""
from __future__ import annotations

from dataclasses import dataclass

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

    @property
    def water_volumetric_heat(self) -> float:
        t = 293.15
        return float(water.liquid_density(t) * water.liquid_heat_capacity(t))

    def _s(self, context) -> float:
        return 1.0 if context is None else float(context["cap"]["saturation"])

    def volumetric_heat_at(self, saturation: float) -> float:
        return float(porous.effective_volumetric_heat_capacity(
            self.porosity, saturation, self.fibre_density * self.fibre_heat_capacity,
            self.water_volumetric_heat, AIR_VOLUMETRIC_HEAT))

    def conductivity_at(self, T: np.ndarray, context=None) -> np.ndarray:
        k = porous.effective_conductivity(self.porosity, np.clip(self._s(context), 0.0, 1.0), self.fibre_conductivity,
                                          WATER_CONDUCTIVITY, float(air_thermal_conductivity(293.15)), self.model)
        return np.full(np.shape(T), float(k))

    def volumetric_energy(self, T: np.ndarray, context=None) -> np.ndarray:
        return self.volumetric_heat_at(np.clip(self._s(context), 0.0, 1.0)) * (np.asarray(T) - REFERENCE_TEMPERATURE)

    def volumetric_heat_capacity(self, T: np.ndarray, context=None) -> np.ndarray:
        return np.full(np.shape(T), self.volumetric_heat_at(np.clip(self._s(context), 0.0, 1.0)))

    def denergy_dsaturation(self, T: np.ndarray) -> np.ndarray:
        """d(volumetric energy)/ds, J/m3."""
        return self.porosity * (self.water_volumetric_heat - AIR_VOLUMETRIC_HEAT) * (T - REFERENCE_TEMPERATURE)
