"""History columns a device run adds beside the monitor's: the evaporative cooling power and the
condensation split into its two directions.

The net condensation rate in the head jumps whenever a warm inner face runs out of condensate:
its re-evaporation stops at once while the cold faces keep condensing.  Showing the condensing
and re-evaporating parts separately makes those steps readable instead of a sawtooth.
"""
from __future__ import annotations

import numpy as np

from fvsolver.device.surfaces import WATER_T_MAX, WATER_T_MIN
from fvsolver.properties import water


def device_columns(problem, evaluation) -> dict:
    """Columns of one history row, from a device evaluation (None: zeros).

    Returns
    -------
    dict with ``evaporative_cooling_w`` (W, latent heat carried off by the cap's evaporation),
    ``condensing_rate_kg_s`` (kg/s, faces where vapour condenses) and
    ``re_evaporation_rate_kg_s`` (kg/s, >= 0, faces whose condensate evaporates again)
    """
    if evaluation is None or not hasattr(evaporation := getattr(evaluation, "evaporation", None), "shape"):
        return {"evaporative_cooling_w": 0.0, "condensing_rate_kg_s": 0.0, "re_evaporation_rate_kg_s": 0.0}
    mesh = problem.mesh
    t_s = np.clip(evaluation.surface_temperature[problem.cap_faces], WATER_T_MIN, WATER_T_MAX)
    cooling = float(np.dot(mesh.boundary_areas[problem.cap_faces] * water.latent_heat(t_s), evaporation))
    j = evaluation.condensation * problem.inner_area
    return {"evaporative_cooling_w": cooling, "condensing_rate_kg_s": float(j[j > 0].sum()),
            "re_evaporation_rate_kg_s": float(-j[j < 0].sum())}
