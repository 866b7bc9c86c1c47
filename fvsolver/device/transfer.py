"""The device's outside transfer coefficients: a sphere's h in one air stream and the cap's h_m.

Each coefficient is asked for once per evaluation at one mean surface temperature, clipped into a
fixed interval (iterates may stray outside the correlations' range). Everything else it depends on
(diameter, air temperature, pressure, speed, mode, Lewis number) is fixed by the case, so the range
checks of ``fvsolver.properties`` are run once here, at set-up, over the whole clipping interval;
the evaluations then call the unchecked scalar kernels of ``fvsolver.kernels.transfer``. Where that
validation fails (a case whose air leaves a correlation's range somewhere inside the interval), or
numba's JIT is off, every call takes the checked NumPy functions instead, which refuse the state
only when it is reached, as before.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from fvsolver.errors import PropertyError
from fvsolver.kernels import transfer as kt
from fvsolver.properties import convection

# samples of the clipping interval checked at set-up: Pr, Ra and Re are monotone in the surface
# temperature on each side of the air's temperature, so the ends and the air's temperature bound
# them; the interior samples are a margin
_SAMPLES = 33
# the central difference's half-step, K: its truncation error is about step^2 h'''/6 (1e-8
# relative at 1 K from the air's temperature), its round-off eps h / step (1e-12 relative)
DERIVATIVE_STEP = 1.0e-3


@dataclass(frozen=True)
class SphereTransfer:
    """h of a sphere of ``diameter`` (m) in air at ``air_temperature`` (K), ``pressure`` (Pa) and
    ``air_speed`` (m/s), ``mode`` "natural", "forced", "mixed" or "given" (``h_given``,
    W/(m2 K)), for surface temperatures clipped into [t_low, t_high] (K), with the Chilton-Colburn
    h_m (m/s) at the film temperature (``lewis``: None computes the Lewis number from the air)."""

    diameter: float
    air_temperature: float
    pressure: float
    air_speed: float
    mode: str
    t_low: float
    t_high: float
    h_given: float = 0.0
    lewis: float | None = None
    mass_transfer: bool = True   # whether h_m is asked for too (validated over the interval)
    compiled: bool = field(init=False)

    def __post_init__(self):
        from fvsolver.kernels import COMPILED

        object.__setattr__(self, "compiled", COMPILED and self._valid_over_interval())
        object.__setattr__(self, "_code", kt.MODE_CODES[self.mode])
        object.__setattr__(self, "_lewis", -1.0 if self.lewis is None else float(self.lewis))

    def _valid_over_interval(self) -> bool:
        """True when the checked NumPy functions accept every clipped surface temperature."""
        t = np.linspace(self.t_low, self.t_high, _SAMPLES)
        if self.t_low < self.air_temperature < self.t_high:
            t = np.append(t, self.air_temperature)
        try:
            h = self._numpy_h(t)
            if self.mass_transfer:
                convection.mass_transfer_coefficient(h, 0.5 * (t + self.air_temperature), self.pressure, self.lewis)
        except PropertyError:
            return False
        return True

    def _numpy_h(self, t_surf):
        if self.mode == "given":
            return np.full(np.shape(t_surf), self.h_given)[()]
        return convection.sphere_convection(self.diameter, t_surf, self.air_temperature, self.pressure,
                                            self.air_speed, self.mode).h

    def clip(self, t_surf: float) -> float:
        """t_surf (K) clipped into [t_low, t_high]."""
        return min(max(t_surf, self.t_low), self.t_high)

    def _compiled(self, t_surf: float, step: float) -> tuple[float, float, float, float]:
        return kt.transfer_coefficients(self.diameter, t_surf, self.air_temperature, self.pressure, self.air_speed,
                                        self._code, self.h_given, self._lewis, step)

    def h(self, t_surf: float) -> float:
        """h (W/(m2 K)) at a surface temperature t_surf (K) already clipped."""
        if self.compiled:
            return self._compiled(t_surf, 0.0)[0]
        return float(self._numpy_h(t_surf))

    def coefficients(self, t_surf: float) -> tuple[float, float]:
        """(h W/(m2 K), h_m m/s) at a surface temperature t_surf (K) already clipped."""
        if self.compiled:
            return self._compiled(t_surf, 0.0)[:2]
        h = float(self._numpy_h(t_surf))
        t_film = 0.5 * (t_surf + self.air_temperature)
        return h, float(convection.mass_transfer_coefficient(h, t_film, self.pressure, self.lewis))

    def derivatives(self, t_surf: float) -> tuple[float, float]:
        """(dh/dt_surf, dh_m/dt_surf) by a central difference of +-DERIVATIVE_STEP, for t_surf
        at least that far inside [t_low, t_high]."""
        s = DERIVATIVE_STEP
        if self.compiled:
            return self._compiled(t_surf, s)[2:]
        hp, hmp = self.coefficients(t_surf + s)
        hm, hmm = self.coefficients(t_surf - s)
        return (hp - hm) / (2.0 * s), (hmp - hmm) / (2.0 * s)
