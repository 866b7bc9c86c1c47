#!/usr/bin/env python
"""Do two source trees give the same answers? The check that goes with every speed change.

    python bench/bench_answers.py --baseline DIR [--json FILE] [--rtol 1e-6] [--temperature-tol 1e-6]

For this tree and a baseline tree (an export of an earlier commit: ``git archive COMMIT | tar -x
-C DIR``), each as its own process (``python -m fvsolver`` from the tree's root):

* ``run`` of ``cases/demo.toml`` and ``cases/running_device.toml`` (``--no-uncertainty``), then
  this tree's ``fvsolver compare`` of the two output folders at the tolerances given (far tighter
  than compare's defaults: a speed change is to move the answers by round-off and by the step
  sequence's own sensitivity, not by a model change). It prints compare's table: the time to
  target, the running device's first tip, period, water per dip, and the fields and histories
  worst cell or step;
* ``verify``: every verification case's finest error and observed order, side by side, and
  the largest relative difference of the errors.

It prints and exits 0 either way; read the tables. (A changed step sequence moves a run's
answers by up to its time-step uncertainty, which the run's report states; that is not a change
of the model.)
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CASES = ("cases/demo.toml", "cases/running_device.toml")


def _env() -> dict:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "NUMBA_DISABLE_JIT")}
    env["MPLBACKEND"] = "Agg"
    return env


def fvsolver(tree: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "fvsolver", *args], cwd=tree, env=_env(), capture_output=True,
                          text=True)


def verification(tree: Path, out: Path) -> dict:
    done = fvsolver(tree, "verify", "-q", "--out", str(out))
    if done.returncode != 0:
        raise SystemExit(f"{tree}: verify exited {done.returncode}:\n{done.stdout[-2000:]}{done.stderr[-2000:]}")
    data = json.loads((out / "verification.json").read_text())
    return {(c["case"], k["norm"]): (k["error"], k.get("observed_order")) for c in data["cases"] for k in c["checks"]}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--baseline", type=Path, required=True, help="the other source tree")
    ap.add_argument("--rtol", default="1e-6", help="compare's relative tolerance of times and pressures")
    ap.add_argument("--temperature-tol", default="1e-6", help="compare's tolerance of temperatures, K")
    ap.add_argument("--json", type=Path, default=None, help="also write the results to this JSON file")
    a = ap.parse_args(argv)
    trees = {"this": ROOT, "baseline": a.baseline.resolve()}
    scratch = Path(tempfile.mkdtemp(prefix="fvsolver-answers-"))
    results: dict = {"cases": {}}
    for case in CASES:
        folders = {}
        for name, tree in trees.items():
            folders[name] = scratch / f"{Path(case).stem}-{name}"
            done = fvsolver(tree, "run", case, "--out", str(folders[name]), "--overwrite", "--no-uncertainty", "-q")
            if done.returncode != 0:
                raise SystemExit(f"{tree}: run {case} exited {done.returncode}:\n{done.stderr[-2000:]}")
        report = scratch / f"{Path(case).stem}-compare.json"
        done = fvsolver(ROOT, "compare", str(folders["this"]), str(folders["baseline"]), "--rtol", a.rtol,
                        "--temperature-tol", a.temperature_tol, "--history-rtol", a.rtol, "--json", str(report))
        print(f"## {case}: this tree against the baseline (compare --rtol {a.rtol} --temperature-tol "
              f"{a.temperature_tol} K; exit {done.returncode})\n")
        print(done.stdout)
        results["cases"][case] = {"exit": done.returncode,
                                  "checks": json.loads(report.read_text()) if report.exists() else None}
    errors = {name: verification(tree, scratch / f"verify-{name}") for name, tree in trees.items()}
    print("## verification cases: finest error and observed order\n")
    print("| case | norm | error (this) | error (baseline) | relative difference | order (this) | order (baseline) |")
    print("|---|---|---:|---:|---:|---:|---:|")
    worst = 0.0
    for key in errors["this"]:
        e1, p1 = errors["this"][key]
        e0, p0 = errors["baseline"].get(key, (float("nan"), None))
        rel = abs(e1 - e0) / max(abs(e0), 1e-300)
        if "balance" not in key[1] and "continuity" not in key[1]:  # those are round-off themselves
            worst = max(worst, rel)
        order = lambda p: f"{p:.3f}" if p is not None else "-"
        print(f"| {key[0]} | {key[1]} | {e1:.6e} | {e0:.6e} | {rel:.1e} | {order(p1)} | {order(p0)} |")
    print(f"\nlargest relative difference of a discretisation error (balances and continuity left out: they "
          f"are round-off): {worst:.1e}")
    results["verification_worst_relative_difference"] = worst
    if a.json:
        a.json.write_text(json.dumps(results, indent=2, default=str))
    return 0


if __name__ == "__main__":
    sys.exit(main())
