"""The numerical uncertainty of a run's time to target, from two cheaper companion runs.

* time steps: the same mesh at 4 times the error tolerance.  With local error control the
  global error of the step sequence falls as tol^q; q = 1/2 was measured on the demo head
  (tolerances 2e-3, 5e-4, 1e-4: differences 0.023 s and 0.0135 s, a backward-Euler start followed by
  BDF2), so the run's own error is about |t(4 tol) - t(tol)| / (4^q - 1).
* mesh: every ``*_cells`` count of the case divided by r = 1.5 (not below its minimum), the same
  tolerance.  Richardson's estimate with the scheme's formal order p = 2 gives the fine run's
  error |t_coarse - t| / (r^p - 1).

Each estimate is multiplied by the safety factor 1.25 of the grid convergence index (Celik et al.,
J. Fluids Eng. 130, 078001, 2008).  Both companion runs are cheaper than the run itself; they
write nothing.
"""
from __future__ import annotations

import math

TOLERANCE_FACTOR = 4.0
TOLERANCE_ORDER = 0.5
MESH_RATIO = 1.5
MESH_ORDER = 2.0
SAFETY_FACTOR = 1.25


def _quiet(changes: dict) -> dict:
    return {**changes, "output.field_times": [], "output.field_count": 0,
            "target.stop_when_reached": True}


def coarser_mesh(case) -> dict:
    """The ``*_cells`` changes of a mesh coarser by MESH_RATIO in every direction ({} if none)."""
    from fvsolver.case.schema import MESH

    minimum = {k.name: int(k.minimum or 1) for k in MESH.children}
    return {f"mesh.{name}": max(minimum.get(name, 1), round(n / MESH_RATIO))
            for name, n in case["mesh"].items() if name.endswith("_cells") and isinstance(n, int)}


def estimate(case, summary: dict) -> dict:
    """``numerical_uncertainty`` of the summary: per source the estimate in s, relative to the time
    to target, and how it was found; or ``{"reason": ...}`` when it cannot be estimated."""
    from fvsolver.case.loader import with_changes
    from fvsolver.pipeline import run

    t = summary.get("time_to_target_s")
    if t is None or summary.get("status") != "complete":
        return {"reason": "the target was not reached, so there is no time to target to qualify"}
    tol = float(case["numerics"]["tolerance"])
    out: dict = {}
    loose = with_changes(case, _quiet({"numerics.tolerance": TOLERANCE_FACTOR * tol}))
    t_loose = run(loose, None, plots=False).summary["time_to_target_s"]
    if t_loose is not None:
        e = SAFETY_FACTOR * abs(t_loose - t) / (TOLERANCE_FACTOR**TOLERANCE_ORDER - 1.0)
        out["time_steps"] = {"estimate_s": e, "relative": e / t, "companion_s": t_loose,
                             "how": f"against a run at {TOLERANCE_FACTOR:g}x the tolerance ({t_loose:.4g} s)"}
    changes = coarser_mesh(case) if case["geometry"]["shape"] != "mesh_file" else {}
    if changes and any(case["mesh"][k.split(".")[1]] != v for k, v in changes.items()):
        coarse = with_changes(case, _quiet(changes))
        t_coarse = run(coarse, None, plots=False).summary["time_to_target_s"]
        if t_coarse is not None:
            e = SAFETY_FACTOR * abs(t - t_coarse) / (MESH_RATIO**MESH_ORDER - 1.0)
            out["mesh"] = {"estimate_s": e, "relative": e / t, "companion_s": t_coarse,
                           "how": f"against a mesh {MESH_RATIO:g}x coarser ({t_coarse:.4g} s)"}
    else:
        out["mesh"] = {"reason": "the mesh comes from a file or has no cell counts to coarsen"}
    parts = [v["relative"] for v in out.values() if "relative" in v]
    if parts:
        out["total_relative"] = math.sqrt(sum(p * p for p in parts))
    return out
