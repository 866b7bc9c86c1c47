"""The device's per-cell terms of an evaluation and the heavy blocks of its Jacobian (numba).

``device_rates`` forms the water's sensible enthalpy, the cells' rates and the inner faces' mass
flows (its twin: ``DeviceProblem._water_sensible`` and the NumPy lines of ``_rates``);
``wall_jacobian`` and ``transfer_jacobian`` write the condensing faces' blocks and the outside
coefficients' column straight into a kept assembly's values (their twins: the same blocks given
to ``linear.KeptTriplets`` in ``DeviceProblem._wall_jacobian`` and ``_transfer_coupling``). Every
operation is the NumPy lines' own, in their order, and a sum is NumPy's pairwise sum
(``pairwise_sum``), so the values are the same bit for bit; tests/device/test_device_kernels.py
compares them.

Short symbols only here: P a cap cell, v its volume (m3), E the total evaporation (kg/s), W the
cap's pore-water capacity (kg), m the number of faces.
"""
from __future__ import annotations

import numpy as np

from fvsolver.kernels import jit
# the surface solve's output columns (a change there must touch this file too, or its cached kernels keep the old)
from fvsolver.kernels.surfaces import DM, DM_DC, DM_DP, LATENT


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


@jit
def _block_sum(a, lo, n):
    """NumPy's sum of a[lo:lo + n] for n <= 128: eight partial sums, then the rest in turn."""
    if n < 8:
        res = 0.0
        for i in range(lo, lo + n):
            res += a[i]
        return res
    r0, r1, r2, r3 = a[lo], a[lo + 1], a[lo + 2], a[lo + 3]
    r4, r5, r6, r7 = a[lo + 4], a[lo + 5], a[lo + 6], a[lo + 7]
    i = 8
    end = n - n % 8
    while i < end:
        j = lo + i
        r0 += a[j]
        r1 += a[j + 1]
        r2 += a[j + 2]
        r3 += a[j + 3]
        r4 += a[j + 4]
        r5 += a[j + 5]
        r6 += a[j + 6]
        r7 += a[j + 7]
        i += 8
    res = ((r0 + r1) + (r2 + r3)) + ((r4 + r5) + (r6 + r7))
    while i < n:
        res += a[lo + i]
        i += 1
    return res


@jit
def pairwise_sum(a, lo, n):
    """a[lo:lo + n].sum() as NumPy forms it (pairwise: halves split at a multiple of 8 down to
    blocks of at most 128), so that a sum taken here is NumPy's bit for bit. The halves are walked
    with a stack (a recursive kernel does not survive numba's cache)."""
    if n <= 128:
        return _block_sum(a, lo, n)
    starts = np.empty(128, dtype=np.int64)
    sizes = np.empty(128, dtype=np.int64)
    done = np.zeros(128, dtype=np.bool_)
    sums = np.empty(128)
    top = 0
    starts[0], sizes[0], done[0] = lo, n, False
    depth = 0  # entries on the sums stack
    while top >= 0:
        start, size, split = starts[top], sizes[top], done[top]
        top -= 1
        if size <= 128:
            sums[depth] = _block_sum(a, start, size)
            depth += 1
        elif split:  # both halves summed: combine them
            depth -= 1
            sums[depth - 1] = sums[depth - 1] + sums[depth]
        else:
            half = size // 2
            half -= half % 8
            top += 1
            starts[top], sizes[top], done[top] = start, size, True
            top += 1
            starts[top], sizes[top], done[top] = start + half, size - half, False
            top += 1
            starts[top], sizes[top], done[top] = start, half, False
    return sums[0]


@jit
def wall_jacobian(faces, kappa, g1, terms, area, dp_dm, per_tv, alpha0, dt, work, values, start):
    """The condensing inner faces' entries of the device Jacobian, T_s eliminated per face (the
    blocks of ``DeviceProblem.jacobian`` from (P, m_v) to (m_v, u), in its order and with its
    operations): ten blocks written from values[start] on (nine of len(faces), then one entry).
    kappa, g1 (n_boundary,), terms (n_boundary, OUTPUTS) of the evaluation; area (n_faces,);
    work (2, n_faces). Returns sum(A dJ/dm_v) (NumPy's sum), the m_v row's diagonal part."""
    m = faces.shape[0]
    for i in range(m):
        b = faces[i]
        kap = kappa[b]
        den = kap - g1[b]
        tau = kap / den
        lat = terms[b, LATENT]
        dj_dt = terms[b, DM]
        dj_dp = terms[b, DM_DP]
        dj_dc = terms[b, DM_DC]
        lat_dp = lat * dj_dp
        dts_dp = lat_dp / den
        dts_dc = lat * dj_dc / den
        dJ_dT = dj_dt * tau
        dJ_dm = (dj_dp + dj_dt * dts_dp) * dp_dm
        dJ_dc = dj_dc + dj_dt * dts_dc
        dt_area = dt * area[i]
        out_area = -dt_area
        out_kap = out_area * kap
        flow_dc = dt_area * dJ_dc
        values[start + i] = out_kap * dts_dp * dp_dm
        values[start + m + i] = out_kap * dts_dc
        values[start + 2 * m + i] = dt_area * dJ_dT
        values[start + 3 * m + i] = flow_dc
        values[start + 4 * m + i] = out_area * dJ_dT
        values[start + 5 * m + i] = out_area * dJ_dm
        values[start + 6 * m + i] = alpha0 * area[i] - flow_dc
        dts_dtv = lat_dp * per_tv / den
        dJ_dtv = dj_dp * per_tv + dj_dt * dts_dtv
        values[start + 7 * m + i] = out_kap * dts_dtv
        values[start + 8 * m + i] = out_area * dJ_dtv
        work[0, i] = area[i] * dJ_dtv
        work[1, i] = area[i] * dJ_dm
    values[start + 9 * m] = dt * pairwise_sum(work[0], 0, m)
    return pairwise_sum(work[1], 0, m)


@jit
def transfer_jacobian(faces, area, kappa, g1, t_s, terms, air_temperature, dh, cap, evaporation, dhm, h_m, dt, work,
                      values, start):
    """One outer group's entries of the outside coefficients' column (``DeviceProblem.
    _transfer_coupling``: dq/dt_surf at fixed T_s, T_s eliminated per face), written at
    values[start:start + len(faces)]; on the cap (``cap``) also the total evaporation's change,
    returned (NumPy's sum; else 0). evaporation, work (n_faces,): the faces' m and a work array."""
    m = faces.shape[0]
    minus_dt = -dt
    for i in range(m):
        b = faces[i]
        dq = (air_temperature - t_s[b]) * dh
        if cap:
            dq = dq - terms[b, LATENT] * evaporation[i] * dhm / h_m
        den = kappa[b] - g1[b]
        values[start + i] = minus_dt * area[i] * kappa[b] * dq / den
        if cap:
            dts = dq / den
            work[i] = area[i] * (evaporation[i] * dhm / h_m + terms[b, DM] * dts)
    if cap:
        return pairwise_sum(work, 0, m)
    return 0.0
