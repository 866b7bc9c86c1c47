"""Solid materials as data: density, conductivity and heat capacity, possibly T-dependent.

A temperature function is constant, a polynomial in T (kelvin) or a piecewise-linear table.
The specific internal energy is the exact integral of the heat capacity,

.. math:: e(T) = \\int_{T_\\mathrm{ref}}^{T} c(T')\\,\\mathrm{d}T',

so the stored energy is conserved exactly whatever c(T) does.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fvsolver.errors import CaseError

REFERENCE_TEMPERATURE = 273.15  # K; energies are measured from here


@dataclass(frozen=True)
class TemperatureFunction:
    """A property against temperature.

    Parameters
    ----------
    kind : {"constant", "polynomial", "table"}
    coefficients : tuple of float
        constant: (value,); polynomial: (a0, a1, ...) with value = sum a_i T^i (T in K);
        table: the property values at ``temperatures``.
    temperatures : tuple of float
        table only: strictly increasing temperatures, K (held constant outside the table).
    """

    kind: str
    coefficients: tuple
    temperatures: tuple = ()

    @staticmethod
    def constant(value: float) -> "TemperatureFunction":
        return TemperatureFunction("constant", (float(value),))

    @property
    def is_constant(self) -> bool:
        return self.kind == "constant"

    def validate(self, where: str, positive: bool = True) -> None:
        """Raise CaseError unless the function is well formed and positive over its data."""
        if self.kind not in ("constant", "polynomial", "table"):
            raise CaseError(
                f"{where}: unknown kind {self.kind!r}, expected 'constant', 'polynomial' or 'table'"
            )
        c = np.asarray(self.coefficients, dtype=float)
        if c.size == 0 or not np.all(np.isfinite(c)):
            raise CaseError(f"{where}: got coefficients {list(self.coefficients)}, expected finite numbers")
        if self.kind == "table":
            t = np.asarray(self.temperatures, dtype=float)
            if t.size != c.size or t.size < 2 or np.any(np.diff(t) <= 0):
                raise CaseError(
                    f"{where}: a table needs >= 2 strictly increasing temperatures with one value "
                    f"each (got {t.size} temperatures, {c.size} values)"
                )
            probe = c
        elif self.kind == "polynomial":
            probe = self.value(np.linspace(200.0, 500.0, 61))
        else:
            probe = c
        if positive and np.any(probe <= 0.0):
            raise CaseError(
                f"{where}: got a non-positive value ({probe.min():.4g}), expected a positive property "
                "(polynomials are checked over 200-500 K); fix the coefficients"
            )

    def value(self, T: np.ndarray) -> np.ndarray:
        """Property at temperature ``T`` (K), same shape as ``T``."""
        T = np.asarray(T, dtype=float)
        if self.kind == "constant":
            return np.full_like(T, self.coefficients[0])
        if self.kind == "polynomial":
            return np.polynomial.polynomial.polyval(T, self.coefficients)
        return np.interp(T, self.temperatures, self.coefficients)

    def integral(self, T: np.ndarray) -> np.ndarray:
        """Exact integral from ``REFERENCE_TEMPERATURE`` to ``T`` of the property."""
        T = np.asarray(T, dtype=float)
        t0 = REFERENCE_TEMPERATURE
        if self.kind == "constant":
            return self.coefficients[0] * (T - t0)
        if self.kind == "polynomial":
            anti = np.polynomial.polynomial.polyint(self.coefficients)
            return np.polynomial.polynomial.polyval(T, anti) - np.polynomial.polynomial.polyval(t0, anti)
        # piecewise-linear table, constant beyond its ends: integrate the interpolant exactly
        tt = np.asarray(self.temperatures, dtype=float)
        vv = np.asarray(self.coefficients, dtype=float)
        knots = np.concatenate([[min(t0, tt[0]) - 1.0], tt, [max(t0, tt[-1]) + 1.0]])
        vals = np.concatenate([[vv[0]], vv, [vv[-1]]])
        cum = np.concatenate([[0.0], np.cumsum(0.5 * (vals[1:] + vals[:-1]) * np.diff(knots))])

        def antiderivative(x):
            x = np.asarray(x, dtype=float)
            lo = np.clip(np.searchsorted(knots, x, side="right") - 1, 0, len(knots) - 2)
            dx = x - knots[lo]
            slope = (vals[lo + 1] - vals[lo]) / (knots[lo + 1] - knots[lo])
            extra = np.where(x < knots[0], vals[0] * (x - knots[0]), vals[lo] * dx + 0.5 * slope * dx**2)
            beyond = x > knots[-1]
            return np.where(beyond, cum[-1] + vals[-1] * (x - knots[-1]), np.where(x < knots[0], extra, cum[lo] + extra))

        return antiderivative(T) - antiderivative(t0)


@dataclass(frozen=True)
class Material:
    """A solid (or effective porous) material.

    Parameters
    ----------
    name : str
    density : float, kg/m3
    conductivity : TemperatureFunction, W/(m K)
    heat_capacity : TemperatureFunction, J/(kg K)
    """

    name: str
    density: float
    conductivity: TemperatureFunction
    heat_capacity: TemperatureFunction

    def __post_init__(self) -> None:
        where = f"materials.{self.name}"
        if not (np.isfinite(self.density) and self.density > 0.0):
            raise CaseError(
                f"{where}.density: got {self.density!r}, expected a positive number in kg/m3 "
                "(glass is about 2230-2500)"
            )
        self.conductivity.validate(f"{where}.conductivity")
        self.heat_capacity.validate(f"{where}.heat_capacity")

    @staticmethod
    def constant(name: str, density: float, conductivity: float, heat_capacity: float) -> "Material":
        return Material(
            name, float(density), TemperatureFunction.constant(conductivity),
            TemperatureFunction.constant(heat_capacity),
        )

    # -- the interface the conduction problem uses (a porous cap implements it too) ----------
    context_dependent = False

    def conductivity_at(self, T: np.ndarray, context=None) -> np.ndarray:
        """Conductivity, W/(m K), at ``T``."""
        return self.conductivity.value(T)

    def volumetric_energy(self, T: np.ndarray, context=None) -> np.ndarray:
        """Internal energy per volume from 273.15 K, J/m3."""
        return self.density * self.heat_capacity.integral(T)

    def volumetric_heat_capacity(self, T: np.ndarray, context=None) -> np.ndarray:
        """rho c, J/(m3 K)."""
        return self.density * self.heat_capacity.value(T)

    @property
    def constant_properties(self) -> bool:
        return self.conductivity.is_constant and self.heat_capacity.is_constant
