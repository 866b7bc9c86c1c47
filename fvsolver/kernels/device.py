"""The device's per-cell terms of an evaluation in one compiled loop (numba).

Short symbols only here: P a cap cell, v its volume (m3), E the total evaporation (kg/s), W the
cap's pore-water capacity (kg). The Python twin is ``DeviceProblem._water_sensible`` and the
NumPy lines of ``DeviceProblem.evaluate`` it replaces; the tests compare them.
"""
from __future__ import annotations

from fvsolver.kernels import jit


@jit
def device_rates(T, conduction_rate, cells, volumes, charge, evaporation_total, pore_water_capacity, energy_slope,
                 sensible_slope, reservoir_share, reservoir_temperature, reference, inner_area, condensation,
                 first_inventory, rate, sensible, dsensible, per_evaporation, wall_flow):
    """The water's sensible enthalpy in the cap cells and the rates of the cells and inventories.

    charge (a cap that holds its water): water leaving cell P takes its share of the stored
    sensible energy, out = v (a (T_P - T_ref)) (-E / W), a = ``energy_slope`` (d(volumetric
    energy)/ds per kelvin); else the reservoir replaces what evaporates, with water at its own
    temperature: out = E (share (T_res - T_P)). Writes sensible, dsensible = d sensible / dT_P and
    per_evaporation = d sensible / dE (n_cells,), rate[:n_cells] = conduction_rate + sensible, the
    inner faces' mass flows wall_flow = A j (kg/s) and rate[first_inventory:] ... = wall_flow.
    """
    n = conduction_rate.shape[0]
    for i in range(n):
        sensible[i] = 0.0
        dsensible[i] = 0.0
        per_evaporation[i] = 0.0
    if charge:
        ds_dt = -evaporation_total / pore_water_capacity
        for i in range(cells.shape[0]):
            P = cells[i]
            de_ds = energy_slope * (T[P] - reference)
            sensible[P] = volumes[i] * de_ds * ds_dt
            dsensible[P] = sensible_slope[i] * ds_dt
            per_evaporation[P] = -volumes[i] * de_ds / pore_water_capacity
    else:
        for i in range(cells.shape[0]):
            P = cells[i]
            per_cell = reservoir_share[i] * (reservoir_temperature - T[P])
            per_evaporation[P] = per_cell
            sensible[P] = evaporation_total * per_cell
            dsensible[P] = -evaporation_total * reservoir_share[i]
    for i in range(n):
        rate[i] = conduction_rate[i] + sensible[i]
    for i in range(inner_area.shape[0]):
        flow = inner_area[i] * condensation[i]
        wall_flow[i] = flow
        rate[first_inventory + i] = flow
