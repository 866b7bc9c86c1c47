"""The scalar transfer-coefficient kernels (fvsolver.kernels.transfer) against their NumPy twins
(fvsolver.properties.convection and moist_air), and the device's set-up validation of them
(fvsolver.device.transfer). The twins themselves are checked against outside sources in
test_convection.py and test_moist_air.py."""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from fvsolver.device.transfer import SphereTransfer
from fvsolver.errors import PropertyError
from fvsolver.kernels import transfer as kt
from fvsolver.properties import convection, moist_air, water

RTOL = 1e-13


def test_constants_agree_with_the_property_modules():
    assert kt.R == moist_air.UNIVERSAL_GAS_CONSTANT
    assert kt.M_DRY == moist_air.MOLAR_MASS_DRY_AIR
    assert kt.M_WATER == water.MOLAR_MASS
    assert kt.MOLAR_RATIO == moist_air.MOLAR_MASS_RATIO
    assert (kt.CP_DRY, kt.CP_VAPOUR) == (moist_air.CP_DRY_AIR, moist_air.CP_WATER_VAPOUR)
    assert (kt.P_STANDARD, kt.D_REFERENCE) == (moist_air.STANDARD_PRESSURE, moist_air.DIFFUSIVITY_REFERENCE)
    assert (kt.SUTHERLAND_BETA, kt.SUTHERLAND_S) == (moist_air._SUTHERLAND_BETA, moist_air._SUTHERLAND_S)
    assert (kt.KAPPA_COEFF, kt.KAPPA_S) == (moist_air._KAPPA_COEFF, moist_air._KAPPA_S)
    assert kt.GRAVITY == convection.STANDARD_GRAVITY
    assert set(kt.MODE_CODES) == set(convection.MODES) | {"given"}


@pytest.mark.parametrize("pv", [0.0, 1200.0, 4000.0])
def test_air_laws_match_moist_air(pv):
    p = 101325.0
    for t in np.linspace(moist_air.T_AIR_MIN, moist_air.T_AIR_MAX, 19):
        assert kt.air_density(t, p, pv) == pytest.approx(float(moist_air.air_density(t, p, pv)), rel=RTOL)
        assert kt.air_dynamic_viscosity(t) == pytest.approx(float(moist_air.air_dynamic_viscosity(t)), rel=RTOL)
        assert kt.air_thermal_conductivity(t) == pytest.approx(float(moist_air.air_thermal_conductivity(t)),
                                                               rel=RTOL)
        assert kt.air_heat_capacity(p, pv) == pytest.approx(float(moist_air.air_heat_capacity(t, p, pv)), rel=RTOL)
        assert kt.air_kinematic_viscosity(t, p, pv) == pytest.approx(
            float(moist_air.air_kinematic_viscosity(t, p, pv)), rel=RTOL)
        assert kt.prandtl_number(t, p, pv) == pytest.approx(float(moist_air.prandtl_number(t, p, pv)), rel=RTOL)
        assert kt.lewis_number(t, p, pv) == pytest.approx(float(moist_air.lewis_number(t, p, pv)), rel=RTOL)


# surfaces from 274 K to 320 K in air from 280 K to 310 K (the device's clipping interval), dry and humid
SURFACES = (274.0, 281.3, 295.0, 295.15 + 1e-6, 303.7, 320.0)
AIRS = (280.0, 295.15, 310.0)
HUMIDITY = ((0.0, 0.0), (2500.0, 1200.0), (800.0, 3000.0))


@pytest.mark.parametrize("mode", convection.MODES)
@pytest.mark.parametrize("diameter", [0.004, 0.03, 0.12])
@pytest.mark.parametrize("speed", [0.0, 0.2, 3.0])
def test_sphere_coefficient_matches_sphere_convection(mode, diameter, speed):
    p = 101325.0
    for t_s, t_a, (pv_s, pv_a) in itertools.product(SURFACES, AIRS, HUMIDITY):
        reference = convection.sphere_convection(diameter, t_s, t_a, p, speed, mode, p_vapour_surface=pv_s,
                                                 p_vapour_air=pv_a).h
        value = kt.sphere_coefficient(diameter, t_s, t_a, p, speed, kt.MODE_CODES[mode], pv_s, pv_a)
        assert value == pytest.approx(float(reference), rel=RTOL), (t_s, t_a, pv_s, pv_a)


@pytest.mark.parametrize("lewis", [None, 0.85])
@pytest.mark.parametrize("pv", [0.0, 1500.0])
def test_mass_transfer_matches_chilton_colburn(lewis, pv):
    for h, t_f, p in itertools.product((0.0, 4.2, 35.0), (277.0, 296.0, 318.0), (80000.0, 101325.0)):
        reference = convection.mass_transfer_coefficient(h, t_f, p, lewis, pv)
        value = kt.mass_transfer(h, t_f, p, -1.0 if lewis is None else lewis, pv)
        assert value == pytest.approx(float(reference), rel=RTOL, abs=1e-300)


@pytest.mark.parametrize("mode", ["natural", "forced", "mixed", "given"])
def test_device_coefficients_match_the_checked_path(mode, monkeypatch):
    """SphereTransfer's compiled h, h_m and derivatives against its own NumPy path (the checked
    property functions), and the derivatives against a Richardson-extrapolated difference."""
    fast = SphereTransfer(0.03, 295.15, 101325.0, 0.2, mode, 274.0, 320.0, h_given=6.5)
    slow = SphereTransfer(0.03, 295.15, 101325.0, 0.2, mode, 274.0, 320.0, h_given=6.5)
    object.__setattr__(slow, "compiled", False)
    assert fast.compiled is kt_compiled()
    for t in (274.5, 285.0, 293.0, 299.0, 319.0):
        np.testing.assert_allclose(fast.coefficients(t), slow.coefficients(t), rtol=RTOL)
        assert fast.h(t) == pytest.approx(slow.h(t), rel=RTOL)
        d_fast = np.array(fast.derivatives(t))
        np.testing.assert_allclose(d_fast, slow.derivatives(t), rtol=1e-9, atol=1e-15)
        # a fourth-order difference from the checked path, steps 0.05 and 0.1 K
        def central(step):
            hp, hmp = slow.coefficients(t + step)
            hm, hmm = slow.coefficients(t - step)
            return np.array([(hp - hm) / (2 * step), (hmp - hmm) / (2 * step)])
        richardson = (4.0 * central(0.05) - central(0.1)) / 3.0
        np.testing.assert_allclose(d_fast, richardson, rtol=1e-6, atol=1e-12 * np.abs(richardson).max())
    if mode == "given":
        assert fast.derivatives(290.0)[0] == 0.0


def kt_compiled() -> bool:
    from fvsolver.kernels import COMPILED

    return COMPILED


@pytest.mark.filterwarnings("ignore::fvsolver.properties.fluids.PropertyRangeWarning")
def test_validation_at_set_up_falls_back_to_the_checked_path():
    """Air hot enough that Churchill's Pr >= 0.7 fails somewhere in the interval: the evaluations
    keep the checked functions, which refuse the state when it is reached, not before."""
    transfer = SphereTransfer(0.03, 345.0, 101325.0, 0.2, "mixed", 274.0, 390.0, mass_transfer=False)
    assert not transfer.compiled
    with pytest.raises(PropertyError, match="Pr = "):
        transfer.h(385.0)
    assert transfer.h(280.0) > 0.0
