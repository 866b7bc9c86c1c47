#!/usr/bin/env python
"""Where a device run's time goes, and what the Jacobian's sparse form saves, side by side.

For the demo head (cases/demo.toml) at a few mesh refinements (every cell count of its
[mesh] table times a factor), this runs the case for ``--seconds`` of simulated time and then
measures, in one process:

* the Jacobian at that state factorised three ways, each timed as the median of
  ``--repeats`` factorisations: ``formed`` (the rank-one vapour-temperature coupling formed
  as its dense (wall faces)^2 block, ordered afresh: how fvsolver did it before
  ``linear.LowRankUpdate``), ``bordered`` (the update bordered, ordered afresh) and ``kept``
  (bordered, with the ordering a ``linear.Factoriser`` keeps for the run's pattern: what the
  stepper does now). Ratios are printed against ``kept``, with each factor's fill;
* the run itself: Newton iterations and factorisations per step, and the share of the
  stepping time spent in evaluations, factorisations and solves;
* the run's cost per step against its floor: the median over ``--repeats`` runs (each from a
  fresh set-up, without the wrappers that time the shares) of the stepping time per accepted step,
  against one factorisation of the same (bordered) Jacobian by a bare ``splu`` with the best of
  several orderings (a median too), plus as many bare solves as the run's Newton iterations per
  step.

A last table runs both demos whole (their Newton iterations over every step, the cycle's restarts
and the steps retaken as faces dry included).

``--json FILE`` writes, per size, ``cells``, ``ms_per_step``, ``floor_ms_per_step``,
``ratio_to_floor``, ``newton_per_step`` and ``newton_failures`` (and a few more fields).

Run ``python bench/bench_device.py`` (about a minute on 2 cores), ``--factors 1,2,4,8``,
``--seconds 10``, ``--repeats 5``.
"""
from __future__ import annotations

import argparse
import json
import statistics
import sys
import time
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # run from a checkout

import numpy as np  # noqa: E402
import scipy.sparse.linalg as spla  # noqa: E402

import fvsolver.linear as fv_linear  # noqa: E402
from fvsolver.case.build import build  # noqa: E402
from fvsolver.case.loader import Case, _freeze, validate_data  # noqa: E402
from fvsolver.stepper import TimeStepper  # noqa: E402

DEMO = ROOT / "cases" / "demo.toml"
RUNNING = ROOT / "cases" / "running_device.toml"
MESH_KEYS = ("glass_cells", "cap_cells", "polar_cells", "neck_cells")


def demo_case(factor: int, seconds: float, path: Path = DEMO) -> Case:
    data = tomllib.loads(path.read_text())
    for k in MESH_KEYS:
        data["mesh"][k] *= factor
    data["time"]["end"] = seconds
    data["output"] = {"field_count": 0}
    resolved, problems = validate_data(data)
    assert not problems, problems
    return Case(None, _freeze(resolved), "", "bench")


class Timed:
    """Wraps a callable and adds up its wall time."""

    def __init__(self, fn):
        self.fn, self.seconds, self.calls = fn, 0.0, 0

    def __call__(self, *args, **kwargs):
        t0 = time.perf_counter()
        try:
            return self.fn(*args, **kwargs)
        finally:
            self.seconds += time.perf_counter() - t0
            self.calls += 1


def median_ms(fn, repeats: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return 1e3 * statistics.median(times), out


FLOOR_ORDERINGS = ("MMD_AT_PLUS_A", "MMD_ATA", "COLAMD")


def floor_costs(J, repeats: int, order=None) -> dict:
    """Bare splu of the bordered Jacobian with each ordering (with and without SymmetricMode), and
    with fvsolver's kept ordering ``order`` applied beforehand: the cheapest factorisation and
    solve, ms (median of ``repeats`` each)."""
    A = fv_linear._system(J)
    # the same rows scaled as fvsolver scales them (weak diagonals lifted): without it SuperLU pivots
    # off the diagonal on the bordered rows and the bare factor fills up to 3 times more
    rho = fv_linear.row_scale(A)
    if rho is not None:
        A = A.__class__((A.data * rho[A.indices], A.indices, A.indptr), shape=A.shape)
    b = np.random.default_rng(1).normal(size=A.shape[0])
    best, tuned = None, float("nan")
    if order is not None and len(order) == A.shape[0]:
        P = A[order][:, order].tocsc()
        # SuperLU's own panel and supernode sizes: the floor is splu as it comes
        bare = {k: v for k, v in fv_linear._PRE_ORDERED.items() if k not in ("panel_size", "relax")}
        t_f, lu = median_ms(lambda: spla.splu(P, **bare), repeats)
        t_s, _ = median_ms(lambda: lu.solve(b), max(repeats, 5))
        best = dict(ordering="fvsolver's", factor_ms=t_f, solve_ms=t_s, fill=int(lu.L.nnz + lu.U.nnz))
        # and with fvsolver's panel and supernode sizes (printed beside the floor, not part of it)
        tuned, _ = median_ms(lambda: spla.splu(P, **fv_linear._PRE_ORDERED), repeats)
    for ordering in FLOOR_ORDERINGS:
        for symmetric in (False, True):
            kw = dict(permc_spec=ordering)
            if symmetric:
                kw.update(diag_pivot_thresh=0.1, options=dict(SymmetricMode=True))
            try:
                t_f, lu = median_ms(lambda: spla.splu(A, **kw), repeats)
            except RuntimeError:
                continue
            t_s, _ = median_ms(lambda: lu.solve(b), max(repeats, 5))
            label = ordering + ("+sym" if symmetric else "")
            cand = dict(ordering=label, factor_ms=t_f, solve_ms=t_s, fill=int(lu.L.nnz + lu.U.nnz))
            if best is None or t_f + t_s < best["factor_ms"] + best["solve_ms"]:
                best = cand
    best["tuned_factor_ms"] = tuned
    return best


def window_ms(factor: int, seconds: float, path: Path = DEMO) -> float:
    """ms per accepted step of one uninstrumented run from a fresh set-up to ``seconds``."""
    setup = build(demo_case(factor, seconds, path))
    stepper = TimeStepper(setup.problem, setup.initial, 0.0, seconds, setup.options)
    t0 = time.perf_counter()
    while stepper.step():
        pass
    return 1e3 * (time.perf_counter() - t0) / stepper.counters.steps


def bench(factor: int, seconds: float, repeats: int, path: Path = DEMO) -> dict:
    # the step's cost: the median of `repeats` runs without wrappers (as the floor is a median);
    # the instrumented run below gives the shares, counters and the Jacobian for the floor
    windows = [window_ms(factor, seconds, path) for _ in range(repeats)]
    setup = build(demo_case(factor, seconds, path))
    problem = setup.problem
    stepper = TimeStepper(problem, setup.initial, 0.0, seconds, setup.options)
    evaluate = Timed(problem.evaluate)
    problem.evaluate = evaluate
    keeper_run = stepper._factorise
    factorise = Timed(keeper_run)
    stepper._factorise = factorise
    t0 = time.perf_counter()
    while stepper.step():
        pass
    stepping = time.perf_counter() - t0
    assert stepper.status == "finished", stepper.message
    del problem.evaluate  # back to the class's method
    c = stepper.counters

    ev = problem.evaluate(stepper.y, stepper.t)
    _, dm = problem.capacity(stepper.y)
    J = problem.jacobian(1.5, stepper.last_dt, dm, ev)
    # the low-rank blocks formed densely take minutes to factorise beyond about 10k cells: left out there
    formed = J.tocsr().tocsc() if problem.n_cells < 10000 else None
    t_formed, lu_formed = (median_ms(lambda: spla.splu(formed, **fv_linear.SPLU_OPTIONS), repeats)
                           if formed is not None else (float("nan"), None))
    t_bordered, f_bordered = median_ms(lambda: fv_linear.factorise(J), repeats)
    keeper = fv_linear.Factoriser()
    keeper(J)
    t_kept, f_kept = median_ms(lambda: keeper(J), repeats)
    b = np.random.default_rng(0).normal(size=problem.n)
    x_formed = lu_formed.solve(b) if lu_formed is not None else f_bordered.solve(b)
    diff = float(np.max(np.abs(f_kept.solve(b) - x_formed)) / np.max(np.abs(x_formed)))
    assert diff < 1e-8, diff
    floor = floor_costs(J, repeats, keeper._order)
    newton_per_step = c.newton_iterations / c.steps
    floor_ms = floor["factor_ms"] + newton_per_step * floor["solve_ms"]
    ms_per_step = statistics.median(windows)
    return dict(
        ms_per_step=ms_per_step, ms_per_step_range=(min(windows), max(windows)), floor_ms_per_step=floor_ms, ratio_to_floor=ms_per_step / floor_ms,
        newton_per_step=newton_per_step, newton_failures=c.newton_failures, floor=floor,
        orderings=keeper_run.orderings, time_to_end_s=stepper.t,
        case=path.stem, cells=problem.n_cells, unknowns=problem.n, wall_faces=len(problem.inner),
        steps=c.steps, newton=c.newton_iterations, factorisations=c.factorisations,
        stepping=stepping, t_eval=evaluate.seconds, t_fact=factorise.seconds,
        t_formed=t_formed, t_bordered=t_bordered, t_kept=t_kept,
        fill_formed=int(lu_formed.L.nnz + lu_formed.U.nnz) if lu_formed is not None else 0, fill_bordered=f_bordered.fill,
        fill_kept=f_kept.fill, diff=diff,
    )


def whole_run(path: Path) -> dict:
    """A demo run from its start to its end as the command line runs it (no companion runs, no
    outputs): the Newton iterations, factorisations, rejected steps and failures over all its
    steps, the cycle's restarts and the steps retaken as faces dry included."""
    from fvsolver.case import load_case
    from fvsolver.pipeline import run

    start = time.perf_counter()
    s = run(load_case(path), uncertainty=False, plots=False).summary
    wall = time.perf_counter() - start
    return dict(case=path.stem, steps=s["n_steps"], newton_per_step=s["n_newton_iterations"] / s["n_steps"],
                rejected=s["n_rejected_steps"], newton_failures=s["n_newton_failures"], wall_s=wall,
                ms_per_step=1e3 * wall / s["n_steps"],
                answer=s.get("period_s") if s.get("outcome") else s.get("time_to_target_s"))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--factors", default="1,2,4,8", help="mesh refinement factors of the demo head")
    ap.add_argument("--seconds", type=float, default=10.0, help="simulated time before the Jacobian is taken")
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--json", type=Path, default=None, metavar="FILE", help="also write the per-size fields as JSON")
    ap.add_argument("--no-running", action="store_true",
                    help="leave out the running-device demo's row (cases/running_device.toml, its first --seconds)")
    args = ap.parse_args(argv)
    bench(1, 0.2, 1)  # warm-up: numba compiles its kernels on the first run
    window_ms(1, args.seconds)  # and loads those of every path the timed interval takes
    rows = []
    for f in (int(x) for x in args.factors.split(",")):
        r = bench(f, args.seconds, args.repeats)
        rows.append(r)
        print(f"factor {f}: {r['cells']} cells done", file=sys.stderr, flush=True)
    if not args.no_running:
        bench(1, 0.2, 1, RUNNING)
        rows.append(bench(1, args.seconds, args.repeats, RUNNING))
        print(f"running device: {rows[-1]['cells']} cells done", file=sys.stderr, flush=True)
    print("Factorisation of the device Jacobian at t = %g s (median of %d, ms; fill = nnz(L) + nnz(U))"
          % (args.seconds, args.repeats))
    print()
    print("| case | cells | wall faces | formed ms | bordered ms | kept ms | formed / kept | bordered / kept "
          "| fill formed | fill kept | max rel. diff of solves |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for r in rows:
        print(f"| {r['case']} | {r['cells']} | {r['wall_faces']} | {r['t_formed']:.1f} | {r['t_bordered']:.1f} | "
              f"{r['t_kept']:.1f} | {r['t_formed'] / r['t_kept']:.2f} | {r['t_bordered'] / r['t_kept']:.2f} | "
              f"{r['fill_formed']:,} | {r['fill_kept']:,} | {r['diff']:.1e} |")
    print()
    print("The run to t = %g s (stepping time; shares of it)" % args.seconds)
    print()
    print("| case | cells | steps | Newton it/step | factorisations/step | stepping s | evaluations | factorisations | rest |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|")
    for r in rows:
        s = r["stepping"]
        print(f"| {r['case']} | {r['cells']} | {r['steps']} | {r['newton'] / r['steps']:.1f} | "
              f"{r['factorisations'] / r['steps']:.1f} | {s:.2f} | {r['t_eval'] / s:.0%} | "
              f"{r['t_fact'] / s:.0%} | {1 - (r['t_eval'] + r['t_fact']) / s:.0%} |")
    print()
    print("Cost per step against its floor (one bare splu of the same Jacobian, best ordering, plus the "
          "run's Newton iterations per step in bare solves)")
    print()
    print("| case | cells | ms/step (median) | range of the runs | floor ms/step | ratio to floor | Newton it/step "
          "| Newton failures | orderings | floor ordering | floor factor ms | floor solve ms "
          "| factor ms, fvsolver's panel and supernode sizes |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|---|---:|---:|---:|")
    for r in rows:
        fl = r["floor"]
        lo, hi = r["ms_per_step_range"]
        print(f"| {r['case']} | {r['cells']} | {r['ms_per_step']:.2f} | {lo:.2f}-{hi:.2f} | {r['floor_ms_per_step']:.2f} | "
              f"{r['ratio_to_floor']:.2f} | "
              f"{r['newton_per_step']:.1f} | {r['newton_failures']} | {r['orderings']} | {fl['ordering']} | "
              f"{fl['factor_ms']:.2f} | {fl['solve_ms']:.3f} | {fl['tuned_factor_ms']:.2f} |")
    whole = [whole_run(DEMO), whole_run(RUNNING)]
    print()
    print("Whole runs, start to end (no companion runs, no outputs; wall s: the whole run, set-up and the cycle's bookkeeping included)")
    print()
    print("| case | steps | Newton it/step | rejected steps | Newton failures | wall s | ms/step | time to target or period (s) |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|")
    for w in whole:
        print(f"| {w['case']} | {w['steps']} | {w['newton_per_step']:.2f} | {w['rejected']} | {w['newton_failures']} | "
              f"{w['wall_s']:.2f} | {w['ms_per_step']:.1f} | {w['answer']:.6g} |")
    if args.json is not None:
        keys = ("case", "cells", "ms_per_step", "ms_per_step_range", "floor_ms_per_step", "ratio_to_floor", "newton_per_step", "newton_failures",
                "unknowns", "steps", "orderings", "factorisations", "fill_kept", "time_to_end_s")
        out = [{k: r[k] for k in keys} | {"floor": r["floor"]} for r in rows]
        args.json.write_text(json.dumps({"seconds": args.seconds, "sizes": out, "whole_runs": whole}, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
