"""Tests of fvsolver.properties.fluids against chemicals 1.5.2, CoolProp 8.0.0 and NIST data."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from chemicals.critical import Pc as chemicals_pc
from chemicals.critical import Tc as chemicals_tc
from chemicals.dippr import EQ105
from chemicals.elements import molecular_weight, simple_formula_parser
from chemicals.heat_capacity import TRCCp, Cp_data_Poling, TRC_gas_data
from chemicals.identifiers import search_chemical
from chemicals.phase_change import Hvap_data_CRC
from chemicals.phase_change import Tb as chemicals_tb
from chemicals.vapor_pressure import Antoine, Psat_data_AntoinePoling
from chemicals.volume import rho_data_Perry_8E_105_l
from CoolProp.CoolProp import PropsSI

from fvsolver.errors import PropertyError
from fvsolver.properties.fluids import FLUIDS, AntoineEquation, PropertyRangeWarning, get_fluid

ALL = sorted(FLUIDS)
# Fluids with a reference equation of state in CoolProp 8.0.0.
COOLPROP_NAMES = {"diethyl ether": "DiethylEther", "n-pentane": "n-Pentane", "isopentane": "Isopentane",
                  "acetone": "Acetone"}
# Temperatures inside every range used below (device operation is roughly 280-320 K).
T_CHECK = np.array([273.15, 293.15, 308.15])


@pytest.mark.parametrize("name", ALL)
def test_saturation_pressure_vs_poling_antoine(name):
    # Reference: chemicals 1.5.2 Psat_data_AntoinePoling (Poling, Prausnitz & O'Connell, 5th ed., Appendix A;
    # the table's A is for log10(P/Pa), T in K) evaluated with chemicals.vapor_pressure.Antoine(base=10).
    # Published vapour-pressure sets spread by up to ~2 % for dichloromethane at 20-25 C, hence 2.5 %.
    fluid = get_fluid(name)
    row = Psat_data_AntoinePoling.loc[fluid.cas]
    reference = np.array([Antoine(t, row.A, row.B, row.C, base=10.0) for t in T_CHECK])
    np.testing.assert_allclose(fluid.saturation_pressure(T_CHECK), reference, rtol=2.5e-2)


@pytest.mark.parametrize("name", ALL)
def test_coefficients_transcribed_exactly(name):
    # The same published sets evaluated by chemicals 1.5.2 from its own tables: VDI PPDS vapour pressure
    # (Psat_data_VDI_PPDS_3 + vapor_pressure.Wagner), PPDS12 enthalpy (phase_change_data_VDI_PPDS_4 +
    # PPDS12, J/mol), PPDS10 density (rho_data_VDI_PPDS_2 + volume_VDI_PPDS, kg/m3), Perry's Table 2-153
    # (Cp_data_Perry_Table_153_100 + dippr.EQ100, J/(kmol K)) and Poling's Cpg at 298 K (J/(mol K)).
    from chemicals.dippr import EQ100
    from chemicals.heat_capacity import Cp_data_Perry_Table_153_100
    from chemicals.phase_change import PPDS12, phase_change_data_VDI_PPDS_4
    from chemicals.vapor_pressure import Psat_data_VDI_PPDS_3, Wagner
    from chemicals.volume import rho_data_VDI_PPDS_2, volume_VDI_PPDS

    fluid = get_fluid(name)
    ps, hv = Psat_data_VDI_PPDS_3.loc[fluid.cas], phase_change_data_VDI_PPDS_4.loc[fluid.cas]
    rho, cp = rho_data_VDI_PPDS_2.loc[fluid.cas], Cp_data_Perry_Table_153_100.loc[fluid.cas]
    assert (fluid.critical_temperature, fluid.critical_pressure) == (ps.Tc, ps.Pc)
    assert fluid.vapour_pressure.t_min == ps.Tm
    for t in (260.0, 290.0, 300.0):
        assert fluid.saturation_pressure(t) == pytest.approx(Wagner(t, ps.Tc, ps.Pc, ps.A, ps.B, ps.C, ps.D),
                                                             rel=1e-9)
        assert fluid.latent_heat(t) * fluid.molar_mass == pytest.approx(
            PPDS12(t, hv.Tc, hv.A, hv.B, hv.C, hv.D, hv.E), rel=1e-9)
        assert fluid.liquid_density(t) == pytest.approx(
            volume_VDI_PPDS(t, rho.Tc, rho.rhoc, rho.A, rho.B, rho.C, rho.D), rel=1e-9)
        assert fluid.liquid_heat_capacity(t) * fluid.molar_mass * 1e3 == pytest.approx(
            EQ100(t, cp.A, cp.B, cp.C, cp.D, cp.E), rel=1e-9)
    assert fluid.liquid_cp_range == (cp.Tmin, cp.Tmax)
    assert fluid.vapour_cp_298 == Cp_data_Poling.loc[fluid.cas, "Cpg"]


@pytest.mark.parametrize("name", sorted(COOLPROP_NAMES))
def test_saturation_pressure_vs_coolprop(name):
    # Reference: CoolProp 8.0.0 PropsSI('P','T',T,'Q',0,fluid) (reference equations of state).
    fluid = get_fluid(name)
    reference = np.array([PropsSI("P", "T", t, "Q", 0, COOLPROP_NAMES[name]) for t in T_CHECK])
    np.testing.assert_allclose(fluid.saturation_pressure(T_CHECK), reference, rtol=1e-2)


def test_dichloromethane_vs_nist_antoine():
    # Reference: NIST Chemistry WebBook, dichloromethane, Antoine parameters
    # log10(P/bar) = 4.53691 - 1327.016 / (T - 20.474), 233-313 K. That older fit lies ~1.4 % below the
    # VDI and Poling sets at 20-25 C (and puts the boiling point at 313.3 K).
    nist = AntoineEquation(4.53691, 1327.016, -20.474, 1.0e5, 233.0, 313.0)
    fluid = get_fluid("dichloromethane")
    np.testing.assert_allclose(fluid.saturation_pressure(T_CHECK), nist.pressure(T_CHECK), rtol=2e-2)


def test_antoine_equation_consistency():
    eq = AntoineEquation(4.53691, 1327.016, -20.474, 1.0e5, 233.0, 313.0)
    T = np.array([240.0, 280.0, 310.0])
    np.testing.assert_allclose(eq.temperature(eq.pressure(T)), T, rtol=1e-13)
    h = 1e-4
    numeric = (np.log(eq.pressure(T + h)) - np.log(eq.pressure(T - h))) / (2 * h)
    np.testing.assert_allclose(eq.dlnp_dT(T), numeric, rtol=1e-7)


@pytest.mark.parametrize("name", ALL)
def test_derivative_and_inverse(name):
    fluid = get_fluid(name)
    T = np.array([[250.0, 280.0], [300.0, 330.0]])
    h = 1e-4
    numeric = (fluid.saturation_pressure(T + h) - fluid.saturation_pressure(T - h)) / (2 * h)
    np.testing.assert_allclose(fluid.dsaturation_pressure_dT(T), numeric, rtol=1e-7)
    np.testing.assert_allclose(fluid.saturation_temperature(fluid.saturation_pressure(T)), T, rtol=1e-10)
    assert fluid.saturation_temperature(fluid.saturation_pressure(T)).shape == (2, 2)


@pytest.mark.parametrize("name", ALL)
def test_normal_boiling_point(name):
    # Reference: chemicals 1.5.2 phase_change.Tb(CAS, method='CRC_ORG') (CRC Handbook, organic constants).
    fluid = get_fluid(name)
    reference = chemicals_tb(fluid.cas, method="CRC_ORG")
    assert fluid.normal_boiling_point == reference
    assert fluid.saturation_temperature(101325.0) == pytest.approx(reference, abs=0.3)


def test_dichloromethane_boiling_point_window():
    # NIST WebBook lists 313.0 K, CRC 312.95 K for dichloromethane (via chemicals 1.5.2 Tb methods).
    assert 312.9 <= get_fluid("dichloromethane").saturation_temperature(101325.0) <= 313.2


@pytest.mark.parametrize("name", ALL)
def test_latent_heat_vs_crc(name):
    # Reference: chemicals 1.5.2 Hvap_data_CRC 'Hvap298' [J/mol] (CRC Handbook, enthalpy of vaporization).
    fluid = get_fluid(name)
    reference = Hvap_data_CRC.loc[fluid.cas, "Hvap298"]
    assert fluid.latent_heat(298.15) * fluid.molar_mass == pytest.approx(reference, rel=3e-2)


@pytest.mark.parametrize("name", sorted(COOLPROP_NAMES))
def test_latent_heat_density_and_heat_capacities_vs_coolprop(name):
    # Reference: CoolProp 8.0.0 saturated-state properties (H, D, C at Q = 0/1; CP0MOLAR ideal gas).
    fluid = get_fluid(name)
    cp_name = COOLPROP_NAMES[name]
    for t in T_CHECK:
        latent = PropsSI("H", "T", t, "Q", 1, cp_name) - PropsSI("H", "T", t, "Q", 0, cp_name)
        assert fluid.latent_heat(t) == pytest.approx(latent, rel=1e-2)
        assert fluid.liquid_density(t) == pytest.approx(PropsSI("D", "T", t, "Q", 0, cp_name), rel=1e-2)
        # Ideal-gas density of the saturated vapour: compressibility factor 0.95-0.99 here.
        assert fluid.saturated_vapour_density(t) == pytest.approx(PropsSI("D", "T", t, "Q", 1, cp_name), rel=6e-2)
    # Perry's DIPPR-100 fits deviate from the reference EOS by up to 1.5 % at 298 K (diethyl ether).
    cp_liquid = PropsSI("C", "T", 298.15, "Q", 0, cp_name)
    assert fluid.liquid_heat_capacity(298.15) == pytest.approx(cp_liquid, rel=2e-2)
    cp0 = PropsSI("CP0MOLAR", "T", 298.15, "Q", 1, cp_name) / PropsSI("M", cp_name)
    assert fluid.vapour_heat_capacity(298.15) == pytest.approx(cp0, rel=2e-2)


@pytest.mark.parametrize("name", ALL)
def test_liquid_density_vs_perry(name):
    # Reference: chemicals 1.5.2 rho_data_Perry_8E_105_l with chemicals.dippr.EQ105 [mol/m3]
    # (Perry's 8th ed. Table 2-32, DIPPR eq. 105), converted with the fluid's molar mass.
    fluid = get_fluid(name)
    row = rho_data_Perry_8E_105_l.loc[fluid.cas]
    reference = np.array([EQ105(t, row.C1, row.C2, row.C3, row.C4) for t in T_CHECK]) * fluid.molar_mass
    np.testing.assert_allclose(fluid.liquid_density(T_CHECK), reference, rtol=2e-2)


def test_dichloromethane_density_at_20c():
    # ~1327 kg/m3 at 20 C (CRC Handbook value 1.3266 g/cm3, from memory).
    assert get_fluid("dichloromethane").liquid_density(293.15) == pytest.approx(1327.0, rel=2e-3)


@pytest.mark.parametrize("name", ["dichloromethane", "methyl formate"])
def test_heat_capacities_without_coolprop_model(name):
    # References: chemicals 1.5.2 Cp_data_Poling 'Cpl' (liquid at 298 K, Poling 5th ed.) and
    # TRC_gas_data with TRCCp (TRC Thermodynamics of Organic Compounds in the Gas State), both J/(mol K).
    fluid = get_fluid(name)
    cpl = Cp_data_Poling.loc[fluid.cas, "Cpl"]
    assert fluid.liquid_heat_capacity(298.15) * fluid.molar_mass == pytest.approx(cpl, rel=3e-2)
    row = TRC_gas_data.loc[fluid.cas]
    cpg = TRCCp(298.15, *(row[key] for key in ("a0", "a1", "a2", "a3", "a4", "a5", "a6", "a7")))
    assert fluid.vapour_heat_capacity(298.15) * fluid.molar_mass == pytest.approx(cpg, rel=1e-2)


@pytest.mark.parametrize("name", ALL)
def test_molar_mass_and_critical_constants(name):
    # References: chemicals 1.5.2 identifiers.search_chemical(CAS).MW and elements.molecular_weight of the
    # formula [g/mol]; critical.Tc / critical.Pc default methods. Published Pc of dichloromethane ranges
    # 6.08-6.35 MPa (chemicals' methods), hence 5 % on Pc.
    fluid = get_fluid(name)
    assert fluid.molar_mass * 1e3 == pytest.approx(search_chemical(fluid.cas).MW, rel=1e-4)
    assert fluid.molar_mass * 1e3 == pytest.approx(molecular_weight(simple_formula_parser(fluid.formula)),
                                                   rel=1e-4)
    assert fluid.critical_temperature == pytest.approx(chemicals_tc(fluid.cas), rel=5e-3)
    assert fluid.critical_pressure == pytest.approx(chemicals_pc(fluid.cas), rel=5e-2)


def test_range_warning_fires_outside_and_not_inside():
    fluid = get_fluid("dichloromethane")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fluid.saturation_pressure(T_CHECK)
        fluid.liquid_heat_capacity(300.0)
    with pytest.warns(PropertyRangeWarning, match=r"dichloromethane: saturation pressure .*T = 150.*178.05-510.05"):
        value = fluid.saturation_pressure(150.0)
    assert np.isfinite(value) and value > 0.0
    with pytest.warns(PropertyRangeWarning, match=r"liquid heat capacity .*T = 330.*180-320"):
        fluid.liquid_heat_capacity(330.0)
    with pytest.warns(PropertyRangeWarning, match="saturation temperature"):
        fluid.saturation_temperature(1.0)


def test_supercritical_and_invalid_inputs_raise():
    fluid = get_fluid("acetone")
    with pytest.raises(PropertyError, match="critical temperature 508.1"):
        fluid.saturation_pressure(520.0)
    with pytest.raises(PropertyError, match="critical pressure"):
        fluid.saturation_temperature(5e6)
    with pytest.raises(PropertyError, match="T = -5 K received"):
        fluid.latent_heat(-5.0)


def test_lookup_by_name_alias_and_cas():
    assert get_fluid("Dichloromethane") is FLUIDS["dichloromethane"]
    assert get_fluid("  METHYLENE CHLORIDE ") is FLUIDS["dichloromethane"]
    assert get_fluid("75-09-2") is FLUIDS["dichloromethane"]
    assert get_fluid("Pentane") is FLUIDS["n-pentane"]
    assert len(FLUIDS) >= 5
    with pytest.raises(TypeError):
        FLUIDS["water"] = FLUIDS["acetone"]  # type: ignore[index]


def test_unknown_fluid_lists_known_names():
    with pytest.raises(PropertyError) as info:
        get_fluid("unobtainium")
    message = str(info.value)
    assert "'unobtainium'" in message
    for name in FLUIDS:
        assert name in message
    with pytest.raises(PropertyError, match="expected a string"):
        get_fluid(42)  # type: ignore[arg-type]
