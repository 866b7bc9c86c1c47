"""The verification cases run by ``fvsolver verify`` and by the test suite.

Each case solves one problem on a sequence of meshes (and, when transient, time steps
refined with the mesh) and measures the error against an exact solution.  Its source is
named beside it.  Norms: ``L2`` is the volume-weighted RMS of the cell error, ``Linf``
the largest cell error, others are named quantities.  Every transient run also records
the largest per-step relative energy-balance error.
"""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from fvsolver.boundary import Convection, FixedTemperature, PatchCondition
from fvsolver.conduction import ConductionProblem, VolumetricSource
from fvsolver.materials import Material
from fvsolver.mesh import Block, from_blocks
from fvsolver.mesh import builders
from fvsolver.stepper import StepperOptions, TimeStepper, solve_steady
from fvsolver.verification import analytic as steady_exact
from fvsolver.verification import analytic_transient as series


@dataclass(frozen=True)
class LevelResult:
    """Errors of one refinement level."""

    h: float
    n_cells: int
    errors: dict
    balance: float


@dataclass(frozen=True)
class Norm:
    """An error norm with its expected observed order and a cap on the finest error.

    ``at_least`` asks for an order of at least ``order``; otherwise |p - order| < 0.15.
    ``order=None`` is a quantity held at round-off on every mesh (only the cap applies).
    """

    name: str
    order: float | None
    cap: float
    at_least: bool = False


@dataclass(frozen=True)
class VerificationCase:
    name: str
    description: str
    source: str
    run: Callable[[int], LevelResult]
    norms: tuple
    levels: tuple = (0, 1, 2)
    slow_levels: tuple = (3,)
    tags: tuple = field(default=())


def _relative_l2(error: np.ndarray, volumes: np.ndarray) -> float:
    return float(np.sqrt(np.sum(error**2 * volumes) / np.sum(volumes)))


def _run_transient(problem, T0, t_end, n_steps, scheme="bdf2"):
    stepper = TimeStepper(problem, T0, 0.0, t_end,
                          StepperOptions(scheme=scheme, adaptive=False, initial_step=t_end / n_steps,
                                         newton_tolerance=1e-11, max_newton_iterations=200))
    worst = 0.0
    while stepper.step():
        worst = max(worst, stepper.balance_error["energy"])
    worst = max(worst, stepper.balance_error["energy"])
    if stepper.status != "finished":
        raise RuntimeError(stepper.message)
    return stepper.y, worst


def _steady_balance(ev) -> float:
    return abs(ev.heat_in) / max(ev.gross_heat, 1e-300)


# -- planar semi-infinite solid with surface convection --------------------------------------
SEMI = dict(k=1.0, rho=2000.0, c=1000.0, h=50.0, T_i=300.0, T_inf=350.0, t=600.0, depth=0.12)


def semi_infinite(level: int) -> LevelResult:
    """Semi-infinite solid, convection at x = 0 (Carslaw & Jaeger; Incropera eq. 5.60)."""
    p = SEMI
    n = 30 * 2**level
    mesh = builders.rectangle(p["depth"], 0.01, n, 1, "planar")
    alpha = p["k"] / (p["rho"] * p["c"])
    conditions = [PatchCondition("left", (Convection(p["h"], p["T_inf"]),)),
                  PatchCondition("right", ()), PatchCondition("bottom", ()), PatchCondition("top", ())]
    problem = ConductionProblem(mesh, {"solid": Material.constant("solid", p["rho"], p["k"], p["c"])}, conditions)
    T, balance = _run_transient(problem, np.full(problem.n, p["T_i"]), p["t"], 15 * 2**level)
    x = mesh.cell_centres[:, 0]
    exact = steady_exact.semi_infinite_convection(x, p["t"], alpha, p["k"], p["h"], p["T_i"], p["T_inf"])
    scale = p["T_inf"] - p["T_i"]
    return LevelResult(p["depth"] / n, mesh.n_cells, {
        "L2": _relative_l2(T - exact, mesh.cell_volumes) / scale,
        "Linf": float(np.abs(T - exact).max()) / scale,
    }, balance)


# -- steady hollow cylinder, T = a + b ln r ---------------------------------------------------
def hollow_cylinder(level: int) -> LevelResult:
    """Hollow cylinder with fixed surface temperatures: T = a + b ln r (Incropera eq. 3.26)."""
    ri, ro, k = 0.01, 0.03, 1.2
    n = 8 * 2**level
    mesh = builders.hollow_cylinder(ri, ro, 0.01, n, 2)
    conditions = [PatchCondition("inner", (FixedTemperature(360.0),)), PatchCondition("outer", (FixedTemperature(300.0),)),
                  PatchCondition("bottom", ()), PatchCondition("top", ())]
    problem = ConductionProblem(mesh, {"solid": Material.constant("solid", 2000.0, k, 800.0)}, conditions)
    T, ev, _ = solve_steady(problem, np.full(problem.n, 330.0))
    exact = steady_exact.hollow_cylinder_temperature(mesh.cell_centres[:, 0], ri, ro, k, 360.0, 300.0)
    q_inner = ev.boundary_heat[mesh.patch_faces("inner")].sum() / 0.01  # W per metre of length
    return LevelResult((ro - ri) / n, mesh.n_cells, {
        "L2": _relative_l2(T - exact.temperature, mesh.cell_volumes) / 60.0,
        "Linf": float(np.abs(T - exact.temperature).max()) / 60.0,
        "heat_rate": abs(q_inner - float(exact.heat_rate)) / abs(float(exact.heat_rate)),
    }, _steady_balance(ev))


# -- steady hollow sphere, inner fixed temperature, outer convection ---------------------------
def hollow_sphere(level: int) -> LevelResult:
    """Hollow sphere, inner T fixed, outer convection: series resistances (Incropera Table 3.3)."""
    ri, ro, k, h = 0.02, 0.03, 1.1, 40.0
    n = 6 * 2**level
    mesh = builders.spherical_shell(ri, ro, n, 8 * 2**level)
    conditions = [PatchCondition("inner", (FixedTemperature(280.0),)), PatchCondition("outer", (Convection(h, 300.0),))]
    problem = ConductionProblem(mesh, {"solid": Material.constant("solid", 2000.0, k, 800.0)}, conditions)
    T, ev, _ = solve_steady(problem, np.full(problem.n, 290.0))
    radius = np.hypot(mesh.cell_centres[:, 0], mesh.cell_centres[:, 1])
    exact = steady_exact.hollow_sphere_temperature(radius, ri, ro, k, 280.0, 300.0, h_out=h)
    q_inner = -ev.boundary_heat[mesh.patch_faces("inner")].sum()
    return LevelResult((ro - ri) / n, mesh.n_cells, {
        "L2": _relative_l2(T - exact.temperature, mesh.cell_volumes) / 20.0,
        "Linf": float(np.abs(T - exact.temperature).max()) / 20.0,
        "heat_rate": abs(q_inner + float(exact.heat_rate)) / abs(float(exact.heat_rate)),
    }, _steady_balance(ev))


# -- transient solid sphere with convection ---------------------------------------------------
def sphere_transient(biot: float) -> Callable[[int], LevelResult]:
    def run(level: int) -> LevelResult:
        """Sphere with surface convection from a uniform start: exact series (Incropera eq. 5.50)."""
        R, k, rho, c = 0.02, 1.0, 2000.0, 1000.0
        alpha = k / (rho * c)
        h = biot * k / R
        t_end = 0.3 * R**2 / alpha
        n = 3 * 2**level
        mesh = builders.solid_sphere(R, n)
        problem = ConductionProblem(mesh, {"solid": Material.constant("solid", rho, k, c)},
                                    [PatchCondition("surface", (Convection(h, 300.0),))])
        T, balance = _run_transient(problem, np.full(problem.n, 350.0), t_end, 12 * 2**level)
        radius = np.hypot(mesh.cell_centres[:, 0], mesh.cell_centres[:, 1])
        exact = series.sphere_temperature(radius, t_end, R, alpha, k, h, 350.0, 300.0)
        return LevelResult(R / (2 * n), mesh.n_cells, {
            "L2": _relative_l2(T - exact, mesh.cell_volumes) / 50.0,
            "Linf": float(np.abs(T - exact).max()) / 50.0,
        }, balance)
    return run


# -- transient finite cylinder with convection on every face ---------------------------------
def finite_cylinder(level: int) -> LevelResult:
    """Finite cylinder, convection on all faces: product solution (Incropera sec. 5.8)."""
    r0, L, k, rho, c = 0.02, 0.015, 1.0, 2000.0, 1000.0
    alpha = k / (rho * c)
    h = 1.0 * k / r0
    t_end = 0.2 * r0**2 / alpha
    n = 6 * 2**level
    mesh = builders.solid_cylinder(r0, 2 * L, n, n, z0=-L)
    conditions = [PatchCondition(p, (Convection(h, 300.0),)) for p in ("outer", "bottom", "top")]
    problem = ConductionProblem(mesh, {"solid": Material.constant("solid", rho, k, c)}, conditions)
    T, balance = _run_transient(problem, np.full(problem.n, 350.0), t_end, 10 * 2**level)
    x = mesh.cell_centres
    exact = series.finite_cylinder_temperature(x[:, 0], x[:, 1], t_end, r0, L, alpha, k, h, 350.0, 300.0)
    return LevelResult(r0 / n, mesh.n_cells, {
        "L2": _relative_l2(T - exact, mesh.cell_volumes) / 50.0,
        "Linf": float(np.abs(T - exact).max()) / 50.0,
    }, balance)


# -- two-material spherical shell: interface temperature and flux continuity -----------------
def two_material_shell(level: int) -> LevelResult:
    """Glass under a porous layer, steady: series resistances (Incropera sec. 3.4), continuity."""
    r1, r2, r3, k1, k2, h = 0.02, 0.022, 0.025, 1.14, 0.35, 15.0
    n1, n2, m = 4 * 2**level, 4 * 2**level, 8 * 2**level
    theta = np.linspace(0.0, np.pi, m + 1)
    glass = Block(builders.polar_nodes(np.linspace(r1, r2, n1 + 1), theta), "glass",
                  {"i_min": "inner", "j_min": "axis", "j_max": "axis"})
    cap = Block(builders.polar_nodes(np.linspace(r2, r3, n2 + 1), theta), "cap",
                {"i_max": "outer", "j_min": "axis", "j_max": "axis"})
    mesh = from_blocks([glass, cap])
    materials = {"glass": Material.constant("glass", 2230.0, k1, 750.0), "cap": Material.constant("cap", 300.0, k2, 2000.0)}
    conditions = [PatchCondition("inner", (FixedTemperature(285.0),)), PatchCondition("outer", (Convection(h, 300.0),))]
    problem = ConductionProblem(mesh, materials, conditions)
    T, ev, _ = solve_steady(problem, np.full(problem.n, 290.0))
    # centroids of the polygonal cells sit a little inside the circles: clip to the layers
    radius = np.clip(np.hypot(mesh.cell_centres[:, 0], mesh.cell_centres[:, 1]), r1, r3)
    exact = steady_exact.composite_sphere_temperature(radius, (r1, r2, r3), (k1, k2), 285.0, 300.0, h_out=h)
    # interface: faces between a glass and a cap cell; the face temperature from the flux
    own_glass = mesh.cell_material[mesh.owner] != mesh.cell_material[mesh.neighbour]
    f = np.flatnonzero(own_glass)
    st = problem.stencil
    flux = ev.conductance[f] * (T[mesh.neighbour[f]] - T[mesh.owner[f]])
    kp = k1 if mesh.material_names[mesh.cell_material[mesh.owner[f[0]]]] == "glass" else k2
    t_face = T[mesh.owner[f]] + flux / (kp * mesh.face_areas[f] / st.dist_owner[f])
    t_interface_exact = float(np.atleast_1d(exact.interface_temperatures)[0])
    q_exact = float(exact.heat_rate)
    q_interface = float(flux.sum()) * (1 if radius[mesh.owner[f[0]]] < radius[mesh.neighbour[f[0]]] else -1)
    q_outer = ev.boundary_heat[mesh.patch_faces("outer")].sum()
    return LevelResult((r3 - r1) / (n1 + n2), mesh.n_cells, {
        "L2": _relative_l2(T - exact.temperature, mesh.cell_volumes) / 15.0,
        "interface_temperature": float(np.abs(t_face - t_interface_exact).max()) / 15.0,
        "interface_flux": abs(abs(q_interface) - abs(q_exact)) / abs(q_exact),
        "flux_continuity": abs(abs(q_interface) - abs(q_outer)) / abs(q_exact),
    }, _steady_balance(ev))


# -- manufactured solution on a curved (non-orthogonal) axisymmetric mesh ---------------------
MMS_A, MMS_K = 10.0, 2.0
MMS_a, MMS_b = 0.75 * np.pi, np.pi


def _mms_exact(x, t=0.0):
    return 300.0 + MMS_A * np.cos(MMS_a * x[:, 0]) * np.cos(MMS_b * x[:, 1])


def _mms_source(x, t=0.0):
    r, z = x[:, 0], x[:, 1]
    return MMS_K * MMS_A * np.cos(MMS_b * z) * (
        (MMS_a**2 + MMS_b**2) * np.cos(MMS_a * r) + MMS_a * np.sin(MMS_a * r) / r)


def manufactured_curved(level: int) -> LevelResult:
    """T = 300 + 10 cos(3 pi r / 4) cos(pi z) on a warped axisymmetric mesh (manufactured)."""
    n = 10 * 2**level
    mesh = builders.warped_rectangle(1.0, 1.0, n, n, 0.04, "axisymmetric")
    conditions = [PatchCondition(p, (FixedTemperature(_mms_exact),)) for p in ("right", "bottom", "top")]
    problem = ConductionProblem(mesh, {"solid": Material.constant("solid", 1.0, MMS_K, 1.0)}, conditions,
                                (VolumetricSource(_mms_source),))
    T, ev, _ = solve_steady(problem, np.full(problem.n, 300.0), tolerance=1e-11, max_iterations=500)
    e = T - _mms_exact(mesh.cell_centres)
    return LevelResult(1.0 / n, mesh.n_cells, {
        "L2": _relative_l2(e, mesh.cell_volumes) / MMS_A,
        "Linf": float(np.abs(e).max()) / MMS_A,
    }, _steady_balance(ev))


def _temporal(scheme: str) -> Callable[[int], LevelResult]:
    def run(level: int) -> LevelResult:
        """T = 300 + (1 + sin(t)/2)(10 x + 5 y) on a warped planar mesh: exact in space."""
        mesh = builders.warped_rectangle(1.0, 1.0, 8, 8, 0.04, "planar")
        rho_c = 1000.0

        def exact(x, t):
            return 300.0 + (1.0 + 0.5 * np.sin(t)) * (10.0 * x[:, 0] + 5.0 * x[:, 1])

        def source(x, t):
            return rho_c * 0.5 * np.cos(t) * (10.0 * x[:, 0] + 5.0 * x[:, 1])

        conditions = [PatchCondition(p, (FixedTemperature(exact),)) for p in ("left", "right", "bottom", "top")]
        problem = ConductionProblem(mesh, {"solid": Material.constant("solid", rho_c, 1.0, 1.0)}, conditions,
                                    (VolumetricSource(source),))
        n_steps = 20 * 2**level
        T, balance = _run_transient(problem, exact(mesh.cell_centres, 0.0), 2.0, n_steps, scheme)
        e = T - exact(mesh.cell_centres, 2.0)
        return LevelResult(2.0 / n_steps, mesh.n_cells, {"Linf": float(np.abs(e).max()) / 15.0}, balance)
    return run


CASES: tuple = (
    VerificationCase("semi_infinite_convection", "planar semi-infinite solid, surface convection",
                     "Carslaw & Jaeger (1959) sec. 2.7; Incropera eq. 5.60", semi_infinite,
                     (Norm("L2", 2.0, 2e-4), Norm("Linf", 2.0, 5e-4))),
    VerificationCase("hollow_cylinder_steady", "steady hollow cylinder, T = a + b ln r",
                     "Incropera sec. 3.3.1, eq. 3.26", hollow_cylinder,
                     (Norm("L2", 2.0, 4e-4), Norm("Linf", 2.0, 1e-3), Norm("heat_rate", 2.0, 6e-4))),
    VerificationCase("hollow_sphere_steady", "steady hollow sphere, outer convection",
                     "Incropera sec. 3.3.2, Table 3.3 (series resistances)", hollow_sphere,
                     (Norm("L2", 2.0, 2e-3), Norm("Linf", 2.0, 3e-3), Norm("heat_rate", 2.0, 2e-3))),
    *(VerificationCase(f"sphere_transient_bi{bi:g}", f"solid sphere, convection, Bi = {bi:g} (O-grid)",
                       "Incropera eq. 5.50 (exact series); coefficients checked against Table 5.1",
                       sphere_transient(bi), (Norm("L2", 2.0, 3e-3), Norm("Linf", 2.0, 1e-2)))
      for bi in (0.1, 1.0, 10.0)),
    VerificationCase("finite_cylinder_transient", "finite cylinder, convection on all faces, Bi = 1",
                     "Incropera sec. 5.8 (product solution), eqs. 5.39 and 5.49", finite_cylinder,
                     (Norm("L2", 2.0, 2e-3), Norm("Linf", 2.0, 5e-3))),
    VerificationCase("two_material_shell", "glass + porous layer, steady, interface continuity",
                     "Incropera sec. 3.4 (composite sphere, series resistances)", two_material_shell,
                     (Norm("L2", 2.0, 2e-3), Norm("interface_temperature", 2.0, 1e-4),
                      Norm("interface_flux", 2.0, 2e-3), Norm("flux_continuity", None, 1e-12))),
    VerificationCase("manufactured_curved", "manufactured solution, warped axisymmetric mesh",
                     "method of manufactured solutions (Roache, 2002)", manufactured_curved,
                     (Norm("L2", 1.9, 2e-3, at_least=True), Norm("Linf", 1.8, 5e-3, at_least=True))),
    VerificationCase("temporal_backward_euler", "temporal order, backward Euler",
                     "manufactured solution exact in space", _temporal("backward_euler"),
                     (Norm("Linf", 1.0, 1e-2),)),
    VerificationCase("temporal_bdf2", "temporal order, BDF2 (backward-Euler start)",
                     "manufactured solution exact in space", _temporal("bdf2"),
                     (Norm("Linf", 1.9, 2e-4, at_least=True),)),
)
