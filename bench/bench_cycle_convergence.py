"""The running-device demo's first tip and periods under mesh and time refinement together.

Two studies (``--study``):

* ``together``: refinement levels 1, 2, 3 multiply every cell count (cells ~ level^2) and divide
  the time tolerance by level^3 and the first step by the level.  The stepper bounds the local
  error of each step (BDF2: ~ dt^3), so its steps shrink as tolerance^(1/3) and its global error,
  ~ dt^2, as tolerance^(2/3): dividing the tolerance by level^3 halves the step with the cell
  size, and both errors fall as level^-2.
* ``time``: the level-1 mesh with the tolerance divided by 1, 8, 64 (steps ~ 1, 1/2, 1/4).

Every level runs the same number of tips (the period's settling is switched off), so cycle k is
compared with cycle k.  For each quantity the three-grid procedure of Celik et al., J. Fluids
Eng. 130 (2008) 078001 gives the apparent order, the extrapolated value and GCI_fine (the
"grid" ratio being the step ratio in the time study).

    python bench/bench_cycle_convergence.py [--study together|time] [--tips 8] [--json FILE]
"""
from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

from fvsolver.case import load_case
from fvsolver.case.loader import with_changes
from fvsolver.pipeline import run
from fvsolver.studies.gci import grid_convergence

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--study", choices=("together", "time"), default="together")
    parser.add_argument("--tips", type=int, default=8)
    parser.add_argument("--base-tolerance", type=float, default=0.0025,
                        help="level 1's time tolerance, K (the demo's 0.02 K steps about 1.5 s at first, outside "
                             "the asymptotic range)")
    parser.add_argument("--json", type=Path, default=None)
    args = parser.parse_args()
    base = load_case(ROOT / "cases" / "running_device.toml")
    runs = []
    for level in (1, 2, 3):
        tol = args.base_tolerance / level**3
        if args.study == "time":
            tol = args.base_tolerance / 8 ** (level - 1)
        case = with_changes(base, {"mesh.refinement": level if args.study == "together" else 1,
                                   "numerics.tolerance": tol,
                                   "numerics.initial_step": base["numerics"]["initial_step"] / level,
                                   "cycle.stop_when_settled": False, "cycle.max_cycles": args.tips - 1,
                                   "output.field_count": 0})
        start = time.perf_counter()
        result = run(case)
        wall = time.perf_counter() - start
        s = result.summary
        runs.append({"level": level, "cells": s["n_cells"], "tolerance_k": tol, "steps": s["n_steps"],
                     "wall_s": wall, "first_tip_s": s["first_tip_s"],
                     "periods_s": [c["period_s"] for c in result.cycles[1:]],
                     "energy_balance": s["energy_balance_relative_error"]})
        print(json.dumps(runs[-1]), flush=True)
    quantities = {"first tip (s)": [r["first_tip_s"] for r in runs]}
    n = min(len(r["periods_s"]) for r in runs)
    for k in range(n):
        quantities[f"period of cycle {k + 2} (s)"] = [r["periods_s"][k] for r in runs]
    if args.study == "time":  # the "grid" is the time step: steps ~ 1, 1/2, 1/4 stand in for cells
        measure = {"sizes": [0.25, 0.5, 1.0]}  # the step, ~ tolerance^(1/3), finest first
        print(f"\n| quantity | tolerance {runs[0]['tolerance_k']:g} K | /8 | /64 | order | extrapolated | GCI fine |")
    else:
        cells = [r["cells"] for r in runs]
        measure = {"cells": cells[::-1]}
        print(f"\n| quantity | level 1 ({cells[0]} cells) | level 2 ({cells[1]}) | level 3 ({cells[2]}) | order | "
              "extrapolated | GCI fine |")
    print("|---|---:|---:|---:|---:|---:|---:|")
    table = []
    for name, values in quantities.items():
        g = grid_convergence(values[::-1], **measure)
        table.append({"quantity": name, "values": values, "order": g.order, "extrapolated": g.extrapolated,
                      "gci_fine": g.gci_fine, "convergence": g.convergence})
        print(f"| {name} | {values[0]:.4f} | {values[1]:.4f} | {values[2]:.4f} | {g.order:.2f} | "
              f"{g.extrapolated:.4f} | {100 * g.gci_fine:.2f} % ({g.convergence}) |")
    if args.json:
        args.json.write_text(json.dumps({"runs": runs, "table": table}, indent=2))


if __name__ == "__main__":
    main()
