"""The device's inputs as small frozen dataclasses: room, cap water, vapour space, second bulb,
target and safety limits."""
from __future__ import annotations

import math
from dataclasses import dataclass, field

from fvsolver.properties import moist_air, water
from fvsolver.properties.fluids import UNIVERSAL_GAS_CONSTANT, WorkingFluid

GRAVITY = 9.80665  # m/s2, standard gravity


@dataclass(frozen=True)
class Room:
    """The air around the head.

    air_temperature (K), relative_humidity (0-1), pressure (Pa), air_speed (m/s),
    convection: "natural", "forced", "mixed" (sphere correlations) or "given",
    heat_transfer_coefficient (W/(m2 K), for "given"), surroundings_temperature (K),
    emissivity of the head's outer surfaces, lewis_number (None: from the air properties),
    diameter (m) of the head for the correlations, extra_flux: patch -> W/m2 imposed.
    """

    air_temperature: float
    relative_humidity: float
    pressure: float
    air_speed: float
    convection: str
    heat_transfer_coefficient: float | None
    surroundings_temperature: float
    emissivity: float
    lewis_number: float | None
    diameter: float
    extra_flux: dict = field(default_factory=dict)

    @property
    def vapour_pressure(self) -> float:
        return float(moist_air.vapour_pressure_from_relative_humidity(self.air_temperature, self.relative_humidity))

    @property
    def vapour_density(self) -> float:
        return float(moist_air.vapour_density(self.vapour_pressure, self.air_temperature))

    @property
    def wet_bulb_temperature(self) -> float:
        return float(moist_air.wet_bulb_temperature(self.air_temperature, self.relative_humidity, self.pressure))


@dataclass(frozen=True)
class CapWater:
    """Water in the cap: mode "reservoir" (kept wet) or "charge" (a finite amount)."""

    mode: str
    initial_saturation: float
    critical_saturation: float
    residual_saturation: float
    reservoir_temperature: float
    rewettings: tuple = ()  # (time s, mass kg, temperature K)

    @property
    def water_heat_capacity(self) -> float:
        return float(water.liquid_heat_capacity(293.15))


@dataclass(frozen=True)
class VapourSpace:
    """The head's vapour space: fluid, volume, condensation model and fill."""

    fluid: WorkingFluid
    volume: float
    accommodation: float
    model: str
    non_condensable_initial_pressure: float
    initial_temperature: float
    initial_film: float
    patches: tuple

    @property
    def kinetic_multiplier(self) -> float:
        # the quasi-equilibrium limit: an interfacial resistance far below the wall's
        return 1.0 if self.model == "kinetic" else 1.0e3 / self.accommodation

    def vapour_mass(self, temperature: float) -> float:
        """Saturated vapour mass at ``temperature`` (ideal gas), kg."""
        p = float(self.fluid.saturation_pressure(temperature))
        return p * self.volume * self.fluid.molar_mass / (UNIVERSAL_GAS_CONSTANT * temperature)

    def non_condensable_pressure(self, temperature: float) -> float:
        return self.non_condensable_initial_pressure * temperature / self.initial_temperature


@dataclass(frozen=True)
class SecondBulb:
    """The second (warmer) bulb: "room" (at the air temperature) or "lumped" (mass, losses, heater)."""

    mode: str
    heat_capacity: float
    loss_conductance: float
    heater_power: float
    initial_temperature: float


@dataclass(frozen=True)
class Target:
    """The pressure drop that lifts the column: given directly, or rho_l(T_b) g h."""

    pressure_drop: float | None
    column_height: float | None
    stop_when_reached: bool

    def value(self, fluid: WorkingFluid, bulb_temperature: float) -> float:
        if self.pressure_drop is not None:
            return self.pressure_drop
        return float(fluid.liquid_density(bulb_temperature)) * GRAVITY * self.column_height


@dataclass(frozen=True)
class Safety:
    max_absolute_pressure: float
    max_glass_temperature: float


@dataclass(frozen=True)
class Body:
    """The body bulb of a whole device and its pool (see :mod:`fvsolver.device.body`).

    pool: PoolGeometry (level, centre of mass); initial_pool_mass (kg); initial_temperature (K);
    liquid_coefficient, vapour_coefficient (W/(m2 K), to the inner glass below / above the level);
    liquid_heat_capacity (J/(kg K), held constant over a run); diameter (m, outer, for the room's
    correlations); hot_air: ((patch, air temperature K, air speed m/s), ...); equalisation_time (s).
    """

    pool: object
    initial_pool_mass: float
    initial_temperature: float
    liquid_coefficient: float
    vapour_coefficient: float
    liquid_heat_capacity: float
    diameter: float
    hot_air: tuple = ()
    equalisation_time: float = 0.1


@dataclass(frozen=True)
class CycleSpec:
    """How a whole device runs: tip (TipModel), stay tipped, stand up, settle.

    tipped_time, refill_time (s); water_glass (bool) with water_temperature (K); period_tolerance (-),
    settle_cycles, max_cycles; stop_when_settled.
    """

    tip: object
    tipped_time: float
    refill_time: float
    water_glass: bool
    water_temperature: float
    period_tolerance: float
    settle_cycles: int
    max_cycles: int
    stop_when_settled: bool


@dataclass(frozen=True)
class DeviceSpec:
    room: Room
    cap_water: CapWater
    vapour: VapourSpace
    second_bulb: SecondBulb
    target: Target
    safety: Safety
    body: Body | None = None
    cycle: CycleSpec | None = None


def bulb_volume(inner_radius: float) -> float:
    return 4.0 / 3.0 * math.pi * inner_radius**3
