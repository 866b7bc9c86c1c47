"""Plain NumPy twins of the kernels, for tests and for reading."""
from __future__ import annotations

import numpy as np


def face_conductance(k, owner, neighbour, dist_owner, dist_neighbour, geometry):
    kp, kn = k[owner], k[neighbour]
    return (dist_owner + dist_neighbour) / (dist_owner / kp + dist_neighbour / kn) * geometry


def face_flux_sum(T, owner, neighbour, g, n_cells):
    q = g * (T[neighbour] - T[owner])
    return np.bincount(owner, q, n_cells) - np.bincount(neighbour, q, n_cells)


def cell_gradients(T, owner, neighbour, lsq_owner, lsq_neighbour, boundary_cell, lsq_boundary, T_boundary):
    n = T.shape[0]
    dt = T[neighbour] - T[owner]
    db = T_boundary - T[boundary_cell]
    out = np.zeros((n, 2))
    for c in range(2):
        out[:, c] = (np.bincount(owner, lsq_owner[:, c] * dt, n) + np.bincount(neighbour, lsq_neighbour[:, c] * dt, n)
                     + np.bincount(boundary_cell, lsq_boundary[:, c] * db, n))
    return out


def correction_flux_sum(grad, owner, neighbour, conductivity_face, weight_owner, tangent, n_cells):
    w = weight_owner[:, None]
    gf = w * grad[owner] + (1.0 - w) * grad[neighbour]
    q = conductivity_face * np.einsum("ij,ij->i", gf, tangent)
    return np.bincount(owner, q, n_cells) - np.bincount(neighbour, q, n_cells)


def jacobian_matrix(owner, neighbour, diag, g, dt):
    import scipy.sparse as sp
    n = diag.shape[0]
    a = dt * g
    d = diag + np.bincount(owner, a, n) + np.bincount(neighbour, a, n)
    rows = np.concatenate([np.arange(n), owner, neighbour])
    cols = np.concatenate([np.arange(n), neighbour, owner])
    return sp.csr_matrix((np.concatenate([d, -a, -a]), (rows, cols)), shape=(n, n))


def affine_rhs(m0, m1, rate, a01, a2, dt):
    residual = a01 * m0
    residual -= dt * rate
    residual += a2 * m1
    return -residual


def affine_update(y0, delta, capacity, m0, m1, inflow, a0, a1, a2, dt):
    change = capacity * delta
    y = y0 + delta
    m = m0 + change
    rate = (a0 * m + a1 * m0 + a2 * m1) / dt
    return y, m, rate, float(change.sum()), float(inflow @ y)


def gross_exchange(T, cells, slope, reference):
    return float(np.abs(slope * (T[cells] - reference[cells])).sum())


def stored_energy(T, volumes, density, heat_capacity, reference):
    return volumes * (density * (heat_capacity * (T - reference)))
