#!/usr/bin/env python
"""Cost of one fixed transient step of fvsolver against the floor of a bare sparse LU.

For a few mesh sizes of the device-head mesh (glass bulb + porous cap + neck, linear
boundary conditions) this measures, side by side in one process:

* fvsolver: ``TimeStepper.step()`` with fixed steps (``adaptive=False``), backward Euler
  and BDF2, after the factorisation of the step matrix exists (the first steps, which
  factorise, are excluded);
* the floor: the matrix that configuration's stepper factorises (``problem.jacobian``)
  factorised once by scipy's ``splu`` with the best of several column orderings, then per
  step one right-hand-side update (rhs = C T_old + b, numpy axpys) and one ``lu.solve``.

Two problem configurations are timed, each against its own floor: ``default`` (the
constructor's defaults; these meshes are non-orthogonal, so the non-orthogonal correction
is on, folded into the Jacobian as an implicit operator, which widens the matrix) and
``two-point`` (``nonorthogonal_correction=False``: the two-point matrix). Both problems are
affine with an exact Jacobian, so for both a step is one solve; this is checked, and so is
that the floor and fvsolver give the same temperatures.

The goals (ratio fvsolver/floor <= 1.5 at every size, growth exponent of the cost per
step against N <= 1.2) are checked and printed; the exit status is 0 either way.

Run ``python bench/bench_step.py`` (about 2 minutes on 2 cores; each measurement has
a time budget so slow code cannot stretch it much past 3), ``--quick`` for a small smoke
run, ``--sizes 5000,20000,80000`` to choose the cell counts, ``--profile [CELLS[,CELLS]]``
to append a cProfile of fvsolver's steps (``--profile-only`` to skip the timing),
``--blas-threads 1`` to run with a single OpenBLAS thread (worth comparing when other
processes share the machine), ``--help`` for the rest.
"""
from __future__ import annotations

import argparse
import cProfile
import functools
import gc
import io
import math
import os
import platform
import pstats
import resource
import sys
import time
import tracemalloc
from dataclasses import dataclass, field
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout


def _blas_threads_from_argv(argv) -> None:
    """``--blas-threads N`` must act before numpy loads OpenBLAS, so it is read here."""
    for i, arg in enumerate(argv):
        if arg.startswith("--blas-threads"):
            value = arg.split("=", 1)[1] if "=" in arg else (argv[i + 1] if i + 1 < len(argv) else "")
            if value:
                os.environ["OPENBLAS_NUM_THREADS"] = value


_blas_threads_from_argv(sys.argv[1:])

import numpy as np  # noqa: E402
import scipy  # noqa: E402
import scipy.sparse as sp  # noqa: E402
import scipy.sparse.linalg as spla  # noqa: E402

import fvsolver.linear as fv_linear  # noqa: E402
from fvsolver.boundary import Convection, FixedTemperature, PatchCondition  # noqa: E402
from fvsolver.conduction import ConductionProblem  # noqa: E402
from fvsolver.materials import Material  # noqa: E402
from fvsolver.mesh import builders  # noqa: E402
from fvsolver.mesh.head import device_head  # noqa: E402
from fvsolver.stepper import StepperOptions, TimeStepper  # noqa: E402

RATIO_GOAL = 1.5
EXPONENT_GOAL = 1.2
SAME_ANSWER_K = 1e-8  # largest |T_floor - T_fvsolver| after 3 steps that counts as the same answer

# the device's head: a 10 mm glass bulb, 0.6 mm wall, a 1 mm porous cap, a 20 mm neck
HEAD = dict(
    bulb_inner_radius=0.01,
    glass_thickness=0.6e-3,
    cap_thickness=1.0e-3,
    cap_polar_range=(0.2, 2.0),
    neck_inner_radius=1.5e-3,
    neck_outer_radius=2.5e-3,
    neck_length=0.02,
)
BASE_COUNTS = dict(n_glass=8, n_cap=8, n_polar=200, n_neck=60)  # about 3.1k cells
MATERIALS = {
    "glass": Material.constant("glass", 2230.0, 1.14, 830.0),
    "cap": Material.constant("cap", 600.0, 0.3, 1500.0),
}
T_INITIAL = 295.0
DT = 0.5  # s
SCHEMES = ("backward_euler", "bdf2")
SCHEME_LABEL = {"backward_euler": "BE", "bdf2": "BDF2"}
# fixed-step coefficients of alpha0 m(T+) + alpha1 m(T) + alpha2 m(T-) = dt F(T+)
COEFFICIENTS = {"backward_euler": (1.0, -1.0, 0.0), "bdf2": (1.5, -2.0, 0.5)}
CONFIG_OPTIONS = {"default": {}, "two-point": {"nonorthogonal_correction": False}, "rectangle": {}}
# the orthogonal anchor: a plain axisymmetric rectangle of the head mesh's cell count, with the
# constructor's defaults, so it must take the two-point path by itself; its goal is stricter
RATIO_GOALS = {"rectangle": 1.3}
CONFIGS = list(CONFIG_OPTIONS)  # the ones timed (--configs)
ORDERINGS = ("NATURAL", "MMD_ATA", "MMD_AT_PLUS_A", "COLAMD")
# NATURAL is only factorised when its envelope (a close estimate of its fill for this
# symmetric pattern) is small in absolute terms or within this factor of the best fill
# found: solve time follows the fill, so a much larger fill cannot win.
NATURAL_FILL_FACTOR = 4.0
NATURAL_FILL_ALWAYS = 3_000_000
MIN_REPEATS = 3  # repeats every measurement gets, whatever its time budget
FACTOR_REPEATS = 5  # factorisations timed per matrix (median reported)


def conditions() -> list[PatchCondition]:
    """Linear conditions: convection outside, a fixed wall temperature and a warm bore inside."""
    room = Convection(10.0, 295.0)
    return [
        PatchCondition("glass_outer", (room,)),
        PatchCondition("cap_outer", (Convection(15.0, 295.0),)),
        PatchCondition("cap_edge", (room,)),
        PatchCondition("neck_outer", (room,)),
        PatchCondition("neck_end", (room,)),
        PatchCondition("inner_wall", (FixedTemperature(330.0),)),
        PatchCondition("bore", (Convection(50.0, 320.0),)),
    ]


def head_mesh(target: int):
    """A device-head mesh with about ``target`` cells (all cell counts scaled together)."""
    scale = math.sqrt(target / 3128.0)
    for _ in range(4):
        counts = {k: max(2, round(v * scale)) for k, v in BASE_COUNTS.items()}
        mesh = device_head(**HEAD, **counts)
        if abs(mesh.n_cells / target - 1.0) < 0.03:
            break
        scale *= math.sqrt(target / mesh.n_cells)
    return mesh, counts


@functools.lru_cache(maxsize=2)
def rectangle_mesh(cells: int):
    """A plain axisymmetric rectangle (r 0-20 mm, z 0-40 mm) with about ``cells`` cells, 1:2."""
    n_r = max(2, round(math.sqrt(cells / 2.0)))
    return builders.rectangle(0.02, 0.04, n_r, 2 * n_r, "axisymmetric", material="glass")


def rectangle_conditions() -> list[PatchCondition]:
    """Linear conditions on the rectangle: a fixed foot, a warm top, convection at the side."""
    return [
        PatchCondition("right", (Convection(10.0, 295.0),)),
        PatchCondition("bottom", (FixedTemperature(330.0),)),
        PatchCondition("top", (Convection(50.0, 320.0),)),
    ]


def ratio_goal(config: str) -> float:
    return RATIO_GOALS.get(config, RATIO_GOAL)


def make_problem(mesh, config: str) -> ConductionProblem:
    if config == "rectangle":
        problem = ConductionProblem(rectangle_mesh(mesh.n_cells), MATERIALS, rectangle_conditions())
        assert not problem.correct, "the plain rectangle must take the two-point path"
    else:
        problem = ConductionProblem(mesh, MATERIALS, conditions(), **CONFIG_OPTIONS[config])
    assert problem.linear and problem.constant_jacobian, "the benchmark needs a linear problem"
    return problem


def options(scheme: str) -> StepperOptions:
    return StepperOptions(scheme=scheme, adaptive=False, initial_step=DT)


def median_ms(values) -> float:
    return 1e3 * float(np.median(values))


def best_block_ms(blocks) -> float:
    """Least disturbed repeat: the smallest of the per-repeat medians, ms."""
    return min(median_ms(b) for b in blocks)


# ----------------------------------------------------------------------------- the floor
@dataclass
class Candidate:
    ordering: str
    symmetric: bool
    factor_ms: float = math.nan
    fill: int = 0
    solve_ms: float = math.nan
    lu: object = None
    note: str = ""
    explicit: dict | None = None  # splu keywords given as they are (fvsolver's own settings)

    @property
    def label(self) -> str:
        return f"{self.ordering}{'+sym' if self.symmetric else ''}"

    def kwargs(self) -> dict:
        if self.explicit is not None:
            return dict(self.explicit)
        kw = dict(permc_spec=self.ordering, options=dict(SymmetricMode=self.symmetric))
        if self.symmetric:
            kw["diag_pivot_thresh"] = 0.1  # symmetric mode wants a small pivot threshold
        return kw


def envelope_fill(matrix: sp.spmatrix) -> int:
    """nnz(L) + nnz(U) of the envelope of the pattern of A + A^T in the matrix's given order
    (the default configuration's matrix is not structurally symmetric)."""
    pattern = (abs(matrix) + abs(matrix).T).tocsr()
    pattern.sort_indices()
    first = np.minimum(pattern.indices[pattern.indptr[:-1]], np.arange(pattern.shape[0]))
    return int(2 * np.sum(np.arange(matrix.shape[0]) - first) + matrix.shape[0])


@dataclass
class Floor:
    """One factorisation of the step matrix and the bare per-step update for one scheme."""

    scheme: str
    matrix: sp.csc_matrix
    dm: np.ndarray
    b: np.ndarray
    candidates: list = field(default_factory=list)
    best: Candidate | None = None
    fv_choice: Candidate | None = None
    best_factor_ms: float = math.nan
    model_error: float = math.nan  # relative error of the affine model dt F = b - (J - a0 C) T

    @classmethod
    def build(cls, problem: ConductionProblem, scheme: str) -> "Floor":
        """The step matrix of ``problem`` (what its stepper factorises) and the affine part b.

        For an affine problem whose Jacobian is exact, dt F(T) = -(J - a0 C) T + b, so b
        follows from any one state; that it reproduces dt F at another state is checked.
        """
        assert problem.exact_jacobian, "the floor needs an affine problem with an exact Jacobian"
        a0 = COEFFICIENTS[scheme][0]
        T0 = np.full(problem.n, T_INITIAL)
        ev = problem.evaluate(T0, 0.0)
        _, dm = problem.capacity(T0)
        J = problem.jacobian(a0, DT, dm, ev).tocsc()
        b = DT * ev.rate + (J @ T0 - a0 * dm * T0)
        # the affine model at a second, non-uniform state
        T1 = T_INITIAL + 40.0 * np.random.default_rng(1).random(problem.n)
        exact = DT * problem.evaluate(T1, 0.0).rate
        model = b - (J @ T1 - a0 * dm * T1)
        err = float(np.max(np.abs(model - exact)) / max(float(np.max(np.abs(exact))), 1e-300))
        assert err < 1e-9, f"the floor's affine model misses dt F by {err:.1e} (relative)"
        fl = cls(scheme, J, dm, b)
        fl.model_error = err
        return fl

    def search(self, rounds: int = 7, solves: int = 5) -> None:
        """Factorise with every ordering and keep the one whose solve is fastest.

        The solves are timed round-robin (``rounds`` rounds of ``solves`` solves per
        candidate, smallest round median kept) so that a change of the machine's load
        during the search cannot favour one candidate.
        """
        rhs = self.dm * T_INITIAL + self.b
        found = []
        natural_envelope = envelope_fill(self.matrix)
        for ordering in ORDERINGS[1:] + ORDERINGS[:1]:  # NATURAL last, once the best fill is known
            for symmetric in (False, True):
                c = Candidate(ordering, symmetric)
                self.candidates.append(c)
                if ordering == "NATURAL":
                    best_fill = min(x.fill for x in found)
                    c.note = f"envelope fill {natural_envelope:,}"
                    if natural_envelope > max(NATURAL_FILL_FACTOR * best_fill, NATURAL_FILL_ALWAYS):
                        c.fill = natural_envelope
                        c.note = f"skipped: envelope fill {natural_envelope:,} vs best {best_fill:,}"
                        continue
                t0 = time.perf_counter()
                c.lu = spla.splu(self.matrix, **c.kwargs())
                c.factor_ms = 1e3 * (time.perf_counter() - t0)
                c.fill = int(c.lu.L.nnz + c.lu.U.nnz)
                found.append(c)
        # fvsolver's own settings, exactly as fvsolver.linear passes them
        fv = Candidate(str(fv_linear.SPLU_OPTIONS.get("permc_spec", "?")),
                       bool(fv_linear.SPLU_OPTIONS.get("options", {}).get("SymmetricMode", False)),
                       explicit=dict(fv_linear.SPLU_OPTIONS))
        t0 = time.perf_counter()
        fv.lu = spla.splu(self.matrix, **fv.kwargs())
        fv.factor_ms = 1e3 * (time.perf_counter() - t0)
        fv.fill = int(fv.lu.L.nnz + fv.lu.U.nnz)
        fv.note = "fvsolver.linear.SPLU_OPTIONS as they are"
        self.fv_choice = fv
        self.candidates.append(fv)
        timed = found + [fv]
        best_round = {id(c): math.inf for c in timed}
        for r in range(rounds):
            for c in timed[r % len(timed):] + timed[:r % len(timed)]:
                times = []
                for _ in range(solves):
                    t0 = time.perf_counter()
                    c.lu.solve(rhs)
                    times.append(time.perf_counter() - t0)
                best_round[id(c)] = min(best_round[id(c)], median_ms(times))
        for c in timed:
            c.solve_ms = best_round[id(c)]
        self.best = min(timed, key=lambda x: x.solve_ms)  # fvsolver's own settings may win
        for c in found:  # keep only the factorisations that are timed per step
            if c is not self.best:
                c.lu = None
        times = []
        for _ in range(FACTOR_REPEATS):
            t0 = time.perf_counter()
            spla.splu(self.matrix, **self.best.kwargs())
            times.append(time.perf_counter() - t0)
        self.best_factor_ms = median_ms(times)

    def start(self, T: np.ndarray, T_old: np.ndarray | None = None):
        """State for :meth:`steps`: (T_n, T_n-1)."""
        return T.copy(), (T if T_old is None else T_old).copy()

    def steps(self, lu, state, k: int, times: list):
        """``k`` bare steps: rhs = c1 T + c2 T_old + b; T+ = lu.solve(rhs)."""
        _, a1, a2 = COEFFICIENTS[self.scheme]
        c1 = -a1 * self.dm
        c2 = -a2 * self.dm if a2 else None
        T, T_old = state
        rhs = np.empty_like(T)
        tmp = np.empty_like(T)
        for _ in range(k):
            t0 = time.perf_counter()
            np.multiply(c1, T, out=rhs)
            rhs += self.b
            if c2 is not None:
                np.multiply(c2, T_old, out=tmp)
                rhs += tmp
            T_new = lu.solve(rhs)
            times.append(time.perf_counter() - t0)
            T_old, T = T, T_new
        return T, T_old


# ----------------------------------------------------------------------------- fvsolver side
@dataclass
class FvRun:
    config: str
    scheme: str
    problem: ConductionProblem
    stepper: TimeStepper
    factor_ms: float = math.nan
    fill: int = 0
    # one list of per-step seconds per repeat (block), taken side by side
    blocks: list = field(default_factory=list)
    floor_blocks: list = field(default_factory=list)
    floor_fv_blocks: list = field(default_factory=list)
    newton: int = 0
    steps: int = 0
    first_steps_ms: float = math.nan  # the warm-up steps that factorised
    previous: np.ndarray | None = None  # state before the last timed step (BDF2's second level)

    @property
    def fv_ms(self) -> float:
        return best_block_ms(self.blocks)

    @property
    def floor_ms(self) -> float:
        return best_block_ms(self.floor_blocks)

    @property
    def floor_fv_ms(self) -> float:
        return best_block_ms(self.floor_fv_blocks)

    @property
    def floor_min_ms(self) -> float:
        """The floor the goal is checked against: the faster of the two bare floors (best ordering
        found, fvsolver's ordering). Both are valid floors; the smaller is the stricter test and the
        less disturbed estimate when the two orderings coincide."""
        return min(self.floor_ms, self.floor_fv_ms)

    @property
    def ratio(self) -> float:
        return self.fv_ms / self.floor_min_ms

    @property
    def paired_ratios(self) -> list:
        """fvsolver/floor of each repeat (adjacent blocks share the machine's load)."""
        return [float(np.median(a) / min(np.median(b), np.median(c)))
                for a, b, c in zip(self.blocks, self.floor_blocks, self.floor_fv_blocks)]


def new_stepper(problem: ConductionProblem, scheme: str) -> TimeStepper:
    return TimeStepper(problem, np.full(problem.n, T_INITIAL), 0.0, 1e12, options(scheme))


def warm_stepper(problem: ConductionProblem, scheme: str):
    """A stepper past its factorising steps (BE: step 1; BDF2: steps 1 and 2).

    Returns the stepper and the total time, ms, of the steps that factorised.
    """
    stepper = new_stepper(problem, scheme)
    factorising = 0.0
    for _ in range(3):
        before = stepper.counters.factorisations
        t0 = time.perf_counter()
        stepper.step()
        if stepper.counters.factorisations > before:
            factorising += time.perf_counter() - t0
    before = stepper.counters.factorisations
    stepper.step()
    assert stepper.counters.factorisations == before, "fixed steps should reuse the factorisation"
    return stepper, 1e3 * factorising


def fv_factorisation(problem: ConductionProblem, scheme: str, repeats: int = 5):
    """Time fvsolver's own factorise() of its step matrix (what the stepper calls)."""
    a0 = COEFFICIENTS[scheme][0]
    T0 = np.full(problem.n, T_INITIAL)
    ev = problem.evaluate(T0, 0.0)
    _, dm = problem.capacity(T0)
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        lu = fv_linear.factorise(problem.jacobian(a0, DT, dm, ev))
        times.append(time.perf_counter() - t0)
    return median_ms(times), lu.fill


def time_fv_steps(run: FvRun, k: int) -> None:
    st = run.stepper
    f0, n0, s0 = st.counters.factorisations, st.counters.newton_iterations, st.counters.steps
    times = []
    for i in range(k):
        if i == k - 1:
            run.previous = st.y.copy()  # untimed
        t0 = time.perf_counter()
        st.step()
        times.append(time.perf_counter() - t0)
    run.blocks.append(times)
    assert st.status == "running", st.message
    assert st.counters.factorisations == f0, "a timed step factorised"
    run.newton += st.counters.newton_iterations - n0
    run.steps += st.counters.steps - s0


# ----------------------------------------------------------------------------- memory
def traced_peak(fn) -> float:
    """Peak MB of Python-side allocations (numpy arrays included) while ``fn`` runs."""
    gc.collect()
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1] / 2**20
    finally:
        tracemalloc.stop()


def max_rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # KiB on Linux


def rss_probe(spec: dict) -> dict:
    """Run in a fresh process: one side's work alone, and its max RSS (MB) before and after."""
    base = max_rss_mb()
    if spec["kind"] == "floor":
        data, indices, indptr, shape = spec["matrix"]
        J = sp.csc_matrix((data, indices, indptr), shape=shape)
        fl = Floor("bdf2", J, spec["dm"], spec["b"])
        base = max_rss_mb()
        lu = spla.splu(J, **spec["splu"])
        fl.steps(lu, fl.start(np.full(J.shape[0], T_INITIAL)), 5, [])
    else:
        mesh, _ = head_mesh(spec["target"])
        st = new_stepper(make_problem(mesh, spec["kind"]), "bdf2")
        for _ in range(5):
            st.step()
    return {"base": base, "peak": max_rss_mb()}


_PROBE_CONTEXT = None


def start_probe_server() -> None:
    """Start the fork server now, while this process is still small.

    Linux carries a process's max RSS over fork and exec, so the probes are forked from
    a server started before the benchmark grows; each probe then reports its own peak.
    """
    global _PROBE_CONTEXT
    import multiprocessing
    _PROBE_CONTEXT = multiprocessing.get_context("forkserver")
    _PROBE_CONTEXT.set_forkserver_preload([])
    from multiprocessing import forkserver
    forkserver.ensure_running()


def run_rss_probes(target: int, floors: dict) -> dict:
    """Max RSS of fvsolver (each configuration, BDF2, 5 steps) and of each configuration's floor,
    each in its own process."""
    from concurrent.futures import ProcessPoolExecutor
    out = {}
    specs = {c: {"kind": c, "target": target} for c in CONFIGS}
    for c, fl in floors.items():
        J = fl.matrix
        specs["floor", c] = {"kind": "floor", "matrix": (J.data, J.indices, J.indptr, J.shape), "dm": fl.dm,
                             "b": fl.b, "splu": fl.best.kwargs()}
    for name, spec in specs.items():
        try:
            with ProcessPoolExecutor(max_workers=1, mp_context=_PROBE_CONTEXT) as pool:
                out[name] = pool.submit(rss_probe, spec).result(timeout=600)
        except Exception as exc:  # a failed probe leaves a gap in the table, not a failed run
            out[name] = {"base": math.nan, "peak": math.nan, "error": repr(exc)}
    return out


# ----------------------------------------------------------------------------- one size
@dataclass
class SizeResult:
    target: int
    cells: int
    counts: dict
    nnz: dict  # per configuration: nnz of its step matrix (BDF2)
    floors: dict  # (config, scheme) -> Floor
    runs: dict
    fv_peak_mb: dict
    floor_peak_mb: dict  # per configuration
    rss_mb: float
    check: dict  # (config, scheme) -> max |T_floor - T_fvsolver|, K
    build_s: float
    child_rss: dict = field(default_factory=dict)


def bench_size(target: int, steps: int, repeats: int, log, probe_rss: bool = True,
               budget_s: float = 12.0) -> SizeResult:
    t_start = time.perf_counter()
    mesh, counts = head_mesh(target)
    problems = {c: make_problem(mesh, c) for c in CONFIGS}
    # each configuration against the matrix its own stepper factorises
    floors = {}
    for config, problem in problems.items():
        for scheme in SCHEMES:
            fl = Floor.build(problem, scheme)
            fl.search()
            floors[config, scheme] = fl
    nnz = {c: int(floors[c, "bdf2"].matrix.nnz) for c in CONFIGS}
    log(f"  mesh {mesh.n_cells} cells {counts}, nnz " + ", ".join(f"{c} {nnz[c]}" for c in CONFIGS)
        + f"; floor orderings searched ({time.perf_counter() - t_start:.1f} s)")

    runs = {}
    for config, problem in problems.items():
        for scheme in SCHEMES:
            stepper, first_ms = warm_stepper(problem, scheme)
            run = FvRun(config, scheme, problem, stepper, first_steps_ms=first_ms)
            run.factor_ms, run.fill = fv_factorisation(problem, scheme)
            runs[config, scheme] = run

    # interleaved repeats: fvsolver, bare floor (best ordering), bare floor (fvsolver's ordering);
    # a measurement that has used up its time budget stops after MIN_REPEATS repeats
    spent = {key: 0.0 for key in runs}
    for r in range(repeats):
        for scheme in SCHEMES:
            for config in CONFIGS:
                fl = floors[config, scheme]
                run = runs[config, scheme]
                if r >= MIN_REPEATS and spent[config, scheme] > budget_s:
                    continue
                t_block = time.perf_counter()
                time_fv_steps(run, steps)
                state = fl.start(run.stepper.y, run.previous)
                run.floor_blocks.append([])
                fl.steps(fl.best.lu, state, steps, run.floor_blocks[-1])
                run.floor_fv_blocks.append([])
                fl.steps(fl.fv_choice.lu, state, steps, run.floor_fv_blocks[-1])
                spent[config, scheme] += time.perf_counter() - t_block

    # same answer: the bare floor and fvsolver's step from the same history, every configuration
    check = {}
    for config in CONFIGS:
        for scheme in SCHEMES:
            fl = floors[config, scheme]
            st = runs[config, scheme].stepper
            previous = st.y.copy()
            st.step()
            state = fl.start(st.y, previous)
            for _ in range(3):
                st.step()
            T_floor, _ = fl.steps(fl.best.lu, state, 3, [])
            check[config, scheme] = float(np.max(np.abs(T_floor - st.y)))

    # memory, untimed (tracemalloc slows allocation)
    fv_peak, floor_peak = {}, {}
    for config in CONFIGS:
        def fv_work(config=config):
            p = make_problem(mesh, config)
            st = new_stepper(p, "bdf2")
            for _ in range(4):
                st.step()
        fv_peak[config] = traced_peak(fv_work)

        fl = floors[config, "bdf2"]

        def floor_work(p=problems[config], fl=fl):
            T0 = np.full(p.n, T_INITIAL)
            J = p.jacobian(COEFFICIENTS["bdf2"][0], DT, p.capacity(T0)[1], p.evaluate(T0, 0.0)).tocsc()
            lu = spla.splu(J, **fl.best.kwargs())
            fl.steps(lu, fl.start(T0), 4, [])
        floor_peak[config] = traced_peak(floor_work)

    result = SizeResult(target, mesh.n_cells, counts, nnz, floors, runs,
                        fv_peak, floor_peak, max_rss_mb(), check, time.perf_counter() - t_start)
    for fl in floors.values():  # free the factorisations before the next size
        for c in fl.candidates:
            c.lu = None
    for run in runs.values():  # keep the numbers, drop the steppers and their factorisations
        run.stepper = run.problem = run.previous = None
    del problems
    if probe_rss:
        result.child_rss = run_rss_probes(target, {c: floors[c, "bdf2"] for c in CONFIGS})
    result.build_s = time.perf_counter() - t_start
    return result


def warm_up(log) -> None:
    """Load or compile every numba kernel and touch every code path on a tiny mesh."""
    t0 = time.perf_counter()
    mesh, _ = head_mesh(600)
    for config in CONFIGS:
        p = make_problem(mesh, config)
        for scheme in SCHEMES:
            st = new_stepper(p, scheme)
            for _ in range(4):
                st.step()
    for config in CONFIGS:
        fl = Floor.build(make_problem(mesh, config), "bdf2")
        lu = spla.splu(fl.matrix, permc_spec="COLAMD")
        fl.steps(lu, fl.start(np.full(fl.matrix.shape[0], T_INITIAL)), 3, [])
    log(f"warm-up (numba kernels, code paths) {time.perf_counter() - t0:.1f} s")


# ----------------------------------------------------------------------------- report
def growth(cells, costs) -> float:
    if len(cells) < 2:
        return math.nan
    return float(np.polyfit(np.log(cells), np.log(costs), 1)[0])


def report(results: list[SizeResult], steps: int, repeats: int) -> list[str]:
    out = []
    p = out.append
    p("")
    p(f"## Per-step cost (up to {repeats} interleaved repeats of {steps} timed steps, dt = {DT} s)")
    p("")
    p("ms/step: median over the steps of one repeat, smallest over the repeats (the least disturbed one); "
      "the ratio is fvsolver's over the smaller of the two floors (best ordering found, fvsolver's ordering); "
      "per-repeat ratios: the same of each repeat's adjacent blocks (number of "
      f"repeats; a measurement stops after {MIN_REPEATS} once it has used its time budget).")
    p("")
    p("| config | scheme | cells | nnz | floor (best ordering found) ms/step | floor (fvsolver's ordering) ms/step | fvsolver ms/step "
      "| ratio fvsolver/floor | per-repeat ratios | Newton it/step | ratio within goal |")
    p("|---|---|---:|---:|---:|---:|---:|---:|---:|---:|:---:|")
    verdicts = []
    for config in CONFIGS:
        for scheme in SCHEMES:
            for res in results:
                run = res.runs[config, scheme]
                ratio = run.ratio
                ok = ratio <= ratio_goal(config)
                verdicts.append(ok)
                pr = run.paired_ratios
                p(f"| {config} | {SCHEME_LABEL[scheme]} | {res.cells} | {res.nnz[config]} | {run.floor_ms:.3f} | "
                  f"{run.floor_fv_ms:.3f} | {run.fv_ms:.3f} | {ratio:.2f} | {min(pr):.2f}-{max(pr):.2f} "
                  f"({len(pr)}) | "
                  f"{run.newton / max(run.steps, 1):.1f} | {'PASS' if ok else 'FAIL'} (<= {ratio_goal(config)}) |")
    p("")
    p("## Growth of the cost per step with N (slope of log cost against log cells)")
    p("")
    p("| config | scheme | floor exponent | fvsolver exponent | fvsolver exponent <= 1.2 |")
    p("|---|---|---:|---:|:---:|")
    cells = [r.cells for r in results]
    exp_ok = []
    for config in CONFIGS:
        for scheme in SCHEMES:
            fv = growth(cells, [r.runs[config, scheme].fv_ms for r in results])
            fl = growth(cells, [r.runs[config, scheme].floor_min_ms for r in results])
            if math.isnan(fv):
                p(f"| {config} | {SCHEME_LABEL[scheme]} | n/a | n/a | n/a (needs two sizes or more) |")
                continue
            ok = fv <= EXPONENT_GOAL
            exp_ok.append(ok)
            p(f"| {config} | {SCHEME_LABEL[scheme]} | {fl:.2f} | {fv:.2f} | {'PASS' if ok else 'FAIL'} |")
    p("")
    p("## Factorisation and fill (each configuration's own step matrix)")
    p("")
    p("| config | cells | scheme | nnz | best floor ordering | floor factorisation ms | fvsolver factorisation ms "
      "| fvsolver factorising steps ms | LU fill floor | LU fill fvsolver | fill / nnz |")
    p("|---|---:|---|---:|---|---:|---:|---:|---:|---:|---:|")
    for config in CONFIGS:
        for res in results:
            for scheme in SCHEMES:
                fl = res.floors[config, scheme]
                run = res.runs[config, scheme]
                label = fl.best.label + (" (fvsolver's settings)" if fl.best is fl.fv_choice else "")
                p(f"| {config} | {res.cells} | {SCHEME_LABEL[scheme]} | {fl.matrix.nnz:,} | {label} | "
                  f"{fl.best_factor_ms:.1f} | {run.factor_ms:.1f} | {run.first_steps_ms:.1f} | {fl.best.fill:,} | "
                  f"{run.fill:,} | {fl.best.fill / fl.matrix.nnz:.1f} |")
    p("")
    p("fvsolver factorisation: fvsolver.linear.factorise(problem.jacobian(...)) (assembly and CSR to CSC "
      f"included), median of {FACTOR_REPEATS}; floor: splu of the CSC matrix with the best ordering, median of "
      f"{FACTOR_REPEATS}; factorising steps: the whole "
      "first step(s) of the stepper that built its factorisations (BE: 1, BDF2: 2), excluded from ms/step.")
    p("")
    p("## Memory")
    p("")
    head = "| cells | " + " | ".join(f"py peak MB fvsolver {c}" for c in CONFIGS) + " | "
    head += " | ".join(f"py peak MB floor {c}" for c in CONFIGS) + " | "
    head += " | ".join(f"max RSS MB fvsolver {c} (+ over imports)" for c in CONFIGS) + " | "
    head += " | ".join(f"max RSS MB floor {c} (+ over imports)" for c in CONFIGS)
    head += " | max RSS MB benchmark process |"
    p(head)
    p("|" + "---:|" * (2 + 4 * len(CONFIGS)))

    def rss(d):
        if not d or math.isnan(d.get("peak", math.nan)):
            return "n/a"
        return f"{d['peak']:.0f} (+{d['peak'] - d['base']:.0f})"

    for res in results:
        row = [f"{res.cells}"] + [f"{res.fv_peak_mb[c]:.1f}" for c in CONFIGS]
        row += [f"{res.floor_peak_mb[c]:.1f}" for c in CONFIGS]
        row += [rss(res.child_rss.get(c)) for c in CONFIGS]
        row += [rss(res.child_rss.get(("floor", c))) for c in CONFIGS]
        row.append(f"{res.rss_mb:.0f}")
        p("| " + " | ".join(row) + " |")
    p("")
    p("py peak: tracemalloc peak of Python-side allocations (numpy arrays included) while building the "
      "problem and taking 4 BDF2 steps (fvsolver) or assembling that configuration's matrix, factorising and "
      "taking 4 bare steps (floor); "
      "SuperLU's factor storage is allocated in C and is not traced. max RSS (resource.getrusage): of a fresh "
      "process doing only that side's work (fvsolver: mesh, problem, BDF2 stepper, 5 steps; floor: load the "
      "matrix, splu with the best ordering, 5 bare steps), with the part above the process's RSS after its "
      "imports; and the benchmark process's own high-water mark after that size (it holds several "
      "factorisations at once, sizes in increasing order).")
    p("")
    p("## Orderings tried for the floor (BDF2 matrix of each configuration)")
    p("")
    p("| config | cells | ordering | factorisation ms | fill nnz(L)+nnz(U) | solve ms | note |")
    p("|---|---:|---|---:|---:|---:|---|")
    for config in CONFIGS:
        for res in results:
            fl = res.floors[config, "bdf2"]
            for c in fl.candidates:
                mark = (" = fvsolver's" if c is fl.fv_choice else "") + (" (best)" if c is fl.best else "")
                p(f"| {config} | {res.cells} | {c.label}{mark} | {c.factor_ms:.1f} | {c.fill:,} | {c.solve_ms:.3f} "
                  f"| {c.note} |")
    p("")
    for config in CONFIGS:
        worst = {s: max(r.check[config, s] for r in results) for s in SCHEMES}
        model = max(r.floors[config, s].model_error for r in results for s in SCHEMES)
        p(f"Same answer check ({config}, 3 steps from the same history): max |T_floor - T_fvsolver| = "
          + ", ".join(f"{SCHEME_LABEL[s]} {worst[s]:.2e} K" for s in SCHEMES)
          + f"; floor's affine model against dt F at a random state: relative error {model:.1e}")
    p("")
    all_ratio = all(verdicts)
    all_exp = all(exp_ok)  # vacuous with a single size; reported as n/a below
    p(f"GOAL ratio fvsolver/floor <= {RATIO_GOAL} at every size ({', '.join(f'{c} <= {g}' for c, g in RATIO_GOALS.items())}): "
      f"{'PASS' if all_ratio else 'FAIL'}")
    p(f"GOAL growth exponent <= {EXPONENT_GOAL}: {('PASS' if all_exp else 'FAIL') if exp_ok else 'n/a'}")
    for config in CONFIGS:
        rows = [res.runs[config, s] for res in results for s in SCHEMES]
        ok = all(r.ratio <= ratio_goal(config) for r in rows)
        p(f"  {config}: ratio <= {ratio_goal(config)} {'PASS' if ok else 'FAIL'}")
    same = all(v <= SAME_ANSWER_K for r in results for v in r.check.values())
    p(f"CHECK floor and fvsolver give the same temperatures (within {SAME_ANSWER_K:g} K): "
      f"{'PASS' if same else 'FAIL'}")
    p(f"OVERALL: {'PASS' if all_ratio and all_exp else 'FAIL'}")
    return out


def profile_steps(targets, steps: int, top: int) -> list[str]:
    """cProfile of fvsolver's warm steps (every configuration timed, both schemes) at each size."""
    out = []
    for target in targets:
        mesh, _ = head_mesh(target)
        for config in CONFIGS:
            problem = make_problem(mesh, config)
            for scheme in SCHEMES:
                st, _ = warm_stepper(problem, scheme)
                prof = cProfile.Profile()
                t0 = time.perf_counter()
                prof.enable()
                for _ in range(steps):
                    st.step()
                prof.disable()
                wall = 1e3 * (time.perf_counter() - t0) / steps
                buf = io.StringIO()
                pstats.Stats(prof, stream=buf).sort_stats("tottime").print_stats(top)
                out.append(f"\n## cProfile, {config}, {SCHEME_LABEL[scheme]}, {mesh.n_cells} cells, {steps} steps "
                           f"({wall:.2f} ms/step under the profiler; sorted by own time)\n")
                out.append("```")
                out.extend(line for line in buf.getvalue().splitlines() if line.strip())
                out.append("```")
    return out


def source_state() -> str:
    """Which fvsolver is measured: the commit and whether its sources have local changes."""
    root = Path(__file__).resolve().parents[1]
    try:
        import subprocess
        head = subprocess.run(["git", "-C", str(root), "rev-parse", "--short", "HEAD"], capture_output=True,
                              text=True, timeout=10).stdout.strip()
        dirty = subprocess.run(["git", "-C", str(root), "status", "--porcelain", "--", "fvsolver"],
                               capture_output=True, text=True, timeout=10).stdout.split("\n")
    except (OSError, subprocess.SubprocessError):
        return "fvsolver sources: unknown (git not available)"
    if not head:
        return f"fvsolver sources: {root / 'fvsolver'} (not a git checkout)"
    changed = [line[3:] for line in dirty if line.strip()]
    return (f"fvsolver sources: commit {head}" + (f" with local changes in {', '.join(changed)}" if changed
                                                    else " (no local changes)"))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, few steps (a smoke run)")
    ap.add_argument("--sizes", type=str, default=None,
                    help="comma-separated target cell counts (default 5000,20000,80000)")
    ap.add_argument("--steps", type=int, default=None, help="timed steps per repeat (default 20)")
    ap.add_argument("--repeats", type=int, default=None, help="interleaved repeats (default 5)")
    ap.add_argument("--profile", type=str, nargs="?", const="", default=None, metavar="CELLS[,CELLS]",
                    help="append a cProfile of fvsolver's steps at about CELLS cells (default: the smallest and "
                         "the largest size)")
    ap.add_argument("--profile-only", action="store_true",
                    help="with --profile: only the profile, no timing of the floor")
    ap.add_argument("--budget", type=float, default=12.0,
                    help=f"seconds per measurement after which it stops at {MIN_REPEATS} repeats (default 12)")
    ap.add_argument("--blas-threads", type=int, default=None,
                    help="set OPENBLAS_NUM_THREADS for this run (default: leave the environment alone)")
    ap.add_argument("--no-rss-probes", action="store_true",
                    help="skip the per-size child processes that measure max RSS")
    ap.add_argument("--configs", type=str, default=",".join(CONFIG_OPTIONS),
                    help=f"comma-separated problem configurations (default {','.join(CONFIG_OPTIONS)})")
    args = ap.parse_args(argv)
    if args.profile_only and args.profile is None:
        ap.error("--profile-only needs --profile")
    if not args.no_rss_probes and not args.profile_only:
        start_probe_server()
    chosen = [c.strip() for c in args.configs.split(",") if c.strip()]
    unknown = [c for c in chosen if c not in CONFIG_OPTIONS]
    if unknown or not chosen:
        ap.error(f"--configs: unknown {unknown}, expected some of {list(CONFIG_OPTIONS)}")
    CONFIGS[:] = [c for c in CONFIG_OPTIONS if c in chosen]
    sizes = [int(s) for s in args.sizes.split(",")] if args.sizes else (
        [1500, 3000, 6000] if args.quick else [5000, 20000, 80000])
    steps = args.steps or (8 if args.quick else 20)
    repeats = args.repeats or (3 if args.quick else 5)

    def log(msg):
        print(msg, flush=True)

    t0 = time.perf_counter()
    log(f"fvsolver step benchmark: python {platform.python_version()}, numpy {np.__version__}, "
        f"scipy {scipy.__version__}, {os.cpu_count()} cpu(s), OPENBLAS_CORETYPE="
        f"{os.environ.get('OPENBLAS_CORETYPE', '(unset)')}, OPENBLAS_NUM_THREADS="
        f"{os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}, load average {os.getloadavg()[0]:.2f} (1 min)")
    log(source_state())
    log(f"sizes {sizes}, {steps} steps x {repeats} repeats per measurement, fvsolver ordering "
        f"{fv_linear.SPLU_OPTIONS}")
    if os.getloadavg()[0] > 0.5 and "OPENBLAS_NUM_THREADS" not in os.environ:
        log("note: other processes are using the CPU; threaded OpenBLAS calls (np.dot and friends) can then "
            "stall for whole scheduler ticks. Compare with --blas-threads 1.")
    warm_up(log)
    profile_sizes = None
    if args.profile is not None:
        profile_sizes = ([int(x) for x in args.profile.split(",") if x.strip()]
                         or sorted({min(sizes), max(sizes)}))
    if args.profile_only:
        print("\n".join(profile_steps(profile_sizes, steps, 15)))
        return 0
    results = []
    for target in sorted(sizes):
        log(f"size ~{target} cells")
        res = bench_size(target, steps, repeats, log, probe_rss=not args.no_rss_probes, budget_s=args.budget)
        log(f"  done in {res.build_s:.1f} s")
        results.append(res)
    lines = report(results, steps, repeats)
    if profile_sizes is not None:
        lines += profile_steps(profile_sizes, steps, 15)
    print("\n".join(lines))
    print(f"\nload average at the end {os.getloadavg()[0]:.2f} (1 min); total {time.perf_counter() - t0:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
