"""Tests of fvsolver.properties.water against IAPWS reference implementations."""
from __future__ import annotations

import iapws
import numpy as np
import pytest
from CoolProp.CoolProp import PropsSI

from fvsolver.errors import PropertyError
from fvsolver.properties import water

# Ten temperatures spanning 0-100 C.
T_GRID = np.array([273.15, 278.15, 283.15, 293.15, 298.15, 303.15, 313.15, 333.15, 353.15, 373.15])


def test_saturation_pressure_matches_iapws_if97():
    # Reference: iapws 1.5.5, IAPWS97(T, x=0).P in MPa (IAPWS-IF97 region 4). It is the same equation,
    # so beyond the 2e-4 requirement only round-off may remain: 1e-10 also catches coefficient typos.
    reference = np.array([iapws.IAPWS97(T=t, x=0).P * 1e6 for t in T_GRID])
    rel = np.abs(water.saturation_pressure(T_GRID) / reference - 1.0)
    assert rel.max() < 2e-4
    assert rel.max() < 1e-10
    T_high = np.array([400.0, 500.0, 600.0, 620.0])
    reference = np.array([iapws.IAPWS97(T=t, x=0).P * 1e6 for t in T_high])
    np.testing.assert_allclose(water.saturation_pressure(T_high), reference, rtol=1e-10)
    p = np.array([1e3, 1e5, 1e6, 1e7])
    reference = np.array([iapws.IAPWS97(P=pp * 1e-6, x=0).T for pp in p])
    np.testing.assert_allclose(water.saturation_temperature(p), reference, rtol=1e-10)


def test_saturation_pressure_matches_iapws95_coolprop():
    # Reference: CoolProp 8.0.0, PropsSI('P','T',T,'Q',0,'Water') (IAPWS-95, independent of IF97).
    reference = np.array([PropsSI("P", "T", t, "Q", 0, "Water") for t in T_GRID])
    rel = np.abs(water.saturation_pressure(T_GRID) / reference - 1.0)
    assert rel.max() < 2e-4


def test_derivative_matches_central_difference():
    T = np.array([273.2, 290.0, 310.0, 350.0, 420.0, 600.0])
    h = 1e-3
    numeric = (water.saturation_pressure(T + h) - water.saturation_pressure(T - h)) / (2 * h)
    np.testing.assert_allclose(water.dsaturation_pressure_dT(T), numeric, rtol=1e-7)


def test_derivative_obeys_clausius_clapeyron():
    # dp/dT = L / (T (v'' - v')), with L, v', v'' from CoolProp 8.0.0 (IAPWS-95).
    for t in (283.15, 313.15, 353.15):
        latent = PropsSI("H", "T", t, "Q", 1, "Water") - PropsSI("H", "T", t, "Q", 0, "Water")
        dv = 1 / PropsSI("D", "T", t, "Q", 1, "Water") - 1 / PropsSI("D", "T", t, "Q", 0, "Water")
        assert water.dsaturation_pressure_dT(t) == pytest.approx(latent / (t * dv), rel=5e-4)


def test_saturation_temperature_round_trips_and_boils_at_one_atmosphere():
    T = np.linspace(273.15, 640.0, 37)
    np.testing.assert_allclose(water.saturation_temperature(water.saturation_pressure(T)), T, atol=1e-8)
    # Reference: CoolProp 8.0.0 PropsSI('T','P',101325,'Q',0,'Water') (IAPWS-95).
    t_boil = PropsSI("T", "P", 101325.0, "Q", 0, "Water")
    assert water.saturation_temperature(101325.0) == pytest.approx(t_boil, abs=2e-3)


def test_latent_heat_within_0p2_percent_of_iapws95():
    # Reference: iapws 1.5.5 IAPWS95, h(x=1) - h(x=0) in kJ/kg.
    T = np.array([273.16, 283.15, 298.15, 313.15, 333.15, 353.15, 373.15])
    reference = np.array([(iapws.IAPWS95(T=t, x=1).h - iapws.IAPWS95(T=t, x=0).h) * 1e3 for t in T])
    rel = np.abs(water.latent_heat(T) / reference - 1.0)
    assert rel.max() < 2e-3


def test_correlations_transcribed_exactly():
    # The same published coefficient sets evaluated by chemicals 1.5.2: VDI PPDS12 table
    # (phase_change_data_VDI_PPDS_4 + PPDS12, J/mol) and Perry's Table 2-153 (Cp_data_Perry_Table_153_100
    # + dippr.EQ100, J/(kmol K)).
    from chemicals.dippr import EQ100
    from chemicals.heat_capacity import Cp_data_Perry_Table_153_100
    from chemicals.phase_change import PPDS12, phase_change_data_VDI_PPDS_4

    row = phase_change_data_VDI_PPDS_4.loc["7732-18-5"]
    cp_row = Cp_data_Perry_Table_153_100.loc["7732-18-5"]
    for t in (275.0, 300.0, 350.0):
        molar = PPDS12(t, row.Tc, row.A, row.B, row.C, row.D, row.E)
        assert water.latent_heat(t) * water.MOLAR_MASS == pytest.approx(molar, rel=1e-9)
        per_kmol = EQ100(t, cp_row.A, cp_row.B, cp_row.C, cp_row.D, cp_row.E)
        assert water.liquid_heat_capacity(t) * water.MOLAR_MASS * 1e3 == pytest.approx(per_kmol, rel=1e-9)


def test_liquid_density_matches_iapws95_at_one_atmosphere():
    # Reference: iapws 1.5.5 IAPWS95(T, P=0.101325 MPa).rho; Kell's fit is stated to ~1e-5 relative.
    T = np.array([273.16, 277.15, 293.15, 313.15, 343.15, 363.15])
    reference = np.array([iapws.IAPWS95(T=t, P=0.101325).rho for t in T])
    np.testing.assert_allclose(water.liquid_density(T), reference, rtol=5e-5)


def test_liquid_heat_capacity_within_0p3_percent_of_iapws95():
    # Reference: CoolProp 8.0.0 PropsSI('C','T',T,'P',101325,'Water') (IAPWS-95).
    T = np.array([274.15, 283.15, 298.15, 313.15, 333.15, 353.15, 368.15])
    reference = np.array([PropsSI("C", "T", t, "P", 101325.0, "Water") for t in T])
    rel = np.abs(water.liquid_heat_capacity(T) / reference - 1.0)
    assert rel.max() < 3e-3


def test_accepts_arrays_of_any_shape_and_floats():
    T = np.array([[280.0, 290.0], [300.0, 310.0]])
    for function in (water.saturation_pressure, water.dsaturation_pressure_dT, water.latent_heat,
                     water.liquid_density, water.liquid_heat_capacity):
        values = function(T)
        assert values.shape == (2, 2)
        assert values[1, 0] == pytest.approx(function(300.0), rel=1e-14)
        assert np.ndim(function(300.0)) == 0
    assert water.saturation_temperature(np.full((3, 1), 5000.0)).shape == (3, 1)


@pytest.mark.parametrize("function, bad", [
    (water.saturation_pressure, 25.0),
    (water.saturation_pressure, 700.0),
    (water.dsaturation_pressure_dT, np.nan),
    (water.latent_heat, 380.0),
    (water.liquid_density, 260.0),
    (water.liquid_heat_capacity, [300.0, 400.0]),
])
def test_out_of_range_temperature_raises_with_argument_and_value(function, bad):
    with pytest.raises(PropertyError, match=r"T = .*K received; expected"):
        function(bad)


def test_out_of_range_pressure_raises():
    with pytest.raises(PropertyError, match=r"p = 100 Pa received.*ice"):
        water.saturation_temperature(100.0)
    with pytest.raises(PropertyError, match=r"p = "):
        water.saturation_temperature(3.0e7)


def test_sublimation_pressure_matches_iapws_r14():
    # Reference: iapws 1.5.5, iapws._iapws._Sublimation_Pressure (IAPWS R14-08(2011) eq. (6), MPa):
    # the same release, so agreement is to round-off.
    from iapws._iapws import _Sublimation_Pressure

    T = np.array([150.0, 200.0, 233.15, 253.15, 263.15, 273.0, 273.16])
    reference = np.array([_Sublimation_Pressure(t) * 1e6 for t in T])
    assert np.allclose(water.sublimation_pressure(T), reference, rtol=1e-12, atol=0.0)
    # the frost point inverts it to round-off, and the triple point is exact
    assert np.allclose(water.sublimation_temperature(reference), T, rtol=1e-13, atol=0.0)
    assert water.sublimation_pressure(273.16) == pytest.approx(611.657, rel=1e-12)
