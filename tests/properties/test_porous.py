"""Tests of fvsolver.properties.porous."""
from __future__ import annotations

import numpy as np
import pytest

from fvsolver.errors import PropertyError
from fvsolver.properties import porous

# Representative phases: wool-like fibre, water and air near 20 C [W/(m K)] (common practice values).
K_FIBRE, K_WATER, K_AIR = 0.2, 0.6, 0.026


def test_every_model_between_series_and_parallel_bounds(rng):
    n = 5000
    porosity, saturation = rng.uniform(0.0, 1.0, (2, n))
    k_f, k_w, k_a = 10.0 ** rng.uniform(-2.0, 1.0, (3, n))
    lower = porous.effective_conductivity(porosity, saturation, k_f, k_w, k_a, "series")
    upper = porous.effective_conductivity(porosity, saturation, k_f, k_w, k_a, "parallel")
    for model in ("maxwell_eucken", "emt"):
        k = porous.effective_conductivity(porosity, saturation, k_f, k_w, k_a, model)
        assert np.all(k >= lower * (1 - 1e-12)) and np.all(k <= upper * (1 + 1e-12))


@pytest.mark.parametrize("model", porous.CONDUCTIVITY_MODELS)
def test_single_phase_limits(model):
    assert porous.effective_conductivity(0.0, 0.4, K_FIBRE, K_WATER, K_AIR, model) == pytest.approx(K_FIBRE)
    assert porous.effective_conductivity(1.0, 1.0, K_FIBRE, K_WATER, K_AIR, model) == pytest.approx(K_WATER)
    assert porous.effective_conductivity(1.0, 0.0, K_FIBRE, K_WATER, K_AIR, model) == pytest.approx(K_AIR)


def test_maxwell_eucken_hand_evaluation():
    # Wang, Carson, North & Cleland, IJHMT 49 (2006), two-phase ME form with phase 1 continuous:
    # k = k1 (2k1 + k2 - 2(k1 - k2) v2) / (2k1 + k2 + (k1 - k2) v2). Fibre 0.2, water 0.6, v2 = 0.85:
    # k = 0.2 * (0.4 + 0.6 + 0.68) / (0.4 + 0.6 - 0.34) = 0.2 * 1.68 / 0.66 = 0.509090...
    k = porous.effective_conductivity(0.85, 1.0, K_FIBRE, K_WATER, K_AIR, "maxwell_eucken")
    assert k == pytest.approx(0.2 * 1.68 / 0.66, rel=1e-12)


def test_emt_matches_two_phase_closed_form():
    # Wang et al. (2006) two-phase EMT closed form:
    # k = [(3v1 - 1)k1 + (3v2 - 1)k2 + sqrt(((3v1 - 1)k1 + (3v2 - 1)k2)^2 + 8 k1 k2)] / 4.
    for porosity in (0.2, 0.5, 0.85):
        v1, v2 = 1.0 - porosity, porosity
        b = (3 * v1 - 1) * K_FIBRE + (3 * v2 - 1) * K_AIR
        closed = (b + np.sqrt(b**2 + 8 * K_FIBRE * K_AIR)) / 4
        k = porous.effective_conductivity(porosity, 0.0, K_FIBRE, K_WATER, K_AIR, "emt")
        assert k == pytest.approx(closed, rel=1e-12)


def test_felt_conductivity_in_sensible_band():
    # Common practice (from memory): dry wool felt conducts ~0.04-0.05 W/(m K); water-soaked felt
    # approaches but stays below water's 0.6 W/(m K).
    dry = porous.effective_conductivity(0.85, 0.0, K_FIBRE, K_WATER, K_AIR)
    wet = porous.effective_conductivity(0.85, 1.0, K_FIBRE, K_WATER, K_AIR)
    assert 0.03 < dry < 0.07
    assert 0.3 < wet < 0.6
    saturation = np.linspace(0.0, 1.0, 11)
    k = porous.effective_conductivity(0.85, saturation, K_FIBRE, K_WATER, K_AIR)
    assert k.shape == (11,) and np.all(np.diff(k) > 0.0)


def test_volumetric_heat_capacity_rule_of_mixtures():
    rho_c = (1.3e6, 4.18e6, 1.2e3)
    phi, s = np.array([0.0, 0.85, 0.85, 1.0]), np.array([0.5, 0.0, 0.6, 1.0])
    expected = (1 - phi) * rho_c[0] + phi * s * rho_c[1] + phi * (1 - s) * rho_c[2]
    np.testing.assert_allclose(porous.effective_volumetric_heat_capacity(phi, s, *rho_c), expected, rtol=1e-15)
    assert porous.effective_volumetric_heat_capacity(1.0, 1.0, *rho_c) == pytest.approx(rho_c[1])


def test_drying_rate_factor_shape():
    s = np.linspace(0.0, 1.0, 101)
    f = porous.drying_rate_factor(s, 0.4, 0.05)
    assert np.all(f[s >= 0.4] == 1.0)
    assert np.all(f[s <= 0.05] == 0.0)
    middle = (s > 0.05) & (s < 0.4)
    np.testing.assert_allclose(f[middle], (s[middle] - 0.05) / 0.35, rtol=1e-12)
    assert np.all(np.diff(f) >= 0.0)
    assert porous.drying_rate_factor(0.4, 0.4) == 1.0


@pytest.mark.parametrize("call, pattern", [
    (lambda: porous.effective_conductivity(1.2, 0.5, 0.2, 0.6, 0.026), "porosity = 1.2"),
    (lambda: porous.effective_conductivity(0.8, -0.1, 0.2, 0.6, 0.026), "saturation = -0.1"),
    (lambda: porous.effective_conductivity(0.8, 0.5, 0.0, 0.6, 0.026), "k_fibre = 0"),
    (lambda: porous.effective_conductivity(0.8, 0.5, 0.2, 0.6, 0.026, "hashin"), "model = 'hashin'"),
    (lambda: porous.effective_volumetric_heat_capacity(0.8, 0.5, -1.0, 4e6, 1e3), "rho_c_fibre = -1"),
    (lambda: porous.drying_rate_factor(0.5, 0.3, 0.3), "residual_saturation = 0.3"),
])
def test_invalid_inputs_raise(call, pattern):
    with pytest.raises(PropertyError, match=pattern):
        call()
