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
