"""Face loops of the conduction operator, and the cell loops of an affine time step (numba).

Short symbols only here: P owner, N neighbour, g face conductance (W/K), T temperature,
m stored energy (J), a0 a1 a2 the step's coefficients.
"""
from __future__ import annotations

import numpy as np

from fvsolver.kernels import jit


@jit
def face_conductance(k, owner, neighbour, dist_owner, dist_neighbour, geometry, out):
    """Harmonic-mean face conductance g_f = k_f A_f / (n . d) (series resistances)."""
    for f in range(owner.shape[0]):
        kp = k[owner[f]]
        kn = k[neighbour[f]]
        kf = (dist_owner[f] + dist_neighbour[f]) / (dist_owner[f] / kp + dist_neighbour[f] / kn)
        out[f] = kf * geometry[f]


@jit
def face_flux_sum(T, owner, neighbour, g, out):
    """out[P] += g (T_N - T_P); out[N] -= g (T_N - T_P)."""
    for f in range(owner.shape[0]):
        p = owner[f]
        n = neighbour[f]
        q = g[f] * (T[n] - T[p])
        out[p] += q
        out[n] -= q


@jit
def cell_gradients(T, owner, neighbour, lsq_owner, lsq_neighbour, boundary_cell, lsq_boundary,
                   T_boundary, out):
    """Least-squares cell gradients from neighbour and boundary-face differences."""
    out[:, :] = 0.0
    for f in range(owner.shape[0]):
        p = owner[f]
        n = neighbour[f]
        dt = T[n] - T[p]
        out[p, 0] += lsq_owner[f, 0] * dt
        out[p, 1] += lsq_owner[f, 1] * dt
        out[n, 0] += lsq_neighbour[f, 0] * dt
        out[n, 1] += lsq_neighbour[f, 1] * dt
    for b in range(boundary_cell.shape[0]):
        p = boundary_cell[b]
        dt = T_boundary[b] - T[p]
        out[p, 0] += lsq_boundary[b, 0] * dt
        out[p, 1] += lsq_boundary[b, 1] * dt


@jit
def correction_flux_sum(grad, owner, neighbour, conductivity_face, weight_owner, tangent, out):
    """Non-orthogonal correction k_f (grad T)_f . (S - E), added to owner, taken from neighbour."""
    for f in range(owner.shape[0]):
        p = owner[f]
        n = neighbour[f]
        w = weight_owner[f]
        gx = w * grad[p, 0] + (1.0 - w) * grad[n, 0]
        gy = w * grad[p, 1] + (1.0 - w) * grad[n, 1]
        q = conductivity_face[f] * (gx * tangent[f, 0] + gy * tangent[f, 1])
        out[p] += q
        out[n] -= q


@jit
def fill_jacobian(data, diag_pos, owner_pos, neighbour_pos, owner, neighbour, diag, g, dt):
    """CSR values of J = diag - dt * dF/dT for the two-point operator (symmetric)."""
    data[:] = 0.0
    for i in range(diag.shape[0]):
        data[diag_pos[i]] = diag[i]
    for f in range(g.shape[0]):
        a = dt * g[f]
        data[diag_pos[owner[f]]] += a
        data[diag_pos[neighbour[f]]] += a
        data[owner_pos[f]] -= a
        data[neighbour_pos[f]] -= a


@jit
def affine_rhs(m0, m1, rate, a01, a2, dt, out):
    """out = -(((a0 + a1) m0 - dt F) + a2 m1): minus the residual of an affine step at y_n
    (the order of the operations is the NumPy sequence's, so the result is the same bit for bit)."""
    for i in range(out.shape[0]):
        out[i] = -((a01 * m0[i] - dt * rate[i]) + a2 * m1[i])


@jit
def affine_update(y0, delta, capacity, m0, m1, inflow, a0, a1, a2, dt, y, m, rate):
    """The state after an affine step's solve: y = y0 + delta, m = m0 + C delta and the rate
    dt F(y) = a0 m + a1 m0 + a2 m1 that the step's own equation gives; returns the stored
    change sum(C delta) and the heat in, inflow . y."""
    stored = 0.0
    heat = 0.0
    for i in range(y0.shape[0]):
        change = capacity[i] * delta[i]
        y[i] = y0[i] + delta[i]
        m[i] = m0[i] + change
        rate[i] = ((a0 * m[i] + a1 * m0[i]) + a2 * m1[i]) / dt
        stored += change
        heat += inflow[i] * y[i]
    return stored, heat


@jit
def gross_exchange(T, cells, slope, reference):
    """sum |slope (T - reference)| over the boundary cells: the linear part of the gross
    boundary exchange of an affine problem (W)."""
    total = 0.0
    for j in range(cells.shape[0]):
        c = cells[j]
        total += abs(slope[j] * (T[c] - reference[c]))
    return total


@jit
def stored_energy(T, volumes, density, heat_capacity, reference, out):
    """out = V (rho (c (T - T_ref))), J, per cell (a material whose rho c is one number has
    rho = rho c and c = 1, exactly the same product)."""
    for i in range(T.shape[0]):
        out[i] = volumes[i] * (density[i] * (heat_capacity[i] * (T[i] - reference)))
