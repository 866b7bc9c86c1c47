"""Tests of fvsolver.properties.convection."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from ht.conv_free_immersed import Nu_sphere_Churchill

from fvsolver.errors import PropertyError
from fvsolver.properties import convection, moist_air
from fvsolver.properties.fluids import PropertyRangeWarning


@pytest.mark.parametrize("Pr", [0.7, 0.71, 5.0, 100.0])
def test_natural_nusselt_matches_ht_churchill(Pr):
    # Reference: ht 1.2.0 conv_free_immersed.Nu_sphere_Churchill(Pr, Gr). It multiplies the Ra term by
    # {1 + 7.44e-8 Ra / [1 + (0.469/Pr)^(9/16)]^(16/9)}^(1/12), a transition term absent from the plain
    # 1983 laminar form; below Ra = 2e6 that factor stays under 1.004, so 1 % covers it.
    Ra = np.array([1e1, 1e3, 3e4, 1.5e6, 2e6])
    reference = np.array([Nu_sphere_Churchill(Pr, ra / Pr) for ra in Ra])
    np.testing.assert_allclose(convection.nusselt_sphere_natural(Ra, Pr), reference, rtol=1e-2)
    # With that factor divided out the two must agree to rounding, over the whole laminar range.
    Ra = np.logspace(0, 11, 12)
    denominator = 1.0 + (0.469 / Pr) ** (9 / 16)
    factor = (1.0 + 7.44e-8 * Ra / denominator ** (16 / 9)) ** (1 / 12)
    reference = np.array([Nu_sphere_Churchill(Pr, ra / Pr) for ra in Ra])
    np.testing.assert_allclose(2.0 + (convection.nusselt_sphere_natural(Ra, Pr) - 2.0) * factor, reference,
                               rtol=1e-12)


def test_natural_nusselt_limits_and_errors():
    assert convection.nusselt_sphere_natural(0.0, 0.71) == 2.0
    with pytest.raises(PropertyError, match="Pr = 0.5 received"):
        convection.nusselt_sphere_natural(1e4, 0.5)
    with pytest.raises(PropertyError, match="Ra = 1e"):
        convection.nusselt_sphere_natural(1e12, 0.71)
    with pytest.raises(PropertyError, match="Ra = -1 received"):
        convection.nusselt_sphere_natural(-1.0, 0.71)


def test_whitaker_hand_evaluation():
    # Hand evaluation of the published form at Re = 1000, Pr = 0.71, mu/mu_s = 1:
    # 0.4 * 1000^0.5 = 12.6491, 0.06 * 1000^(2/3) = 6.0, 0.71^0.4 = 0.871972, Nu = 2 + 18.6491 * 0.871972.
    assert convection.nusselt_sphere_forced(1000.0, 0.71) == pytest.approx(2.0 + 18.6491 * 0.871972, rel=1e-5)
    assert convection.nusselt_sphere_forced(0.0, 0.71) == 2.0


def test_whitaker_incropera_example():
    # Incropera, DeWitt, Bergman, Lavine, Fundamentals of Heat and Mass Transfer, 6th ed., Example 7.7
    # (from memory): 10 mm sphere at ~328 K in 296 K air at 10 m/s; Re = 6510, Pr = 0.709,
    # mu = 181.6e-7, mu_s = 197.8e-7 Pa s, k = 0.0258 W/(m K) give Nu = 47.4 and h = 122 W/(m2 K).
    nu = convection.nusselt_sphere_forced(6510.0, 0.709, 181.6 / 197.8)
    assert nu == pytest.approx(47.4, abs=0.1)
    # Same case with this package's air properties (Incropera's table values differ by ~1 %).
    result = convection.sphere_convection(0.01, 328.0, 296.0, 101325.0, 10.0, "forced")
    assert result.h == pytest.approx(122.0, rel=3e-2)
    assert result.Re == pytest.approx(6510.0, rel=2e-2)


def test_whitaker_warns_only_outside_its_range():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        convection.nusselt_sphere_forced(np.array([0.0, 1.0, 3.0, 100.0, 7.6e4]), 0.707)
    with pytest.warns(PropertyRangeWarning, match="Re up to 100000"):
        value = convection.nusselt_sphere_forced(1e5, 0.71)
    assert np.isfinite(value) and value > 2.0
    with pytest.warns(PropertyRangeWarning, match="Pr = 0.5"):
        convection.nusselt_sphere_forced(100.0, 0.5)
    with pytest.raises(PropertyError, match="Re = -5 received"):
        convection.nusselt_sphere_forced(-5.0, 0.71)


def test_mixed_combination():
    nf = np.array([0.0, 2.0, 8.0, 30.0])
    nn = np.array([8.0, 8.0, 8.0, 8.0])
    mixed = convection.nusselt_mixed(nf, nn)
    assert mixed[0] == pytest.approx(8.0, rel=1e-14)
    assert mixed[2] == pytest.approx(8.0 * 2.0 ** (1 / 3), rel=1e-14)
    # Cube roots round, so "never below the larger part" is checked to 1e-12.
    assert np.all(mixed >= np.maximum(nf, nn) * (1 - 1e-12)) and np.all(mixed <= nf + nn)


def test_device_scale_natural_and_radiation():
    # Common practice: a 4 cm sphere 5 K below 25 C still air has h ~ 5 W/(m2 K), and black-ish
    # radiation (eps 0.9) adds about as much; both checked in a 3-7 W/(m2 K) band.
    natural = convection.sphere_convection(0.04, 293.15, 298.15, 101325.0, 0.0, "natural")
    assert 3.0 < natural.h < 7.0
    assert natural.Nu == pytest.approx(natural.h * 0.04 / moist_air.air_thermal_conductivity(295.65), rel=1e-12)
    assert natural.T_film == pytest.approx(295.65)
    h_rad = convection.radiation_coefficient(0.9, 293.15, 298.15)
    assert 3.0 < h_rad < 7.0


def test_forced_increases_with_speed_and_mixed_dominates():
    speeds = np.array([0.0, 0.05, 0.2, 0.5, 1.0, 2.0, 5.0])
    forced = convection.sphere_convection(0.04, 293.15, 298.15, 101325.0, speeds, "forced")
    natural = convection.sphere_convection(0.04, 293.15, 298.15, 101325.0, speeds, "natural")
    mixed = convection.sphere_convection(0.04, 293.15, 298.15, 101325.0, speeds, "mixed")
    assert np.all(np.diff(forced.h) > 0.0)
    assert np.all(mixed.h >= np.maximum(forced.h, natural.h) * (1 - 1e-12))
    assert mixed.h.shape == speeds.shape and mixed.mode == "mixed"


def test_humid_surface_weakens_buoyancy_of_a_cooled_sphere():
    # Moist air at the wet, cooler surface is lighter, opposing the thermal buoyancy of the cold air.
    dry = convection.sphere_convection(0.04, 293.15, 298.15, 101325.0, 0.0, "natural")
    p_surface = 2339.0
    p_air = 0.5 * 3169.0
    humid = convection.sphere_convection(0.04, 293.15, 298.15, 101325.0, 0.0, "natural",
                                         p_vapour_surface=p_surface, p_vapour_air=p_air)
    assert humid.Ra < dry.Ra and humid.h < dry.h


def test_mass_transfer_coefficient_chilton_colburn():
    T, p = 295.0, 101325.0
    h_m = convection.mass_transfer_coefficient(5.0, T, p)
    # The analogy in dimensionless form: Sh / Nu = (Sc / Pr)^(1/3).
    d_v = moist_air.water_vapour_diffusivity(T, p)
    k = moist_air.air_thermal_conductivity(T)
    nu = moist_air.air_kinematic_viscosity(T, p)
    sc = nu / d_v
    pr = nu / moist_air.air_thermal_diffusivity(T, p)
    assert (h_m / d_v) / (5.0 / k) == pytest.approx((sc / pr) ** (1 / 3), rel=1e-12)
    assert 3e-3 < h_m < 6e-3
    given = convection.mass_transfer_coefficient(5.0, T, p, lewis=1.0)
    rho_cp = moist_air.air_density(T, p) * moist_air.air_heat_capacity(T, p)
    assert given == pytest.approx(5.0 / rho_cp, rel=1e-14)


def test_radiation_coefficient_linearises_exactly():
    t_s = np.array([280.0, 300.0, 350.0])
    t_sur = 295.0
    h_rad = convection.radiation_coefficient(0.8, t_s, t_sur)
    np.testing.assert_allclose(h_rad * (t_s - t_sur),
                               0.8 * convection.STEFAN_BOLTZMANN * (t_s**4 - t_sur**4), rtol=1e-12)


@pytest.mark.parametrize("call, pattern", [
    (lambda: convection.sphere_convection(0.04, 293.0, 298.0, 101325.0, 0.0, "free"), "mode = 'free'"),
    (lambda: convection.sphere_convection(-0.04, 293.0, 298.0, 101325.0), "diameter = -0.04"),
    (lambda: convection.sphere_convection(0.04, 20.0, 298.0, 101325.0), "T_surface = 20"),
    (lambda: convection.radiation_coefficient(1.5, 300.0, 290.0), "emissivity = 1.5"),
    (lambda: convection.mass_transfer_coefficient(5.0, 300.0, 101325.0, lewis=0.0), "lewis = 0"),
])
def test_invalid_arguments_raise(call, pattern):
    with pytest.raises(PropertyError, match=pattern):
        call()
