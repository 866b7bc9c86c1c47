"""Boundary conditions as data.

A patch carries either a fixed temperature, symmetry, or a sum of heat-flux terms (fixed
flux, convection, radiation, and later evaporation).  Each flux term gives the heat flux
*into* the body through the surface, q(T_s) in W/m2, and its derivative, so that the
surface temperature can be eliminated implicitly (Newton) at every iteration:

.. math:: \\frac{k}{\\delta}(T_s - T_{P'}) = \\sum_m q_m(T_s)

An insulated patch is a flux patch with no terms.  The axis r = 0 allows only symmetry.
"""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from fvsolver.errors import CaseError
from fvsolver.mesh.core import AXIS_PATCH, Mesh

STEFAN_BOLTZMANN = 5.670374419e-8  # W/(m2 K4), CODATA 2018 (exact in the 2019 SI)

Value = float | Callable  # a number, or f(centres (n, 2), time) -> (n,)


def _evaluate(value: Value, centres: np.ndarray, time: float) -> np.ndarray:
    if callable(value):
        return np.broadcast_to(np.asarray(value(centres, time), dtype=float), centres.shape[:1])
    return np.full(centres.shape[0], float(value))


def _check_number(where: str, value, expected: str, low: float | None = None, strict=False) -> None:
    if callable(value):
        return
    ok = isinstance(value, (int, float)) and np.isfinite(value)
    if ok and low is not None:
        ok = value > low if strict else value >= low
    if not ok:
        raise CaseError(f"{where}: got {value!r}, expected {expected}")


@dataclass(frozen=True)
class FixedTemperature:
    """Dirichlet condition: surface temperature, K."""

    temperature: Value

    def validate(self, where: str) -> None:
        _check_number(f"{where}.temperature", self.temperature, "a temperature in K (> 0)", 0.0, True)


@dataclass(frozen=True)
class Symmetry:
    """No flux and a mirrored field (the only condition allowed on the axis)."""

    def validate(self, where: str) -> None:
        return None


@dataclass(frozen=True)
class HeatFlux:
    """A fixed heat flux into the body, W/m2 (a heater patch; negative draws heat out)."""

    flux: Value

    def validate(self, where: str) -> None:
        _check_number(f"{where}.flux", self.flux, "a heat flux in W/m2")

    def heat_flux(self, T_s: np.ndarray, time: float, centres: np.ndarray):
        return _evaluate(self.flux, centres, time), np.zeros_like(T_s)


@dataclass(frozen=True)
class Convection:
    """Convection to a fluid: q = h (T_ambient - T_s)."""

    h: Value
    ambient_temperature: Value

    def validate(self, where: str) -> None:
        _check_number(f"{where}.h", self.h, "a heat-transfer coefficient in W/(m2 K) (>= 0)", 0.0)
        _check_number(
            f"{where}.ambient_temperature", self.ambient_temperature, "a temperature in K (> 0)", 0.0, True
        )

    def heat_flux(self, T_s: np.ndarray, time: float, centres: np.ndarray):
        h = _evaluate(self.h, centres, time)
        return h * (_evaluate(self.ambient_temperature, centres, time) - T_s), -h


@dataclass(frozen=True)
class Radiation:
    """Grey radiation to large surroundings: q = eps sigma (T_sur^4 - T_s^4)."""

    emissivity: Value
    surroundings_temperature: Value

    def validate(self, where: str) -> None:
        _check_number(f"{where}.emissivity", self.emissivity, "an emissivity in [0, 1]", 0.0)
        if not callable(self.emissivity) and self.emissivity > 1.0:
            raise CaseError(f"{where}.emissivity: got {self.emissivity!r}, expected a value in [0, 1]")
        _check_number(
            f"{where}.surroundings_temperature", self.surroundings_temperature,
            "a temperature in K (> 0)", 0.0, True,
        )

    def heat_flux(self, T_s: np.ndarray, time: float, centres: np.ndarray):
        es = STEFAN_BOLTZMANN * _evaluate(self.emissivity, centres, time)
        t_sur = _evaluate(self.surroundings_temperature, centres, time)
        return es * (t_sur**4 - T_s**4), -4.0 * es * T_s**3


FLUX_TERMS = (HeatFlux, Convection, Radiation)


@dataclass(frozen=True)
class PatchCondition:
    """The condition on one patch: one FixedTemperature, one Symmetry, or flux terms (may be none)."""

    patch: str
    terms: tuple = ()

    @property
    def kind(self) -> str:
        if len(self.terms) == 1 and isinstance(self.terms[0], FixedTemperature):
            return "temperature"
        if len(self.terms) == 1 and isinstance(self.terms[0], Symmetry):
            return "symmetry"
        return "flux"

    def validate(self, where: str) -> None:
        for k, term in enumerate(self.terms):
            if isinstance(term, (FixedTemperature, Symmetry)) and len(self.terms) > 1:
                raise CaseError(
                    f"{where}: {type(term).__name__} cannot be combined with other terms on one patch "
                    "(expected it alone); split the patch or drop the other terms"
                )
            if not hasattr(term, "validate"):
                raise CaseError(f"{where}.terms[{k}]: got {term!r}, expected a boundary-condition term")
            term.validate(f"{where}.terms[{k}]")
            if not isinstance(term, (FixedTemperature, Symmetry)) and not hasattr(term, "heat_flux"):
                raise CaseError(f"{where}.terms[{k}]: {type(term).__name__} gives no heat flux")


@dataclass(frozen=True)
class BoundaryData:
    """Boundary conditions compiled onto the boundary faces.

    Attributes
    ----------
    kind : (n_boundary,) int8, 0 fixed temperature, 1 flux terms (insulated if none), 2 symmetry
    conditions : tuple of PatchCondition, in patch order
    faces : tuple of (n_faces_of_patch,) int arrays, the boundary faces of each condition
    """

    kind: np.ndarray
    conditions: tuple
    faces: tuple

    @property
    def dirichlet(self) -> np.ndarray:
        return self.kind == 0

    @property
    def symmetry(self) -> np.ndarray:
        return self.kind == 2

    @property
    def coefficients_vary(self) -> bool:
        """True when a heat-transfer coefficient (not just a temperature or flux) varies in time."""
        return any(
            callable(getattr(term, name, None))
            for c in self.conditions
            for term in c.terms
            for name in ("h", "emissivity")
        )

    @property
    def linear(self) -> bool:
        """True when every flux term is affine in the surface temperature."""
        return all(isinstance(term, (FixedTemperature, Symmetry, HeatFlux, Convection))
                   for c in self.conditions for term in c.terms)


def compile_boundary(mesh: Mesh, conditions: list[PatchCondition], where: str = "boundary") -> BoundaryData:
    """Check the conditions against the mesh's patches and map them onto faces.

    The axis patch takes symmetry (and gets it if left out); every other patch needs a condition.
    """
    by_patch: dict[str, PatchCondition] = {}
    for k, c in enumerate(conditions):
        if not isinstance(c, PatchCondition):
            raise CaseError(f"{where}[{k}]: got {c!r}, expected a PatchCondition")
        if c.patch not in mesh.patch_names:
            raise CaseError(
                f"{where}.{c.patch}: no such patch on the mesh (expected one of "
                f"{', '.join(mesh.patch_names)}); check the patch name"
            )
        if c.patch in by_patch:
            raise CaseError(f"{where}.{c.patch}: given twice; give each patch one condition")
        c.validate(f"{where}.{c.patch}")
        if c.patch == AXIS_PATCH and c.kind != "symmetry":
            raise CaseError(
                f"{where}.{AXIS_PATCH}: got {[type(t).__name__ for t in c.terms]}, expected symmetry only "
                "(the axis r = 0 carries no heat); remove the condition from the axis"
            )
        by_patch[c.patch] = c
    if AXIS_PATCH in mesh.patch_names and AXIS_PATCH not in by_patch:
        by_patch[AXIS_PATCH] = PatchCondition(AXIS_PATCH, (Symmetry(),))
    missing = [p for p in mesh.patch_names if p not in by_patch]
    if missing:
        raise CaseError(
            f"{where}: no condition for patch(es) {missing} (expected one per patch); give them a "
            "condition, an empty list of terms for an insulated patch"
        )
    kind = np.full(mesh.n_boundary, -1, dtype=np.int8)
    ordered, faces = [], []
    for name in mesh.patch_names:
        c = by_patch[name]
        idx = mesh.patch_faces(name)
        kind[idx] = {"temperature": 0, "flux": 1, "symmetry": 2}[c.kind]
        ordered.append(c)
        faces.append(idx)
    return BoundaryData(kind=kind, conditions=tuple(ordered), faces=tuple(faces))
