"""Invariants of the conduction operator: symmetry, uniform fields, maximum principle, balance."""
from __future__ import annotations

import numpy as np
import pytest

from fvsolver.boundary import Convection, FixedTemperature, HeatFlux, PatchCondition, Radiation, Symmetry
from fvsolver.conduction import ConductionProblem, VolumetricSource
from fvsolver.errors import CaseError
from fvsolver.materials import Material, TemperatureFunction
from fvsolver.stepper import StepperOptions, TimeStepper, solve_steady
from tests.core.helpers import rectangle_mesh, slab_problem

GLASS = Material.constant("solid", 2230.0, 1.14, 750.0)


@pytest.mark.parametrize("system", ["planar", "axisymmetric"])
def test_two_point_matrix_is_symmetric(system):
    problem = slab_problem(nx=9, ny=5, warp=0.05, coordinate_system=system)
    T = np.linspace(290, 310, problem.n)
    _, dm = problem.capacity(T)
    J = problem.jacobian(1.0, 3.0, dm, problem.evaluate(T, 0.0))
    implicit = problem._implicit_correction  # the folded-in non-orthogonal part is not symmetric
    two_point = J + 3.0 * implicit[0] if implicit is not None else J
    assert abs(two_point - two_point.T).max() <= 1e-14 * abs(two_point).max()
    assert implicit is None or abs(implicit[0]).max() > 0  # the warped mesh does need it


@pytest.mark.parametrize("system", ["planar", "axisymmetric"])
def test_uniform_field_stays_uniform_on_a_curved_mesh(system):
    mesh = rectangle_mesh(12, 10, warp=0.06, coordinate_system=system, r0=0.0)
    patches = [p for p in mesh.patch_names if p != "axis"]
    conditions = [PatchCondition(p, (Convection(10.0, 300.0), Radiation(0.9, 300.0))) for p in patches]
    problem = ConductionProblem(mesh, {"solid": GLASS}, conditions)
    stepper = TimeStepper(problem, np.full(problem.n, 300.0), 0.0, 500.0, StepperOptions(initial_step=50.0))
    stepper.run()
    assert np.abs(stepper.y - 300.0).max() < 1e-10


def test_discrete_maximum_principle_backward_euler():
    """Common practice: backward Euler with an M-matrix keeps the field inside its bounds."""
    mesh = rectangle_mesh(15, 6)
    conditions = [PatchCondition("left", (FixedTemperature(350.0),)), PatchCondition("right", (FixedTemperature(280.0),)),
                  PatchCondition("bottom", ()), PatchCondition("top", ())]
    problem = ConductionProblem(mesh, {"solid": GLASS}, conditions)
    opts = StepperOptions(scheme="backward_euler", adaptive=False, initial_step=5e3)
    stepper = TimeStepper(problem, np.full(problem.n, 300.0), 0.0, 1e5, opts)
    while stepper.step():
        assert stepper.y.min() >= 280.0 - 1e-9 and stepper.y.max() <= 350.0 + 1e-9


def test_energy_balance_every_step_nonlinear():
    """Radiation, convection, a heater, k(T), c(T) and a source: balance to 1e-10 each step."""
    mesh = rectangle_mesh(10, 8, warp=0.04, coordinate_system="axisymmetric", r0=0.0)
    mat = Material("solid", 2230.0, TemperatureFunction("polynomial", (0.6, 0.0018)),
                   TemperatureFunction("table", (650.0, 750.0, 900.0), (250.0, 300.0, 400.0)))
    conditions = [PatchCondition("right", (Convection(8.0, 295.0), Radiation(0.9, 290.0))),
                  PatchCondition("bottom", (HeatFlux(400.0),)), PatchCondition("top", (FixedTemperature(305.0),))]
    problem = ConductionProblem(mesh, {"solid": mat}, conditions, (VolumetricSource(2e4),))
    stepper = TimeStepper(problem, np.full(problem.n, 300.0), 0.0, 3000.0, StepperOptions(tolerance=1e-2, initial_step=1.0))
    worst = 0.0
    while stepper.step():
        worst = max(worst, stepper.balance_error["energy"])
    assert stepper.status == "finished"
    assert worst <= 1e-10


def test_nonlinear_conductivity_matches_kirchhoff_transform():
    """Steady slab with k = a + bT: a T + b T^2/2 is linear in x (Kirchhoff transform, common practice)."""
    a, b, t1, t2 = 0.5, 0.004, 350.0, 280.0
    errors = []
    for n in (10, 20, 40):
        mesh = rectangle_mesh(n, 1)
        mat = Material("solid", 1.0, TemperatureFunction("polynomial", (a, b)), TemperatureFunction.constant(1.0))
        conditions = [PatchCondition("left", (FixedTemperature(t1),)), PatchCondition("right", (FixedTemperature(t2),)),
                      PatchCondition("bottom", ()), PatchCondition("top", ())]
        problem = ConductionProblem(mesh, {"solid": mat}, conditions)
        T, _, _ = solve_steady(problem, np.full(problem.n, 300.0))
        x = mesh.cell_centres[:, 0]
        phi = (a * t1 + b * t1**2 / 2) * (1 - x) + (a * t2 + b * t2**2 / 2) * x
        exact = (-a + np.sqrt(a * a + 2 * b * phi)) / b
        errors.append(np.abs(T - exact).max())
    order = np.polyfit(np.log([1 / 10, 1 / 20, 1 / 40]), np.log(errors), 1)[0]
    assert abs(order - 2.0) < 0.15 and errors[-1] < 2e-3


def test_bad_inputs_give_case_errors():
    mesh = rectangle_mesh(3, 3)
    with pytest.raises(CaseError, match="no condition for patch"):
        ConductionProblem(mesh, {"solid": GLASS}, [PatchCondition("left", ())])
    with pytest.raises(CaseError, match="no properties for mesh material"):
        ConductionProblem(mesh, {"other": GLASS}, [])
    with pytest.raises(CaseError, match="h: got -1"):
        ConductionProblem(mesh, {"solid": GLASS}, [PatchCondition("left", (Convection(-1.0, 300.0),))])
    with pytest.raises(CaseError, match="density"):
        Material.constant("glass", -5.0, 1.0, 1.0)
    axis_mesh = rectangle_mesh(3, 3, coordinate_system="axisymmetric")
    with pytest.raises(CaseError, match="symmetry only"):
        ConductionProblem(axis_mesh, {"solid": GLASS}, [PatchCondition("axis", (HeatFlux(5.0),))])
    with pytest.raises(CaseError, match="cannot be combined"):
        ConductionProblem(mesh, {"solid": GLASS}, [PatchCondition("left", (FixedTemperature(300.0), Symmetry()))])
