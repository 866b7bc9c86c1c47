"""Working fluids for the sealed bulb, stored as data.

Every correlation carries its coefficients, units and validity range. Outside
the range the value is still computed (an extrapolation) and a
:class:`PropertyRangeWarning` names the fluid, the value and the range.

Sources of the coefficients (all fluids alike)
----------------------------------------------
* Vapour pressure, enthalpy of vaporization, saturated-liquid density and the
  critical constants used with them: VDI Heat Atlas, 2nd ed., Springer 2010,
  part D3.1, PPDS equations (Wagner 2.5-5 form, PPDS12 and PPDS10), as
  tabulated in the ``chemicals`` 1.5.2 data files "VDI PPDS". These equations
  span the whole liquid range, melting point to critical point.
* Liquid heat capacity: Perry's Chemical Engineers' Handbook, 8th ed.,
  Table 2-153, DIPPR equation 100 (polynomial in T, J/(kmol K)), with the
  table's own temperature range.
* Ideal-gas heat capacity of the vapour: value at 298.15 K from Poling,
  Prausnitz and O'Connell, *The Properties of Gases and Liquids*, 5th ed.,
  Appendix A, held constant (the vapour's sensible heat is a small term next
  to the latent heat in this device).
* Normal boiling points: CRC Handbook of Chemistry and Physics, "Physical
  constants of organic compounds" (as tabulated in ``chemicals`` 1.5.2).
* Molar masses: from the formulas with the IUPAC (CIAAW) conventional atomic
  weights H 1.008, C 12.011, O 15.999, Cl 35.45.
"""
from __future__ import annotations

import types
import warnings
from dataclasses import dataclass
from typing import Mapping, Union

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fvsolver.errors import PropertyError

UNIVERSAL_GAS_CONSTANT = 8.314462618
"""Molar gas constant [J/(mol K)] (CODATA 2018, exact)."""


# arrays at least this long go to the compiled twins in fvsolver.kernels.properties
KERNEL_MIN_SIZE = 4


def _compiled(kernel, T: NDArray[np.float64], *args) -> NDArray[np.float64]:
    """``kernel(T, *args, out)`` on the flattened array, in T's shape."""
    flat = np.ascontiguousarray(T, dtype=np.float64).ravel()
    out = np.empty_like(flat)
    kernel(flat, *args, out)
    return out.reshape(T.shape)


class PropertyRangeWarning(UserWarning):
    """A correlation was evaluated outside the range its source states."""


def _array(value: ArrayLike, name: str, unit: str) -> NDArray[np.float64]:
    """Return a float array, raising on non-finite or non-positive entries."""
    arr = np.asarray(value, dtype=float)
    if arr.size == 0:
        return arr
    lo, hi = (float(arr), float(arr)) if arr.ndim == 0 else (float(arr.min()), float(arr.max()))
    if lo > 0.0 and hi < np.inf:  # NaN fails both comparisons: the full check below reports it
        return arr
    bad = ~np.isfinite(arr) | (arr <= 0.0)
    if np.any(bad):
        first = float(np.ravel(arr[bad])[0])
        raise PropertyError(f"{name} = {first:.10g} {unit} received ({int(np.sum(bad))} offending value(s)); "
                            f"expected finite positive values; pass absolute values in {unit}")
    return arr


@dataclass(frozen=True)
class WagnerEquation:
    """Vapour pressure, ``ln(p/pc) = (a tau + b tau^1.5 + c tau^2.5 + d tau^5) / Tr``.

    ``tau = 1 - T/Tc``, ``Tr = T/Tc``; T in K, p in Pa. Valid ``t_min``-``t_max`` [K].
    """

    critical_temperature: float
    critical_pressure: float
    a: float
    b: float
    c: float
    d: float
    t_min: float
    t_max: float

    def _f(self, T: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        tau = 1.0 - T / self.critical_temperature
        f = self.a * tau + self.b * tau**1.5 + self.c * tau**2.5 + self.d * tau**5
        df_dtau = self.a + 1.5 * self.b * tau**0.5 + 2.5 * self.c * tau**1.5 + 5.0 * self.d * tau**4
        return f, df_dtau

    def pressure(self, T: NDArray[np.float64]) -> NDArray[np.float64]:
        """Saturation pressure [Pa] at T [K] (no range check)."""
        T = np.asarray(T, dtype=float)
        if T.size >= KERNEL_MIN_SIZE:
            from fvsolver.kernels import properties as kp  # numba only where arrays are evaluated
            return _compiled(kp.wagner_pressure, T, self.critical_temperature, self.critical_pressure,
                             self._coefficients)
        return self._pressure_numpy(T)

    def _pressure_numpy(self, T: NDArray[np.float64]) -> NDArray[np.float64]:
        """The NumPy twin of ``kernels.properties.wagner_pressure``."""
        f, _ = self._f(T)
        return self.critical_pressure * np.exp(f * self.critical_temperature / T)

    def dlnp_dT(self, T: NDArray[np.float64]) -> NDArray[np.float64]:
        """d ln(p_sat)/dT [1/K] at T [K]."""
        T = np.asarray(T, dtype=float)
        if T.size >= KERNEL_MIN_SIZE:
            from fvsolver.kernels import properties as kp
            return _compiled(kp.wagner_dlnp_dT, T, self.critical_temperature, self._coefficients)
        return self._dlnp_dT_numpy(T)

    def _dlnp_dT_numpy(self, T: NDArray[np.float64]) -> NDArray[np.float64]:
        """The NumPy twin of ``kernels.properties.wagner_dlnp_dT``."""
        f, df_dtau = self._f(T)
        tr = T / self.critical_temperature
        return -(df_dtau * tr + f) / (self.critical_temperature * tr**2)

    @property
    def _coefficients(self) -> NDArray[np.float64]:
        return np.array([self.a, self.b, self.c, self.d])

    def temperature(self, p: NDArray[np.float64]) -> NDArray[np.float64]:
        """Saturation temperature [K] at p [Pa] by Newton iteration on ln p."""
        tc = self.critical_temperature
        # ln p is nearly linear in 1/T: a secant through Tr = 0.6 and the critical point starts Newton close.
        t_ref = 0.6 * tc
        slope = (np.log(self.pressure(np.asarray(t_ref))) - np.log(self.critical_pressure)) / (1 / t_ref - 1 / tc)
        x = 1.0 / tc + (np.log(p) - np.log(self.critical_pressure)) / slope
        T = np.clip(1.0 / x, 0.05 * tc, tc)
        target = np.log(p)
        for _ in range(50):
            residual = np.log(self.pressure(T)) - target
            T_new = np.clip(T - residual / self.dlnp_dT(T), 0.05 * tc, tc)
            if np.all(np.abs(T_new - T) <= 1e-11 * tc):
                return T_new
            T = T_new
        raise PropertyError(f"p = {float(np.ravel(p)[0]):.10g} Pa: saturation temperature did not converge; "
                            f"expected a pressure between the triple-point and critical pressures; check units")


@dataclass(frozen=True)
class AntoineEquation:
    """Vapour pressure, ``log10(p / pressure_unit) = a - b / (T + c)``, T in K.

    ``pressure_unit`` is the pascal value of the unit the coefficients were
    fitted in (1e5 for bar, 133.322 for mmHg). Valid ``t_min``-``t_max`` [K].
    """

    a: float
    b: float
    c: float
    pressure_unit: float
    t_min: float
    t_max: float

    def pressure(self, T: NDArray[np.float64]) -> NDArray[np.float64]:
        """Saturation pressure [Pa] at T [K] (no range check)."""
        return self.pressure_unit * 10.0 ** (self.a - self.b / (T + self.c))

    def dlnp_dT(self, T: NDArray[np.float64]) -> NDArray[np.float64]:
        """d ln(p_sat)/dT [1/K] at T [K]."""
        return np.log(10.0) * self.b / (T + self.c) ** 2

    def temperature(self, p: NDArray[np.float64]) -> NDArray[np.float64]:
        """Saturation temperature [K] at p [Pa] (closed form)."""
        return self.b / (self.a - np.log10(p / self.pressure_unit)) - self.c


VapourPressureEquation = Union[WagnerEquation, AntoineEquation]


@dataclass(frozen=True)
class WorkingFluid:
    """A volatile working fluid and its correlations (SI units throughout).

    Attributes
    ----------
    name, cas, formula : str
        Name, CAS registry number and molecular formula.
    molar_mass : float
        [kg/mol].
    critical_temperature, critical_pressure : float
        [K], [Pa]; those of the vapour-pressure equation's source.
    normal_boiling_point : float
        Measured boiling point at 101325 Pa [K] (reference datum).
    vapour_pressure : WagnerEquation or AntoineEquation
        Saturation-pressure equation with its validity range.
    latent_heat_ppds12 : tuple of 5 floats
        PPDS12 coefficients A..E: ``dH = R Tc (A tau^(1/3) + B tau^(2/3) + C tau + D tau^2 + E tau^6)`` [J/mol].
    liquid_density_ppds10 : tuple of 5 floats
        Critical density and coefficients a..d [kg/m3]:
        ``rho = rho_c + a tau^0.35 + b tau^(2/3) + c tau + d tau^(4/3)``.
    liquid_range : tuple of 2 floats
        Validity range of the PPDS12 and PPDS10 fits [K].
    liquid_cp_eq100 : tuple of floats
        DIPPR eq. 100 coefficients, ``Cp = sum C_i T^i`` [J/(kmol K)].
    liquid_cp_range : tuple of 2 floats
        Validity range of the liquid heat capacity [K].
    vapour_cp_298 : float
        Ideal-gas molar heat capacity at 298.15 K [J/(mol K)].
    aliases : tuple of str
        Other accepted names (lower case).
    """

    name: str
    cas: str
    formula: str
    molar_mass: float
    critical_temperature: float
    critical_pressure: float
    normal_boiling_point: float
    vapour_pressure: VapourPressureEquation
    latent_heat_ppds12: tuple[float, float, float, float, float]
    liquid_density_ppds10: tuple[float, float, float, float, float]
    liquid_range: tuple[float, float]
    liquid_cp_eq100: tuple[float, ...]
    liquid_cp_range: tuple[float, float]
    vapour_cp_298: float
    aliases: tuple[str, ...] = ()

    def _temperature(self, T: ArrayLike, quantity: str, low: float, high: float) -> NDArray[np.float64]:
        """Validate T, refusing supercritical values and warning outside [low, high]."""
        t = _array(T, "T", "K")
        if t.size == 0:
            return t
        t_lo, t_hi = (float(t), float(t)) if t.ndim == 0 else (float(t.min()), float(t.max()))
        if t_hi > self.critical_temperature:
            raise PropertyError(
                f"{self.name}: {quantity} asked at T = {t_hi:.10g} K; expected T below the critical "
                f"temperature {self.critical_temperature} K, where no liquid exists; lower the temperature")
        if t_lo < low or t_hi > high:  # the range is looked at once; the warning's details only when needed
            self._warn_outside(t, quantity, low, high, stacklevel=4)
        return t

    def _warn_outside(self, values: NDArray[np.float64], quantity: str, low: float, high: float,
                      stacklevel: int) -> None:
        outside = (values < low) | (values > high)
        if np.any(outside):
            bad = np.ravel(values[outside])
            warnings.warn(
                f"{self.name}: {quantity} evaluated at T = {bad.min():.6g}..{bad.max():.6g} K "
                f"({bad.size} value(s)), outside the validity range {low:.6g}-{high:.6g} K of its "
                f"correlation; the result is an extrapolation", PropertyRangeWarning, stacklevel=stacklevel)

    def saturation_pressure(self, T: ArrayLike) -> NDArray[np.float64]:
        """Saturation pressure [Pa] at temperature ``T`` [K] (float or array, any shape)."""
        eq = self.vapour_pressure
        t = self._temperature(T, "saturation pressure", eq.t_min, eq.t_max)
        return eq.pressure(t)[()]

    def dsaturation_pressure_dT(self, T: ArrayLike) -> NDArray[np.float64]:
        """Analytic derivative dp_sat/dT [Pa/K] at ``T`` [K] (float or array, any shape)."""
        eq = self.vapour_pressure
        t = self._temperature(T, "saturation pressure derivative", eq.t_min, eq.t_max)
        return (eq.pressure(t) * eq.dlnp_dT(t))[()]

    def saturation_temperature(self, p: ArrayLike) -> NDArray[np.float64]:
        """Saturation temperature [K] at pressure ``p`` [Pa] (float or array, any shape)."""
        pressure = _array(p, "p", "Pa")
        if np.any(pressure >= self.critical_pressure):
            raise PropertyError(
                f"{self.name}: saturation temperature asked at p = {float(np.max(pressure)):.10g} Pa; expected a "
                f"pressure below the critical pressure {self.critical_pressure} Pa; check the units (Pa)")
        eq = self.vapour_pressure
        t = eq.temperature(pressure)
        self._warn_outside(t, "saturation temperature", eq.t_min, eq.t_max, stacklevel=3)
        return t[()]

    def latent_heat(self, T: ArrayLike) -> NDArray[np.float64]:
        """Specific enthalpy of vaporization [J/kg] at ``T`` [K] (PPDS12)."""
        t = self._temperature(T, "latent heat", *self.liquid_range)
        if t.size >= KERNEL_MIN_SIZE:
            from fvsolver.kernels import properties as kp
            return _compiled(kp.ppds12_latent_heat, t, self.critical_temperature,
                             np.array(self.latent_heat_ppds12, dtype=float),
                             UNIVERSAL_GAS_CONSTANT * self.critical_temperature, self.molar_mass)
        return self._latent_heat_numpy(t)

    def dlatent_heat_dT(self, T: ArrayLike) -> NDArray[np.float64]:
        """dL/dT [J/(kg K)] of the PPDS12 latent heat at ``T`` [K]."""
        t = self._temperature(T, "latent heat", *self.liquid_range)
        tau = 1.0 - t / self.critical_temperature
        a, b, c, d, e = self.latent_heat_ppds12
        dtau = a / 3.0 * tau ** (-2 / 3) + 2.0 * b / 3.0 * tau ** (-1 / 3) + c + 2.0 * d * tau + 6.0 * e * tau**5
        return (-UNIVERSAL_GAS_CONSTANT * dtau / self.molar_mass)[()]

    def _latent_heat_numpy(self, t: NDArray[np.float64]) -> NDArray[np.float64]:
        """PPDS eq. 12 in NumPy (the twin of ``kernels.properties.ppds12_latent_heat``)."""
        tau = 1.0 - t / self.critical_temperature
        a, b, c, d, e = self.latent_heat_ppds12
        molar = UNIVERSAL_GAS_CONSTANT * self.critical_temperature * (
            a * tau ** (1 / 3) + b * tau ** (2 / 3) + c * tau + d * tau**2 + e * tau**6)
        return (molar / self.molar_mass)[()]

    def liquid_density(self, T: ArrayLike) -> NDArray[np.float64]:
        """Saturated-liquid density [kg/m3] at ``T`` [K] (PPDS10)."""
        t = self._temperature(T, "liquid density", *self.liquid_range)
        tau = 1.0 - t / self.critical_temperature
        rho_c, a, b, c, d = self.liquid_density_ppds10
        return (rho_c + a * tau**0.35 + b * tau ** (2 / 3) + c * tau + d * tau ** (4 / 3))[()]

    def liquid_heat_capacity(self, T: ArrayLike) -> NDArray[np.float64]:
        """Liquid isobaric specific heat [J/(kg K)] at ``T`` [K] (DIPPR eq. 100)."""
        t = self._temperature(T, "liquid heat capacity", *self.liquid_cp_range)
        per_kmol = np.polynomial.polynomial.polyval(t, self.liquid_cp_eq100)
        return (per_kmol * 1.0e-3 / self.molar_mass)[()]

    def vapour_heat_capacity(self, T: ArrayLike) -> NDArray[np.float64]:
        """Ideal-gas isobaric specific heat of the vapour [J/(kg K)], the 298.15 K value at every ``T``."""
        t = _array(T, "T", "K")
        return (np.full_like(t, self.vapour_cp_298 / self.molar_mass))[()]

    def saturated_vapour_density(self, T: ArrayLike) -> NDArray[np.float64]:
        """Density of the saturated vapour [kg/m3] at ``T`` [K], ideal gas.

        The ideal-gas law overestimates it by the compressibility factor of the
        saturated vapour, a few per cent at pressures near 1 bar.
        """
        p = self.saturation_pressure(T)
        return (p * self.molar_mass / (UNIVERSAL_GAS_CONSTANT * np.asarray(T, dtype=float)))[()]


def _wagner(tc: float, pc: float, a: float, b: float, c: float, d: float, t_min: float) -> WagnerEquation:
    return WagnerEquation(tc, pc, a, b, c, d, t_min, tc)


_DICHLOROMETHANE = WorkingFluid(
    name="dichloromethane", cas="75-09-2", formula="CH2Cl2", molar_mass=0.084927,
    critical_temperature=510.05, critical_pressure=6.08e6, normal_boiling_point=312.95,
    vapour_pressure=_wagner(510.05, 6.08e6, -7.57368, 3.17104, -3.53296, -2.27696, 178.05),
    latent_heat_ppds12=(5.48913, 8.05864, -4.48277, 0.992992, -0.43166),
    liquid_density_ppds10=(459.0, 937.7851, 96.8605, 196.4483, 106.8482), liquid_range=(178.05, 510.05),
    liquid_cp_eq100=(98968.0, -62.941, 0.23265), liquid_cp_range=(180.0, 320.0),
    vapour_cp_298=50.88, aliases=("methylene chloride", "r-30", "r30"))

_DIETHYL_ETHER = WorkingFluid(
    name="diethyl ether", cas="60-29-7", formula="C4H10O", molar_mass=0.074123,
    critical_temperature=466.63, critical_pressure=3.651e6, normal_boiling_point=307.55,
    vapour_pressure=_wagner(466.63, 3.651e6, -7.55709, 2.15613, -3.02766, -2.37858, 156.75),
    latent_heat_ppds12=(5.72696, 9.12303, -4.705274, -0.175016, 3.55734),
    liquid_density_ppds10=(264.0, 521.2805, 257.7528, -489.2726, 486.7458), liquid_range=(156.75, 466.63),
    liquid_cp_eq100=(44400.0, 1301.0, -5.5, 0.008763), liquid_cp_range=(156.92, 460.0),
    vapour_cp_298=119.46, aliases=("ether", "ethyl ether", "ethoxyethane"))

_PENTANE = WorkingFluid(
    name="n-pentane", cas="109-66-0", formula="C5H12", molar_mass=0.072151,
    critical_temperature=469.66, critical_pressure=3.369e6, normal_boiling_point=309.21,
    vapour_pressure=_wagner(469.66, 3.369e6, -7.36401, 1.94358, -2.47191, -2.34757, 143.35),
    latent_heat_ppds12=(5.75681, 9.95286, -6.871727, 0.521979, 4.474608),
    liquid_density_ppds10=(235.0, 331.1104, 681.0817, -965.3279, 602.3613), liquid_range=(143.35, 469.66),
    liquid_cp_eq100=(159080.0, -270.5, 0.99537), liquid_cp_range=(143.42, 390.0),
    vapour_cp_298=120.04, aliases=("pentane", "r-601", "r601"))

_ISOPENTANE = WorkingFluid(
    name="isopentane", cas="78-78-4", formula="C5H12", molar_mass=0.072151,
    critical_temperature=460.35, critical_pressure=3.378e6, normal_boiling_point=300.98,
    vapour_pressure=_wagner(460.35, 3.378e6, -7.18224, 1.72845, -2.05353, -2.71274, 113.25),
    latent_heat_ppds12=(6.35592, 6.65305, -3.411011, -0.779434, 4.472309),
    liquid_density_ppds10=(237.0, 361.5111, 560.1453, -819.7357, 546.2874), liquid_range=(113.25, 460.35),
    liquid_cp_eq100=(108300.0, 146.0, -0.292, 0.00151), liquid_cp_range=(113.25, 310.0),
    vapour_cp_298=118.97, aliases=("2-methylbutane", "r-601a", "r601a"))

_METHYL_FORMATE = WorkingFluid(
    name="methyl formate", cas="107-31-3", formula="C2H4O2", molar_mass=0.060052,
    critical_temperature=487.25, critical_pressure=6.0e6, normal_boiling_point=304.75,
    vapour_pressure=_wagner(487.25, 6.0e6, -7.09661, 1.33571, -2.14672, -2.79247, 174.15),
    latent_heat_ppds12=(6.89413, 6.01843, -2.694377, -0.840353, 3.110258),
    liquid_density_ppds10=(349.0, 775.1812, -197.0272, 529.3064, -138.9492), liquid_range=(174.15, 487.25),
    liquid_cp_eq100=(130200.0, -396.0, 1.21), liquid_cp_range=(174.15, 304.9),
    vapour_cp_298=66.5, aliases=("methyl methanoate",))

_ACETONE = WorkingFluid(
    name="acetone", cas="67-64-1", formula="C3H6O", molar_mass=0.058080,
    critical_temperature=508.1, critical_pressure=4.692e6, normal_boiling_point=329.23,
    vapour_pressure=_wagner(508.1, 4.692e6, -7.67033, 1.96469, -2.4438, -2.90162, 178.35),
    latent_heat_ppds12=(5.74063, 9.13074, -4.880084, 0.019915, 3.765513),
    liquid_density_ppds10=(274.0, 547.382, 208.742, -203.7599, 253.9936), liquid_range=(178.35, 508.1),
    liquid_cp_eq100=(135600.0, -177.0, 0.2837, 0.000689), liquid_cp_range=(178.45, 329.44),
    vapour_cp_298=74.52, aliases=("propanone", "dimethyl ketone"))

FLUIDS: Mapping[str, WorkingFluid] = types.MappingProxyType({
    f.name: f for f in (_DICHLOROMETHANE, _DIETHYL_ETHER, _PENTANE, _ISOPENTANE, _METHYL_FORMATE, _ACETONE)
})
"""Read-only mapping of canonical (lower-case) fluid name to :class:`WorkingFluid`."""


def get_fluid(name: str) -> WorkingFluid:
    """Look a working fluid up by name, alias or CAS number (case-insensitive).

    Parameters
    ----------
    name : str
        E.g. ``"Dichloromethane"``, ``"methylene chloride"`` or ``"75-09-2"``.

    Returns
    -------
    WorkingFluid

    Raises
    ------
    PropertyError
        If nothing matches; the message lists the known fluids.
    """
    if not isinstance(name, str):
        raise PropertyError(f"name = {name!r} received; expected a string naming a working fluid or its CAS "
                            f"number; pass e.g. 'dichloromethane' or '75-09-2'")
    key = name.strip().lower()
    for fluid in FLUIDS.values():
        if key == fluid.name or key == fluid.cas or key in fluid.aliases:
            return fluid
    known = ", ".join(f"{f.name} ({f.cas})" for f in FLUIDS.values())
    raise PropertyError(f"name = {name!r} received; expected one of the known working fluids: {known}; "
                        f"use one of these names or CAS numbers, or build a WorkingFluid with your own data")
