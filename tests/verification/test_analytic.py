"""Checks of the exact conduction solutions used to verify the solver."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize, special

from fvsolver.errors import FvsolverError
from fvsolver.verification.analytic import (
    composite_cylinder_temperature,
    composite_plane_wall_temperature,
    composite_sphere_temperature,
    hollow_cylinder_temperature,
    hollow_sphere_temperature,
    semi_infinite_convection,
    semi_infinite_surface_flux,
)
from fvsolver.verification.analytic_transient import (
    MAX_AUTO_TERMS,
    cylinder_eigenvalues,
    cylinder_energy_fraction,
    cylinder_temperature,
    finite_cylinder_temperature,
    plane_wall_eigenvalues,
    plane_wall_energy_fraction,
    plane_wall_temperature,
    required_series_terms,
    series_coefficients,
    sphere_eigenvalues,
    sphere_energy_fraction,
    sphere_temperature,
)

GEOMETRIES = ("plane_wall", "cylinder", "sphere")
TEMPERATURE = {"plane_wall": plane_wall_temperature, "cylinder": cylinder_temperature,
               "sphere": sphere_temperature}
ENERGY = {"plane_wall": plane_wall_energy_fraction, "cylinder": cylinder_energy_fraction,
          "sphere": sphere_energy_fraction}
EIGEN = {"plane_wall": plane_wall_eigenvalues, "cylinder": cylinder_eigenvalues,
         "sphere": sphere_eigenvalues}
# Exponent of r in the volume element: dV ~ r^m dr.
METRIC = {"plane_wall": 0, "cylinder": 1, "sphere": 2}

# Incropera, Fundamentals of Heat and Mass Transfer, Table 5.1 (one-term
# coefficients zeta_1, C_1), values from memory; each is confirmed below by an
# independent root and projection computation before being trusted.
TABLE_5_1 = [
    ("plane_wall", 0.1, 0.3111, 1.0161), ("plane_wall", 1.0, 0.8603, 1.1191),
    ("plane_wall", 10.0, 1.4289, 1.2620),
    ("cylinder", 0.1, 0.4417, 1.0246), ("cylinder", 1.0, 1.2558, 1.2071),
    ("cylinder", 10.0, 2.1795, 1.5677),
    ("sphere", 0.1, 0.5423, 1.0298), ("sphere", 1.0, 1.5708, 1.2732),
    ("sphere", 10.0, 2.8363, 1.9249),
]
TABLE_RTOL = 5e-4  # 4-digit table entries


def _shape(geometry: str, arg: np.ndarray) -> np.ndarray:
    """Eigenfunctions written out here, independent of the module."""
    if geometry == "plane_wall":
        return np.cos(arg)
    if geometry == "cylinder":
        return special.jv(0, arg)
    return np.where(arg == 0, 1.0, np.sin(arg) / np.where(arg == 0, 1.0, arg))


def _independent_first_root(geometry: str, bi: float) -> float:
    """First eigenvalue from the equation written in another form."""
    tiny = 1e-12
    if geometry == "plane_wall":  # zeta = arctan(Bi / zeta)
        return optimize.brentq(lambda z: z - math.atan(bi / z), tiny, math.pi / 2, xtol=1e-15)
    if geometry == "cylinder":    # zeta J1/J0 = Bi below the first zero of J0
        j01 = special.jn_zeros(0, 1)[0]
        return optimize.brentq(lambda z: z * special.jv(1, z) / special.jv(0, z) - bi,
                               tiny, j01 * (1 - tiny), xtol=1e-15)
    return optimize.brentq(lambda z: 1 - z / math.tan(z) - bi, tiny, math.pi * (1 - tiny),
                           xtol=1e-15)


def _projection_coefficient(geometry: str, zeta: float) -> float:
    """C_1 as the projection of a uniform initial state on X_1 (orthogonality)."""
    m = METRIC[geometry]
    num = integrate.quad(lambda s: _shape(geometry, zeta * s) * s**m, 0, 1, epsabs=1e-14)[0]
    den = integrate.quad(lambda s: _shape(geometry, zeta * s) ** 2 * s**m, 0, 1,
                         epsabs=1e-14)[0]
    return num / den


@pytest.mark.parametrize("geometry,bi,zeta_tab,c_tab", TABLE_5_1)
def test_one_term_coefficients_match_table_5_1(geometry, bi, zeta_tab, c_tab):
    zeta, c = series_coefficients(geometry, bi, 1)
    zeta_ind = _independent_first_root(geometry, bi)
    c_ind = _projection_coefficient(geometry, zeta_ind)
    # The remembered table entries agree with the independent computation ...
    assert zeta_ind == pytest.approx(zeta_tab, rel=TABLE_RTOL)
    assert c_ind == pytest.approx(c_tab, rel=TABLE_RTOL)
    # ... and the module agrees with both.
    assert zeta[0] == pytest.approx(zeta_ind, rel=1e-12)
    assert c[0] == pytest.approx(c_ind, rel=1e-9)
    assert zeta[0] == pytest.approx(zeta_tab, rel=TABLE_RTOL)
    assert c[0] == pytest.approx(c_tab, rel=TABLE_RTOL)


def test_sphere_bi_one_is_exact():
    # 1 - zeta cot zeta = 1 gives cot zeta = 0: zeta_n = (n - 1/2) pi, and
    # C_1 = 4 (1 - 0) / (pi - 0) = 4/pi.
    zeta, c = series_coefficients("sphere", 1.0, 5)
    assert zeta == pytest.approx((np.arange(1, 6) - 0.5) * np.pi, rel=1e-14)
    assert c[0] == pytest.approx(4 / np.pi, rel=1e-13)


def _pole_free_residual(geometry: str, z: np.ndarray, bi: float) -> np.ndarray:
    if geometry == "plane_wall":
        return z * np.sin(z) - bi * np.cos(z)
    if geometry == "cylinder":
        return z * special.jv(1, z) - bi * special.jv(0, z)
    return (1 - bi) * _shape("sphere", z) - np.cos(z)


@pytest.mark.parametrize("geometry", GEOMETRIES)
@pytest.mark.parametrize("bi", [1e-3, 0.5, 10.0, 1e4])
def test_eigenvalues_up_to_200_are_each_root_once(geometry, bi):
    n = 200
    zeta = EIGEN[geometry](bi, n)
    assert zeta.shape == (n,) and np.all(np.diff(zeta) > 0) and zeta[0] > 0
    scale = np.abs(zeta) + bi
    assert np.all(np.abs(_pole_free_residual(geometry, zeta, bi)) < 1e-11 * scale)
    # Count sign changes of the residual on a fine grid: exactly n roots below
    # zeta_n + (a bit less than half the spacing), so none is missed or repeated.
    grid = np.linspace(1e-9, zeta[-1] + 1.0, 400_001)
    f = _pole_free_residual(geometry, grid, bi)
    assert np.count_nonzero(np.signbit(f[1:]) != np.signbit(f[:-1])) == n


def test_large_index_eigenvalues_follow_asymptotics():
    # zeta tan zeta = Bi: zeta_n ~ m + Bi/m, m = (n-1) pi; sphere:
    # tan zeta = zeta/(1 - Bi): zeta_n ~ p + (Bi - 1)/p, p = (n - 1/2) pi.
    n, bi = 200, 2.0
    m, p = (n - 1) * np.pi, (n - 0.5) * np.pi
    assert plane_wall_eigenvalues(bi, n)[-1] == pytest.approx(m + bi / m, abs=1e-6)
    assert sphere_eigenvalues(bi, n)[-1] == pytest.approx(p + (bi - 1) / p, abs=1e-6)
    # Cylinder: zeta J1/J0 = Bi tends to the zeros of J1 (Bi/zeta -> 0).
    j1 = special.jn_zeros(1, n - 1)[-1]
    assert cylinder_eigenvalues(bi, n)[-1] == pytest.approx(j1, abs=bi / j1 * 1.01)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_tail_term_bound_used_for_truncation_holds(geometry):
    # Module notes: zeta_n >= (n-1) pi and |C_n|, |C_n w_n| <= 4 for n >= 2.
    for bi in np.logspace(-3, 4, 8):
        zeta, c = series_coefficients(geometry, bi, 400)
        assert np.all(zeta[1:] >= np.arange(1, 400) * np.pi)
        if geometry == "plane_wall":
            w = np.sin(zeta) / zeta
        elif geometry == "cylinder":
            w = 2 * special.jv(1, zeta) / zeta
        else:
            w = 3 * (np.sin(zeta) - zeta * np.cos(zeta)) / zeta**3
        assert np.max(np.abs(c[1:])) <= 4.0
        assert np.max(np.abs(c[1:] * w[1:])) <= 4.0


@pytest.mark.parametrize("geometry", GEOMETRIES)
@pytest.mark.parametrize("fo", [1e-3, 2e-2, 0.2, 3.0])
def test_automatic_terms_meet_1e_12(geometry, fo):
    pos = np.linspace(0, 1, 11)
    auto = TEMPERATURE[geometry](pos, fo, 1.0, 1.0, 1.0, 3.0, 1.0, 0.0)
    n = required_series_terms(fo)
    many = TEMPERATURE[geometry](pos, fo, 1.0, 1.0, 1.0, 3.0, 1.0, 0.0, n_terms=3 * n + 50)
    assert np.max(np.abs(auto - many)) < 1e-12
    energy = ENERGY[geometry](fo, 1.0, 1.0, 1.0, 3.0)
    assert abs(energy - ENERGY[geometry](fo, 1.0, 1.0, 1.0, 3.0, n_terms=3 * n + 50)) < 1e-12


def test_required_terms_grow_as_fo_falls():
    counts = [required_series_terms(fo) for fo in (1.0, 0.1, 1e-2, 1e-4, 1e-6)]
    assert counts == sorted(counts) and counts[0] >= 1 and counts[-1] <= MAX_AUTO_TERMS
    with pytest.raises(FvsolverError, match="Fo"):
        required_series_terms(1e-9)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_series_at_early_time_recovers_initial_state(geometry):
    low = -0.5 if geometry == "plane_wall" else 0.0
    pos = np.linspace(low, 0.5, 9)  # includes the centre
    fo = 1e-5                       # penetration depth ~ sqrt(Fo) = 0.003
    theta = TEMPERATURE[geometry](pos, fo, 1.0, 1.0, 1.0, 2.0, 1.0, 0.0)
    assert np.max(np.abs(theta - 1.0)) < 1e-10
    truncated = TEMPERATURE[geometry](pos, fo, 1.0, 1.0, 1.0, 2.0, 1.0, 0.0, n_terms=20)
    assert np.max(np.abs(truncated - 1.0)) > 1e-4  # too few terms is visibly wrong


@pytest.mark.parametrize("geometry,bi,zeta_tab,c_tab", TABLE_5_1)
def test_one_term_limit_within_two_percent_for_fo_above_0_2(geometry, bi, zeta_tab, c_tab):
    # Incropera sec. 5.5 (from memory): the one-term approximation is within
    # 2 % of the series for Fo > 0.2; here built from the Table 5.1 entries.
    pos = np.linspace(0, 1, 21)
    for fo in (0.2, 0.3, 0.5, 1.0, 2.0):
        full = TEMPERATURE[geometry](pos, fo, 1.0, 1.0, 1.0, bi, 1.0, 0.0)
        one = c_tab * np.exp(-zeta_tab**2 * fo) * _shape(geometry, zeta_tab * pos)
        assert np.max(np.abs(one - full)) <= 0.02 * full[0]
    full = TEMPERATURE[geometry](0.0, 0.01, 1.0, 1.0, 1.0, 1.0, 1.0, 0.0)
    z, c = series_coefficients(geometry, 1.0, 1)
    assert abs(c[0] * np.exp(-z[0] ** 2 * 0.01) - full) > 0.02 * full  # fails at small Fo


def test_plane_wall_early_time_matches_semi_infinite():
    # Near a face at Fo = 0.01 the wall behaves as a semi-infinite solid.
    L, alpha, k, h, t = 1.0, 1.0, 1.0, 5.0, 0.01
    x = np.linspace(0.6, 1.0, 9)
    wall = plane_wall_temperature(x, t, L, alpha, k, h, 350.0, 300.0)
    semi = semi_infinite_convection(L - x, t, alpha, k, h, 350.0, 300.0)
    assert np.max(np.abs(wall - semi)) < 1e-10


def _laplacian(geometry, f, s, d):
    """Central-difference Laplacian in x, r (cylinder) or r (sphere)."""
    first = (f(s + d) - f(s - d)) / (2 * d)
    second = (f(s + d) - 2 * f(s) + f(s - d)) / d**2
    return second + METRIC[geometry] * first / s


@pytest.mark.parametrize("geometry", GEOMETRIES)
@pytest.mark.parametrize("bi", [0.3, 4.0])
def test_series_satisfies_heat_equation_and_robin_condition(geometry, bi):
    L, alpha, k = 0.04, 2e-5, 8.0
    h, fo, d = bi * k / L, 0.05, 2e-4 * L
    t = fo * L**2 / alpha
    def T(s, tt=t):  # T_i = 1 K, T_inf = 0 K keeps the round-off of differences small
        return TEMPERATURE[geometry](s, tt, L, alpha, k, h, 1.0, 0.0)
    for s in (0.3 * L, 0.7 * L):
        dt = 1e-4 * t
        dTdt = (T(s, t + dt) - T(s, t - dt)) / (2 * dt)
        assert dTdt == pytest.approx(alpha * _laplacian(geometry, T, s, d), rel=1e-6)
    grad = (3 * T(L) - 4 * T(L - d) + T(L - 2 * d)) / (2 * d)
    assert -k * grad == pytest.approx(h * T(L), rel=1e-6)
    assert abs(T(d) - T(0.0)) < 1e-6 * abs(T(0.0))  # zero gradient at centre
    if geometry == "plane_wall":
        assert T(-0.3 * L) == pytest.approx(T(0.3 * L), abs=1e-12)


def test_finite_cylinder_satisfies_pde_and_every_face_condition():
    r0, L, alpha, k, h = 0.02, 0.03, 1e-5, 5.0, 400.0
    t = 8.0
    d = 1e-6
    def T(r, z, tt=t):
        return finite_cylinder_temperature(r, z, tt, r0, L, alpha, k, h, 500.0, 300.0)
    r, z, dt = 0.011, 0.017, 1e-4 * t
    lap = ((T(r + d, z) - 2 * T(r, z) + T(r - d, z)) / d**2
           + (T(r + d, z) - T(r - d, z)) / (2 * d * r)
           + (T(r, z + d) - 2 * T(r, z) + T(r, z - d)) / d**2)
    assert (T(r, z, t + dt) - T(r, z, t - dt)) / (2 * dt) == pytest.approx(alpha * lap, rel=1e-5)
    grad_r = (3 * T(r0, z) - 4 * T(r0 - d, z) + T(r0 - 2 * d, z)) / (2 * d)
    grad_z = (3 * T(r, L) - 4 * T(r, L - d) + T(r, L - 2 * d)) / (2 * d)
    assert -k * grad_r == pytest.approx(h * (T(r0, z) - 300.0), rel=1e-5)
    assert -k * grad_z == pytest.approx(h * (T(r, L) - 300.0), rel=1e-5)
    assert T(r, -z) == pytest.approx(T(r, z), abs=1e-12)
    # A very long cylinder is the infinite cylinder at mid-length.
    long = finite_cylinder_temperature([0.0, 0.01], 0.0, t, r0, 100 * r0, alpha, k, h,
                                       500.0, 300.0)
    assert long == pytest.approx(cylinder_temperature([0.0, 0.01], t, r0, alpha, k, h,
                                                      500.0, 300.0), abs=1e-9)
    assert T(np.zeros((3, 1)), np.zeros(4)).shape == (3, 4)


@pytest.mark.parametrize("geometry", GEOMETRIES)
@pytest.mark.parametrize("bi", [0.1, 1.0, 10.0])
def test_energy_fraction_equals_volume_integral(geometry, bi):
    m = METRIC[geometry]
    for fo in (0.01, 0.2, 1.0):
        def theta(s):
            return float(TEMPERATURE[geometry](s, fo, 1.0, 1.0, 1.0, bi, 1.0, 0.0))
        mean = (m + 1) * integrate.quad(lambda s: theta(s) * s**m, 0, 1,
                                        epsabs=1e-13, epsrel=1e-13, limit=200)[0]
        q = float(ENERGY[geometry](fo, 1.0, 1.0, 1.0, bi))
        assert q == pytest.approx(1.0 - mean, abs=1e-8)
    q = ENERGY[geometry](np.array([1e-3, 0.1, 1.0, 5e3]), 1.0, 1.0, 1.0, bi)
    assert np.all(np.diff(q) > 0) and 0 < q[0] < 0.1 and q[-1] == pytest.approx(1.0, abs=1e-9)


def _erfc_profile(x, t, alpha, T_i, T_s):
    return T_i + (T_s - T_i) * special.erfc(x / (2 * np.sqrt(alpha * t)))


def test_semi_infinite_matches_textbook_form_where_it_is_finite():
    x, t, alpha, k, h = np.linspace(0, 0.05, 11), 200.0, 1e-6, 2.0, 40.0
    eta, beta = x / (2 * np.sqrt(alpha * t)), h * np.sqrt(alpha * t) / k
    textbook = special.erfc(eta) - np.exp(h * x / k + beta**2) * special.erfc(eta + beta)
    T = semi_infinite_convection(x, t, alpha, k, h, 300.0, 400.0)
    assert T == pytest.approx(300.0 + 100.0 * textbook, rel=1e-12, abs=1e-10)


def test_semi_infinite_large_h_limit_and_no_overflow():
    x, alpha, k = np.linspace(0, 0.5, 26), 1e-5, 1.0
    for t in (10.0, 1e5):
        ref = _erfc_profile(x, t, alpha, 300.0, 400.0)
        assert semi_infinite_convection(x, t, alpha, k, np.inf, 300.0, 400.0) == \
            pytest.approx(ref, abs=1e-12)
        assert semi_infinite_convection(x, t, alpha, k, 1e12, 300.0, 400.0) == \
            pytest.approx(ref, abs=1e-8)
    with np.errstate(over="ignore"):  # the direct form overflows here ...
        assert np.isinf(np.exp((1e6 * np.sqrt(alpha * 1e5) / k) ** 2))
    with np.errstate(all="raise"):    # ... the evaluated one does not
        T = semi_infinite_convection(x, 1e5, alpha, k, 1e6, 300.0, 400.0)
        q = semi_infinite_surface_flux(1e5, alpha, k, 1e6, 300.0, 400.0)
    assert np.all(np.isfinite(T)) and np.all((T >= 300.0) & (T <= 400.0))
    assert T == pytest.approx(_erfc_profile(x, 1e5, alpha, 300.0, 400.0), abs=1e-3)
    assert q == pytest.approx(k * 100.0 / np.sqrt(np.pi * alpha * 1e5), rel=1e-5)


@pytest.mark.parametrize("h", [15.0, 2e3, np.inf])
def test_semi_infinite_flux_pde_and_surface_condition(h):
    alpha, k, t, d = 4e-6, 3.0, 50.0, 1e-6
    def T(x, tt=t):
        return semi_infinite_convection(x, tt, alpha, k, h, 290.0, 350.0)
    grad = (-3 * T(0.0) + 4 * T(d) - T(2 * d)) / (2 * d)
    q = semi_infinite_surface_flux(t, alpha, k, h, 290.0, 350.0)
    assert q == pytest.approx(-k * grad, rel=1e-6)
    if np.isfinite(h):
        assert q == pytest.approx(h * (350.0 - T(0.0)), rel=1e-12)
    x, dt = 0.004, 1e-4 * t
    lap = (T(x + d) - 2 * T(x) + T(x - d)) / d**2
    assert (T(x, t + dt) - T(x, t - dt)) / (2 * dt) == pytest.approx(alpha * lap, rel=1e-5)


def _dTdr(sol_fn, r, d):
    return (sol_fn(r + d) - sol_fn(r - d)) / (2 * d)


def test_hollow_cylinder_fixed_temperatures():
    ri, ro, k = 0.01, 0.03, 16.0
    T = lambda r: hollow_cylinder_temperature(r, ri, ro, k, 450.0, 320.0).temperature
    sol = hollow_cylinder_temperature(np.array([ri, ro]), ri, ro, k, 450.0, 320.0)
    assert sol.temperature == pytest.approx([450.0, 320.0], abs=1e-12)
    # q' = 2 pi k (T1 - T2) / ln(r2/r1), common practice
    assert sol.heat_rate == pytest.approx(2 * np.pi * k * 130.0 / np.log(ro / ri), rel=1e-14)
    d = 1e-4
    for r in (0.013, 0.02, 0.027):  # d/dr (r dT/dr) = 0
        ode = ((r + d / 2) * (T(r + d) - T(r)) - (r - d / 2) * (T(r) - T(r - d))) / d**2
        assert abs(ode) < 1e-4 * abs(r * _dTdr(T, r, d)) / r
    d = 1e-7
    g_in = (-3 * T(ri) + 4 * T(ri + d) - T(ri + 2 * d)) / (2 * d)
    g_out = (3 * T(ro) - 4 * T(ro - d) + T(ro - 2 * d)) / (2 * d)
    assert -k * 2 * np.pi * ri * g_in == pytest.approx(sol.heat_rate, rel=1e-6)
    assert -k * 2 * np.pi * ro * g_out == pytest.approx(sol.heat_rate, rel=1e-6)


def test_hollow_cylinder_outer_convection():
    ri, ro, k, h = 0.01, 0.03, 0.5, 25.0
    T = lambda r: hollow_cylinder_temperature(r, ri, ro, k, 400.0, 300.0, h_out=h).temperature
    sol = hollow_cylinder_temperature(ro, ri, ro, k, 400.0, 300.0, h_out=h)
    assert T(ri) == pytest.approx(400.0, abs=1e-12)
    d = 1e-7
    g_in = (-3 * T(ri) + 4 * T(ri + d) - T(ri + 2 * d)) / (2 * d)
    g_out = (3 * T(ro) - 4 * T(ro - d) + T(ro - 2 * d)) / (2 * d)
    assert -k * g_out == pytest.approx(h * (T(ro) - 300.0), rel=1e-6)
    assert -k * 2 * np.pi * ri * g_in == pytest.approx(sol.heat_rate, rel=1e-6)
    assert -k * 2 * np.pi * ro * g_out == pytest.approx(sol.heat_rate, rel=1e-6)
    assert sol.surface_temperatures[1] == pytest.approx(float(T(ro)), abs=1e-12)


@pytest.mark.parametrize("h_in", [None, 60.0])
def test_hollow_sphere_convection(h_in):
    ri, ro, k, h = 0.02, 0.05, 1.2, 30.0
    def T(r):
        return hollow_sphere_temperature(r, ri, ro, k, 420.0, 290.0, h_in=h_in,
                                         h_out=h).temperature
    sol = hollow_sphere_temperature(ri, ri, ro, k, 420.0, 290.0, h_in=h_in, h_out=h)
    resistance = (0 if h_in is None else 1 / (h_in * 4 * np.pi * ri**2)) \
        + (1 / ri - 1 / ro) / (4 * np.pi * k) + 1 / (h * 4 * np.pi * ro**2)
    assert sol.heat_rate == pytest.approx(130.0 / resistance, rel=1e-14)
    d = 1e-4
    for r in (0.025, 0.04):  # d/dr (r^2 dT/dr) = 0
        ode = ((r + d / 2) ** 2 * (T(r + d) - T(r)) - (r - d / 2) ** 2 * (T(r) - T(r - d))) / d**2
        assert abs(ode) < 1e-4 * abs(r * _dTdr(T, r, d))
    d = 1e-7
    g_in = (-3 * T(ri) + 4 * T(ri + d) - T(ri + 2 * d)) / (2 * d)
    g_out = (3 * T(ro) - 4 * T(ro - d) + T(ro - 2 * d)) / (2 * d)
    assert -k * 4 * np.pi * ri**2 * g_in == pytest.approx(sol.heat_rate, rel=1e-6)
    assert -k * 4 * np.pi * ro**2 * g_out == pytest.approx(sol.heat_rate, rel=1e-6)
    assert -k * g_out == pytest.approx(h * (T(ro) - 290.0), rel=1e-6)
    if h_in is None:
        assert T(ri) == pytest.approx(420.0, abs=1e-12)
    else:
        assert -k * g_in == pytest.approx(h_in * (420.0 - T(ri)), rel=1e-6)


@pytest.mark.parametrize("kind", ["plane", "cylinder", "sphere"])
def test_two_layer_walls_continuity(kind):
    k1, k2, d = 0.8, 12.0, 1e-11
    if kind == "plane":
        bounds = (0.0, 0.02, 0.05)
        fn = lambda p: composite_plane_wall_temperature(p, (0.02, 0.03), (k1, k2), 500.0,
                                                        300.0, h_in=200.0, h_out=15.0)
        area = lambda p: 1.0
    elif kind == "cylinder":
        bounds = (0.01, 0.02, 0.05)
        fn = lambda p: composite_cylinder_temperature(p, bounds, (k1, k2), 500.0, 300.0,
                                                      h_out=15.0)
        area = lambda p: 2 * np.pi * p
    else:
        bounds = (0.01, 0.02, 0.05)
        fn = lambda p: composite_sphere_temperature(p, bounds, (k1, k2), 500.0, 300.0,
                                                    h_in=200.0, h_out=15.0)
        area = lambda p: 4 * np.pi * p**2
    T = lambda p: fn(p).temperature
    sol = fn(np.array(bounds))
    a, b, c = bounds
    assert sol.interface_temperatures.shape == (1,)
    assert T(b - d) == pytest.approx(float(sol.interface_temperatures[0]), abs=1e-6)
    assert T(b + d) == pytest.approx(float(sol.interface_temperatures[0]), abs=1e-6)
    e = 1e-6
    g_left = (3 * T(b) - 4 * T(b - e) + T(b - 2 * e)) / (2 * e)
    g_right = (-3 * T(b) + 4 * T(b + e) - T(b + 2 * e)) / (2 * e)
    assert -k1 * area(b) * g_left == pytest.approx(sol.heat_rate, rel=1e-6)
    assert -k2 * area(b) * g_right == pytest.approx(sol.heat_rate, rel=1e-6)
    g_out = (3 * T(c) - 4 * T(c - e) + T(c - 2 * e)) / (2 * e)
    assert -k2 * g_out == pytest.approx(15.0 * (T(c) - 300.0), rel=1e-6)
    assert sol.surface_temperatures[1] == pytest.approx(float(T(c)), abs=1e-12)
    assert abs(g_left) > 5 * abs(g_right)  # k1 << k2: steeper gradient in layer 1


def test_bad_input_raises_project_error_naming_argument():
    cases = [
        (lambda: plane_wall_temperature(0.0, 1.0, 0.1, -1e-5, 1.0, 1.0, 1.0, 0.0), "alpha"),
        (lambda: plane_wall_temperature(0.2, 1.0, 0.1, 1e-5, 1.0, 1.0, 1.0, 0.0), "x"),
        (lambda: sphere_temperature(0.0, 0.0, 0.1, 1e-5, 1.0, 1.0, 1.0, 0.0), "t"),
        (lambda: cylinder_temperature(0.0, 1.0, 0.1, 1e-5, 1.0, 1.0, 1.0, 0.0, n_terms=0),
         "n_terms"),
        (lambda: sphere_eigenvalues(0.0, 3), "Bi"),
        (lambda: series_coefficients("cube", 1.0, 3), "geometry"),
        (lambda: semi_infinite_convection(-1.0, 1.0, 1e-5, 1.0, 1.0, 1.0, 0.0), "x"),
        (lambda: semi_infinite_convection(0.0, 1.0, 1e-5, 1.0, np.nan, 1.0, 0.0), "h"),
        (lambda: hollow_sphere_temperature(0.01, 0.02, 0.01, 1.0, 1.0, 0.0), "r_in/r_out"),
        (lambda: hollow_cylinder_temperature(0.5, 0.1, 0.2, 1.0, 1.0, 0.0), "r"),
        (lambda: composite_sphere_temperature(0.1, (0.1, 0.2, 0.3), (1.0,), 1.0, 0.0),
         "conductivities"),
        (lambda: composite_plane_wall_temperature(0.0, (0.1, -0.1), (1.0, 1.0), 1.0, 0.0),
         "thicknesses"),
    ]
    for call, name in cases:
        with pytest.raises(FvsolverError, match=name):
            call()


def test_broadcast_shapes():
    x = np.linspace(-0.1, 0.1, 5)[:, None]
    t = np.array([10.0, 100.0, 1000.0])
    assert plane_wall_temperature(x, t, 0.1, 1e-5, 1.0, 10.0, 1.0, 0.0).shape == (5, 3)
    assert semi_infinite_convection(np.abs(x), t, 1e-5, 1.0, 10.0, 1.0, 0.0).shape == (5, 3)
