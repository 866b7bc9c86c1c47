"""The device's fused kernels against the separate calls they replace, bit for bit: the whole heat
rate in one call (kernels.surfaces.evaluate_heat_rate), the cells' and inventories' rates
(kernels.device.device_rates), the stored energy (kernels.conduction.stored_energy), the
Jacobian's values written in place (kernels.device.wall_jacobian, transfer_jacobian) and NumPy's
pairwise sum (kernels.device.pairwise_sum).

Under NUMBA_DISABLE_JIT=1 the compiled path is switched on by hand, so the kernels run as Python
against the same twins."""
from __future__ import annotations

import numpy as np
import pytest

import fvsolver.kernels
from fvsolver.case.build import build
from fvsolver.kernels import device as kd
from fvsolver.kernels import reference
from fvsolver.stepper import TimeStepper
from tests.device.cycle_helpers import whole_case
from tests.device.helpers import device_case

CASES = {
    "head_reservoir": lambda: device_case(),
    "head_charge": lambda: device_case(cap_water={"mode": "charge"}),
    "head_given_h": lambda: device_case(room={"convection": "given", "heat_transfer_coefficient": 8.0}),
    "whole_device": lambda: whole_case(),
}


@pytest.fixture(scope="module", params=sorted(CASES))
def stepped(request):
    """A problem stepped a little (the compiled path on even without numba's JIT) and its state."""
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(fvsolver.kernels, "COMPILED", True)
        setup = build(CASES[request.param]())
        problem = setup.problem
        stepper = TimeStepper(problem, setup.initial, 0.0, 0.5, setup.options)
        while stepper.step():
            pass
        yield request.param, problem, stepper.y.copy()


def _states(problem, y):
    """The stepped state and two others: drying inventories, a drier cap, warmer cells."""
    z = y.copy()
    z[problem.i_c[::2]] = 0.0
    z[problem.i_c[1::2]] *= 1e-3
    z[problem.i_w] *= 0.6
    z[: problem.n_cells] += 1.5
    return y, z


def test_fused_heat_rate_matches_the_separate_kernels(stepped):
    """evaluate_heat_rate against face_flux_sum, solve_boundary_faces, cell_gradients,
    correction_flux_sum and NumPy's bincounts, from the same start: every array equal."""
    _, problem, y = stepped
    c = problem.conduction
    assert c._fused and c._compiled is not None
    for state in _states(problem, y):
        guess = c._surface_guess
        out = []
        for fused in (True, False):
            c.compile_surfaces(True, fused)
            c._surface_guess = guess
            out.append(c.evaluate(state[: problem.n_cells], 1.0, problem.context(state)))
        c.compile_surfaces(True)
        assert c._fused
        for name in ("rate", "boundary_jacobian", "conductance", "surface_temperature", "boundary_heat",
                     "surface_conductance", "surface_derivative", "surface_terms"):
            np.testing.assert_array_equal(getattr(out[0], name), getattr(out[1], name), err_msg=name)
        assert out[0].source_heat == out[1].source_heat


def test_device_rates_match_their_numpy_twin(stepped):
    """device_rates against _water_sensible and the NumPy lines of DeviceProblem.evaluate."""
    _, problem, y = stepped
    for state in _states(problem, y):
        guess = problem.conduction._surface_guess
        evaluations = []
        for compiled in (True, False):
            problem._compiled_rates = compiled
            problem.conduction._surface_guess = guess
            evaluations.append(problem.evaluate(state, 1.0))
        problem._compiled_rates = True
        a, b = evaluations
        for name in ("rate", "sensible", "wall_flow", "condensation", "evaporation"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
        for key, value in a.extras.items():
            if isinstance(value, np.ndarray):
                np.testing.assert_array_equal(value, b.extras[key], err_msg=key)
        assert a.inflows == b.inflows and a.grosses == b.grosses


def test_stored_energy_matches_the_per_cell_energy(stepped):
    """ConductionProblem.capacity's one call against V times _per_cell's volumetric energy (and
    the kernel against its NumPy twin)."""
    _, problem, y = stepped
    c = problem.conduction
    for state in _states(problem, y):
        T, ctx = state[: problem.n_cells], problem.context(state)
        m, _ = c.capacity(T, ctx)
        assert c._capacity_kept[2] is not None
        np.testing.assert_array_equal(m, c.mesh.cell_volumes * c._per_cell(T, "volumetric_energy", ctx))
        rho, cp = c._capacity_kept[2]
        np.testing.assert_array_equal(m, reference.stored_energy(T, c.mesh.cell_volumes, rho, cp, 273.15))


def test_jacobian_values_written_in_place_match_the_recorded_blocks(stepped):
    """The Jacobian's values written in place (kernels for the wall faces and the outside
    coefficients' column) against the same blocks given to KeptTriplets, tipped and standing."""
    name, problem, y = stepped
    hot = y.copy()
    hot[: problem.n_cells] = 322.0  # above the correlations' range: fixed coefficients, exact zeros
    for state in (*_states(problem, y), hot):
        for tipped in ((False, True) if problem.body is not None else (False,)):
            problem.tipped = tipped
            problem._context_cache = None
            ev = problem.evaluate(state, 1.0)
            _, dm = problem.capacity(state)
            assert problem._block_ends is not None
            fast = problem.jacobian(1.5, 0.05, dm, ev).system.copy()
            ends, problem._block_ends = problem._block_ends, None
            try:
                slow = problem.jacobian(1.5, 0.05, dm, ev).system
            finally:
                problem._block_ends = ends
            np.testing.assert_array_equal(fast.indices, slow.indices)
            np.testing.assert_array_equal(fast.data, slow.data, err_msg=f"{name}, tipped {tipped}")
    problem.tipped = False
    ctx = problem.context(hot)
    assert problem._transfer_derivatives(ctx["cap"]["surface_mean"], ctx["cap"]["h"], ctx["cap"]["h_m"]) == (0.0, 0.0)


@pytest.mark.parametrize("size", [0, 1, 7, 8, 9, 60, 127, 128, 129, 255, 256, 1000, 4099])
def test_pairwise_sum_is_numpys(size, rng):
    """The kernels' sums are NumPy's own, bit for bit (values spread over 16 decades, so the order
    of the additions shows)."""
    for _ in range(20):
        a = rng.normal(size=size) * 10.0 ** rng.uniform(-8.0, 8.0, size=size)
        assert kd.pairwise_sum(a, 0, size) == a.sum()
        if size > 3:
            assert kd.pairwise_sum(a, 3, size - 3) == a[3:].sum()
