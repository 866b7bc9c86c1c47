"""Whole-process timings of the command line, measured side by side in one run.

    python bench/bench_process.py [--baseline DIR] [--json FILE] [--repeats N] [--skip sweep,cold]

Times, with the interpreter that runs this script (``python -m fvsolver`` from the source
tree's root, so that tree's code runs; a pyenv shim in front of ``fvsolver`` adds its own
~0.1 s, which is not fvsolver's):

- ``--help`` and ``check cases/demo.toml``: the minimum over the repeats (warm: the first call
  is not counted);
- ``run cases/demo.toml`` with its default numerical-uncertainty companion runs and with
  ``--no-uncertainty``, and the same run's phases measured inside one process (imports, set-up,
  stepping, companion runs, plots and report, field files);
- a cold numba cache: ``run --no-uncertainty`` with an empty ``NUMBA_CACHE_DIR`` against the
  same command once that cache is filled; the difference is the kernels' compile time;
- a sweep of 8 runs (``--vary room.relative_humidity=linspace(0.35,0.7,8)``) with ``--jobs 1``
  and ``--jobs 2``: parallel efficiency = T(1 job) / (2 T(2 jobs)), and the sum of the runs' own
  wall times (sweep.csv) against the elapsed time.

With ``--baseline DIR`` (another source tree, e.g. an export of an earlier commit) every timing
is also taken for that tree, interleaved with this one's, so both see the same machine load.
The goals (2-core machine): --help and check under 0.3 s, run under 1.5 s, the sweep's
efficiency at least 85 %.  This is a benchmark, not a test: it prints and never fails.
"""
from __future__ import annotations

import argparse
import csv
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CASE = "cases/demo.toml"
SWEEP_VARY = "room.relative_humidity=linspace(0.35,0.7,8)"

# the phases of one run, measured inside one process (the tree's own modules, wrapped)
PHASES = r"""
import json, sys, time
T0 = time.perf_counter()
import fvsolver.cli
import fvsolver.pipeline as pipeline
imports = time.perf_counter() - T0
import fvsolver.stepper as stepper
import fvsolver.outputs.uncertainty as uncertainty
acc = {"set_up_s": 0.0, "stepping_s": 0.0, "companions_s": 0.0, "plots_and_report_s": 0.0, "field_files_s": 0.0}
inside = []  # a call inside another timed call (a companion run's steps) counts for the outer one
def wrap(owner, name, key):
    f = getattr(owner, name)
    def timed(*a, **k):
        if inside:
            return f(*a, **k)
        inside.append(key)
        t = time.perf_counter()
        try:
            return f(*a, **k)
        finally:
            inside.pop()
            acc[key] += time.perf_counter() - t
    setattr(owner, name, timed)
wrap(stepper.TimeStepper, "step", "stepping_s")
wrap(uncertainty, "estimate", "companions_s")
wrap(pipeline, "build_checked", "set_up_s")
wrap(pipeline.FieldWriter, "write", "field_files_s")
for name in ("_write_plots_and_report", "_finish_plots"):
    if hasattr(pipeline, name):
        wrap(pipeline, name, "plots_and_report_s")
t = time.perf_counter()
code = fvsolver.cli.main(["run", sys.argv[1], "--out", sys.argv[2], "--overwrite", "-q"] + sys.argv[3:])
acc["command_s"] = time.perf_counter() - t
acc["imports_s"] = imports
print(json.dumps(acc))
sys.exit(code)
"""


def _python_env(extra: dict | None = None) -> dict:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "NUMBA_DISABLE_JIT")}
    env.update(extra or {})
    return env


LAST_CPU = {"s": 0.0}  # CPU seconds (user + system) of the last timed command and the processes it waited for


def timed(tree: Path, args: list[str], env: dict | None = None) -> float:
    """Wall seconds of ``python -m fvsolver ARGS`` run from ``tree``'s root."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "fvsolver", *args], cwd=tree, env=_python_env(env),
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    seconds = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    LAST_CPU["s"] = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    if done.returncode != 0:
        raise SystemExit(f"{tree}: fvsolver {' '.join(args)} exited {done.returncode}:\n{done.stderr[-2000:]}")
    return seconds


def side_by_side(trees: dict[str, Path], args_of, repeats: int, warm: bool = True) -> dict[str, dict]:
    """Each tree's minimum and all times over ``repeats`` interleaved calls (one untimed first)."""
    times: dict[str, list[float]] = {name: [] for name in trees}
    cpu: dict[str, list[float]] = {name: [] for name in trees}
    if warm:
        for name, tree in trees.items():
            timed(tree, args_of(name))
    for _ in range(repeats):
        for name, tree in trees.items():
            times[name].append(timed(tree, args_of(name)))
            cpu[name].append(LAST_CPU["s"])
    return {name: {"min_s": min(t), "times_s": [round(x, 3) for x in t], "min_cpu_s": round(min(cpu[name]), 3)}
            for name, t in times.items()}


def phases(tree: Path, out: Path, extra: list[str]) -> dict:
    done = subprocess.run([sys.executable, "-c", PHASES, CASE, str(out), *extra], cwd=tree, env=_python_env(),
                          capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"{tree}: phases failed:\n{done.stderr[-2000:]}")
    return {k: round(v, 3) for k, v in json.loads(done.stdout.strip().splitlines()[-1]).items()}


def cold_compile(tree: Path, scratch: Path) -> dict:
    cache = scratch / f"numba-cache-{tree.name}"
    shutil.rmtree(cache, ignore_errors=True)
    env = {"NUMBA_CACHE_DIR": str(cache)}
    args = ["run", CASE, "--out", str(scratch / "cold"), "--overwrite", "--no-uncertainty", "-q"]
    cold = timed(tree, args, env)
    warm = min(timed(tree, args, env) for _ in range(2))
    return {"cold_s": round(cold, 3), "warm_s": round(warm, 3), "compile_s": round(cold - warm, 3)}


def sweep(tree: Path, scratch: Path, jobs: int, case: str = CASE) -> dict:
    """One sweep, with where its time went: from the launch to the first run's start (start-up),
    the workers' idle time between the first start and the last finish (load balance), and from
    the last finish to the end (the sweep's report, plot and exit).  A run's start is the moment
    its progress line arrived less its own wall time (sweep.csv)."""
    out = scratch / f"sweep-{tree.name}-{jobs}"
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "fvsolver", "sweep", case, "--vary", SWEEP_VARY, "--jobs",
                             str(jobs), "--out", str(out), "--overwrite"], cwd=tree, env=_python_env(),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    arrivals = [time.perf_counter() - start for line in proc.stdout if line.lstrip().startswith("[")]
    _, err = proc.communicate()
    seconds = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode != 0:
        raise SystemExit(f"{tree}: sweep --jobs {jobs} exited {proc.returncode}:\n{err[-2000:]}")
    with open(out / "sweep.csv", newline="") as f:
        runs = [float(r["wall_time_s"]) for r in csv.DictReader(f)]
    # the progress lines arrive in the order the runs finish, which their summary.json files'
    # modification times give too: that pairs each line with its run's wall time
    first_start = min(a - w for a, w in zip(arrivals, _walls_in_finish_order(out, len(arrivals))))
    last_finish = max(arrivals)
    # cpu_s: this process tree's CPU seconds as far as it reaped them (a fork server's workers are
    # reaped by the server, which outlives the sweep: their CPU is not in it)
    return {"elapsed_s": round(seconds, 3),
            "cpu_s": round((after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime), 3),
            "runs": len(runs), "sum_of_runs_s": round(sum(runs), 3), "longest_run_s": round(max(runs), 3),
            "start_up_s": round(first_start, 3),
            "idle_worker_s": round(max(0.0, jobs * (last_finish - first_start) - sum(runs)), 3),
            "tail_s": round(seconds - last_finish, 3)}


def _walls_in_finish_order(out: Path, n: int) -> list[float]:
    """The runs' wall times in the order they finished (each run's summary.json is written as it
    ends: order the run folders by that file's modification time)."""
    with open(out / "sweep.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    finished = sorted(rows, key=lambda r: (out / r["folder"] / "summary.json").stat().st_mtime)
    return [float(r["wall_time_s"]) for r in finished][:n]


def ceiling(tree: Path, scratch: Path, case: str = CASE) -> dict:
    """The parallel efficiency this machine allows right now: one ``run --no-uncertainty`` alone,
    then two independent copies at once; T(alone) / T(pair) is what two fully independent jobs
    reach (1.0 with two free cores; about 0.5 when other processes hold one of two cores)."""
    args = lambda k: [sys.executable, "-m", "fvsolver", "run", case, "--out", str(scratch / f"pair-{k}"),
                      "--overwrite", "--no-uncertainty", "-q"]
    alone = timed(tree, args(0)[3:])
    start = time.perf_counter()
    pair = [subprocess.Popen(args(k), cwd=tree, env=_python_env(), stdout=subprocess.DEVNULL,
                             stderr=subprocess.DEVNULL) for k in (1, 2)]
    if any(p.wait() != 0 for p in pair):
        raise SystemExit(f"{tree}: two runs at once failed")
    both = time.perf_counter() - start
    return {"alone_s": round(alone, 3), "pair_s": round(both, 3), "ceiling": round(alone / both, 3)}


def byte_compile(tree: Path) -> None:
    """Write the tree's bytecode, as an install does: with PYTHONDONTWRITEBYTECODE set (or a tree
    just exported or edited) every call would otherwise compile the changed modules again, and a
    fresh export's every module, which made an exported baseline look 0.3-0.4 s slower to start."""
    subprocess.run([sys.executable, "-m", "compileall", "-q", str(tree / "fvsolver")], check=True,
                   stdout=subprocess.DEVNULL)


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--baseline", type=Path, default=None, help="another source tree, timed side by side")
    p.add_argument("--json", type=Path, default=None, help="also write the results to this JSON file")
    p.add_argument("--repeats", type=int, default=5, help="timed calls of --help and check (run: half)")
    p.add_argument("--sweep-case", default=CASE,
                   help="the case the sweep varies (default: %(default)s; cases/running_device.toml sweeps "
                        "runs of about 20 s each instead of about 1 s)")
    p.add_argument("--skip", default="", help="comma-separated parts to leave out: help,check,run,phases,cold,sweep")
    a = p.parse_args()
    skip = set(filter(None, a.skip.split(",")))
    trees = {"this": ROOT} | ({"baseline": a.baseline.resolve()} if a.baseline else {})
    for tree in trees.values():
        byte_compile(tree)
    scratch = Path(tempfile.mkdtemp(prefix="fvsolver-bench-"))
    results: dict = {"python": sys.version.split()[0], "cpus": os.cpu_count(), "load_before": os.getloadavg()}
    try:
        if "help" not in skip:
            results["help"] = side_by_side(trees, lambda n: ["--help"], a.repeats)
        if "check" not in skip:
            results["check"] = side_by_side(trees, lambda n: ["check", CASE], a.repeats)
        if "run" not in skip:
            r = max(1, a.repeats // 2)
            results["run"] = side_by_side(trees, lambda n: ["run", CASE, "--out", str(scratch / f"run-{n}"),
                                                            "--overwrite", "-q"], r)
            results["run_no_uncertainty"] = side_by_side(
                trees, lambda n: ["run", CASE, "--out", str(scratch / f"run-{n}"), "--overwrite", "--no-uncertainty",
                                  "-q"], r, warm=False)
        if "phases" not in skip:
            results["phases"] = {n: phases(t, scratch / f"phases-{n}", []) for n, t in trees.items()}
        if "cold" not in skip:
            results["cold_numba_cache"] = {n: cold_compile(t, scratch) for n, t in trees.items()}
        if "sweep" not in skip:
            results["sweep"] = {}
            for n, t in trees.items():
                one, two, top = (sweep(t, scratch, 1, a.sweep_case), sweep(t, scratch, 2, a.sweep_case),
                                  ceiling(t, scratch, a.sweep_case))
                results["sweep"][n] = {
                    "case": a.sweep_case, "jobs_1": one, "jobs_2": two,
                    "efficiency": round(one["elapsed_s"] / (2 * two["elapsed_s"]), 3),
                    "machine": top,
                    # the efficiency against what two independent jobs reached at the same time
                    "of_ceiling": round(one["elapsed_s"] / (2 * two["elapsed_s"]) / top["ceiling"], 3),
                    # how well the 2 workers were kept busy: the runs' own wall times over 2 x elapsed
                    "busy_fraction": round(two["sum_of_runs_s"] / (2 * two["elapsed_s"]), 3)}
    finally:
        shutil.rmtree(scratch, ignore_errors=True)
    results["load_after"] = os.getloadavg()
    print(table(results, list(trees)))
    if a.json:
        a.json.write_text(json.dumps(results, indent=2))
    return 0


def table(r: dict, names: list[str]) -> str:
    """The results as a Markdown table, one column per source tree."""
    head = "| measurement | " + " | ".join(names) + " | goal |\n|---|" + "---:|" * len(names) + "---|\n"
    rows = []

    def row(label, values, goal=""):
        rows.append(f"| {label} | " + " | ".join(values) + f" | {goal} |")

    for key, label, goal in (("help", "`--help` (s, min)", "< 0.3 s"), ("check", "`check` demo (s, min)", "< 0.3 s"),
                             ("run", "`run` demo, default (s, min)", "< 1.5 s"),
                             ("run_no_uncertainty", "`run` demo `--no-uncertainty` (s, min)", "< 1.5 s")):
        if key in r:
            row(label, [f"{r[key][n]['min_s']:.2f}" for n in names], goal)
            row(label.replace("(s, min)", "CPU (s, min)"), [f"{r[key][n]['min_cpu_s']:.2f}" for n in names])
    if "phases" in r:
        for k in ("imports_s", "set_up_s", "stepping_s", "companions_s", "plots_and_report_s", "field_files_s",
                  "command_s"):
            row(f"run phase: {k[:-2].replace('_', ' ')} (s)", [f"{r['phases'][n].get(k, 0.0):.2f}" for n in names])
    if "cold_numba_cache" in r:
        row("cold numba cache: compile (s)", [f"{r['cold_numba_cache'][n]['compile_s']:.2f}" for n in names],
            "reported")
    if "sweep" in r:
        s = r["sweep"]
        row("sweep of", [f"`{s[n].get('case', CASE)}`" for n in names])
        row("sweep 8 runs, `--jobs 1` (s)", [f"{s[n]['jobs_1']['elapsed_s']:.2f}" for n in names])
        row("sweep 8 runs, `--jobs 2` (s)", [f"{s[n]['jobs_2']['elapsed_s']:.2f}" for n in names])
        row("sweep parallel efficiency", [f"{100 * s[n]['efficiency']:.0f} %" for n in names], ">= 85 %")
        row("two independent runs at once: T(alone) / T(pair)", [f"{100 * s[n]['machine']['ceiling']:.0f} %"
                                                                  for n in names])
        row("sweep efficiency / that ceiling", [f"{100 * s[n]['of_ceiling']:.0f} %" for n in names])
        for k in ("start_up_s", "idle_worker_s", "tail_s"):
            row(f"sweep `--jobs 2`: {k[:-2].replace('_', ' ')} (s)", [f"{s[n]['jobs_2'][k]:.2f}" for n in names])
            row(f"sweep `--jobs 1`: {k[:-2].replace('_', ' ')} (s)", [f"{s[n]['jobs_1'][k]:.2f}" for n in names])
        row("sweep workers busy (runs' wall / 2 x elapsed)", [f"{100 * s[n]['busy_fraction']:.0f} %" for n in names])
    return head + "\n".join(rows) + f"\n\nload average before {r['load_before']}, after {r['load_after']}"


if __name__ == "__main__":
    sys.exit(main())
