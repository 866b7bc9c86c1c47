"""Geometry of the finite-volume stencil, computed once per mesh.

Two-point fluxes with an over-relaxed non-orthogonal correction:

.. math:: F_f = k_f \\frac{A_f}{\\mathbf n_f\\cdot\\mathbf d_f}(T_N - T_P)
          + k_f\\,(\\nabla T)_f\\cdot(\\mathbf S_f - \\mathbf E_f),
          \\quad \\mathbf E_f = \\frac{A_f}{\\mathbf n_f\\cdot\\mathbf d_f}\\mathbf d_f

with the harmonic (series-resistance) face conductivity
:math:`k_f = (\\delta_P + \\delta_N)/(\\delta_P/k_P + \\delta_N/k_N)` and least-squares
cell gradients (exact for linear fields).  On orthogonal meshes S - E vanishes and the
correction is skipped.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from fvsolver.deferred import deferred
from fvsolver.mesh.core import Mesh, distinct

sp = deferred("scipy.sparse", "sp", globals())  # the pattern's matrix is formed when first asked for

ORTHOGONAL_TOLERANCE = 1e-10  # |S - E| / |S| below this counts as orthogonal, at the least
# how many times its own rounding bound a face's |S - E| / |S| must exceed to count as non-orthogonal
ROUNDING_MARGIN = 8.0


@dataclass(frozen=True)
class Stencil:
    """Per-face geometric coefficients and the Jacobian's sparsity pattern.

    Attributes
    ----------
    geometry : (n_faces,) m, A_f / (n_f . d_f)
    dist_owner, dist_neighbour : (n_faces,) m, normal distances from the centres to the face
    weight_owner : (n_faces,) interpolation weight of the owner's value at the face
    tangent : (n_faces, 2) m2, S_f - E_f
    nonorthogonal : bool, whether any interior face needs the correction
    boundary_nonorthogonal : bool, whether any boundary face's normal misses its cell centre
    boundary_distance : (n_boundary,) m, normal distance from cell centre to boundary face
    boundary_offset : (n_boundary, 2) m, from the cell centre to the foot of the face normal
    lsq_owner, lsq_neighbour : (n_faces, 2) 1/m, least-squares gradient weights
    lsq_boundary : (n_boundary, 2) 1/m (zero on symmetry faces, which act as mirrors)
    pattern_indptr, pattern_indices : the pattern's (diagonal + face pairs) canonical CSR structure
    pattern : that structure as a CSR matrix of zeros (formed when first read: a set-up that is
        only checked never imports scipy.sparse)
    diag_pos, owner_pos, neighbour_pos : positions of (P,P), (P,N), (N,P) entries in ``pattern.data``
    """

    geometry: np.ndarray
    dist_owner: np.ndarray
    dist_neighbour: np.ndarray
    weight_owner: np.ndarray
    tangent: np.ndarray
    nonorthogonal: bool
    boundary_distance: np.ndarray
    boundary_offset: np.ndarray
    lsq_owner: np.ndarray
    lsq_neighbour: np.ndarray
    lsq_boundary: np.ndarray
    pattern_indptr: np.ndarray
    pattern_indices: np.ndarray
    diag_pos: np.ndarray
    owner_pos: np.ndarray
    neighbour_pos: np.ndarray
    max_nonorthogonality_deg: float
    boundary_nonorthogonal: bool = False

    @cached_property
    def pattern(self) -> sp.csr_matrix:
        n = self.pattern_indptr.size - 1
        return sp.csr_matrix((np.zeros(self.pattern_indices.size), self.pattern_indices, self.pattern_indptr),
                             shape=(n, n))


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return a[:, 0] * b[:, 0] + a[:, 1] * b[:, 1]


def centroid_rounding(nodes: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """A bound on the rounding error of each cell's area centroid, m.

    The centroid (``mesh.core.polygon_metrics``) is summed about the cell's first node
    :math:`x_0`: :math:`c = x_0 + \\sum_k (x_k + x_{k+1}) \\times_k / (6A)`. Its rounding is that of
    the local coordinates (cell-sized), of the shoelace sums over ``A`` and of adding back
    :math:`x_0`, so it grows with the coordinates' magnitude, not only with the cell size.

    Returns
    -------
    (n_cells,) m, a bound of |computed - exact| for either coordinate
    """
    x0 = nodes[cells[:, 0]]
    x = nodes[cells, 0] - x0[:, None, 0]
    y = nodes[cells, 1] - x0[:, None, 1]
    xn = np.roll(x, -1, axis=1)
    yn = np.roll(y, -1, axis=1)
    size = (np.abs(x * yn) + np.abs(xn * y)).sum(axis=1)  # rounding scale of the cross products
    area = np.abs(0.5 * (x * yn - xn * y).sum(axis=1))
    local = np.maximum(np.abs(x).max(axis=1), np.abs(y).max(axis=1))
    # the shoelace numerator (|x_k + x_k+1| <= 2 local) and the area's own relative rounding
    shoelace = (2.0 * local * size / 6.0 + local * 0.5 * size) / np.maximum(area, 1e-300)
    # the local coordinates' own rounding and adding back the first node
    offset = 3.0 * local + np.abs(x0).max(axis=1)
    return np.finfo(float).eps * (shoelace + offset)


def build_stencil(mesh: Mesh, symmetry_faces: np.ndarray) -> Stencil:
    """Precompute the stencil of ``mesh``.

    Parameters
    ----------
    symmetry_faces : (n_boundary,) bool
        Boundary faces that act as mirrors in the gradient reconstruction.
    """
    xp = mesh.cell_centres[mesh.owner]
    xn = mesh.cell_centres[mesh.neighbour]
    n = mesh.face_normals
    d = xn - xp
    nd = _dot(n, d)
    geometry = mesh.face_areas / nd
    dist_owner = np.maximum(_dot(mesh.face_centres - xp, n), 0.05 * nd)
    dist_neighbour = np.maximum(_dot(xn - mesh.face_centres, n), 0.05 * nd)
    weight_owner = dist_neighbour / (dist_owner + dist_neighbour)
    tangent = mesh.face_areas[:, None] * n - geometry[:, None] * d
    rel = np.hypot(tangent[:, 0], tangent[:, 1]) / np.maximum(mesh.face_areas, 1e-300)
    # a face counts as orthogonal when |S - E| / |S| is within what the rounding of its two centres
    # can produce (|delta d| / |d|): fine plain rectangles then keep the two-point stencil
    rounding = centroid_rounding(mesh.nodes, mesh.cells)
    allowed = np.maximum(ORTHOGONAL_TOLERANCE, ROUNDING_MARGIN * (rounding[mesh.owner] + rounding[mesh.neighbour])
                         / np.maximum(np.hypot(d[:, 0], d[:, 1]), 1e-300))
    nonorth = bool(np.any(rel > allowed))
    angle = np.degrees(np.arccos(np.clip(nd / np.hypot(d[:, 0], d[:, 1]), -1.0, 1.0)))

    bc = mesh.boundary_cell
    xb = mesh.boundary_centres
    nb = mesh.boundary_normals
    db = xb - mesh.cell_centres[bc]
    bdist = _dot(db, nb)
    boffset = db - bdist[:, None] * nb
    # the same scale-aware test for the boundary faces: the offset must exceed what the rounding
    # of the cell centre and of the face centre (~ eps |x_b|) can produce
    eps = np.finfo(float).eps
    allowed_b = np.maximum(ORTHOGONAL_TOLERANCE * np.abs(bdist),
                           ROUNDING_MARGIN * (rounding[bc] + 4.0 * eps * np.abs(xb).max(axis=1)))
    boundary_nonorth = bool(np.any(np.abs(boffset) > allowed_b[:, None]))

    # least squares: M_P = sum w d d^T over neighbours, boundary faces and mirror ghosts
    ncell = mesh.n_cells
    sym = np.asarray(symmetry_faces, dtype=bool)
    dghost = np.where(sym[:, None], 2.0 * bdist[:, None] * nb, db)
    w_face = 1.0 / _dot(d, d)
    w_b = 1.0 / _dot(dghost, dghost)
    m = np.zeros((ncell, 3))
    for arr, cells, w in ((d, mesh.owner, w_face), (d, mesh.neighbour, w_face), (dghost, bc, w_b)):
        m[:, 0] += np.bincount(cells, w * arr[:, 0] ** 2, ncell)
        m[:, 1] += np.bincount(cells, w * arr[:, 0] * arr[:, 1], ncell)
        m[:, 2] += np.bincount(cells, w * arr[:, 1] ** 2, ncell)
    det = m[:, 0] * m[:, 2] - m[:, 1] ** 2
    inv = np.column_stack([m[:, 2], -m[:, 1], m[:, 0]]) / det[:, None]

    def solve(cells, vec, w):
        i = inv[cells]
        return w[:, None] * np.column_stack(
            [i[:, 0] * vec[:, 0] + i[:, 1] * vec[:, 1], i[:, 1] * vec[:, 0] + i[:, 2] * vec[:, 1]]
        )

    lsq_owner = solve(mesh.owner, d, w_face)
    lsq_neighbour = solve(mesh.neighbour, d, w_face)  # (x_P - x_N)(T_P - T_N) = d (T_N - T_P)
    lsq_boundary = np.where(sym[:, None], 0.0, solve(bc, db, w_b))

    rows = np.concatenate([np.arange(ncell), mesh.owner, mesh.neighbour])
    cols = np.concatenate([np.arange(ncell), mesh.neighbour, mesh.owner])
    keys = rows * ncell + cols
    uniq = distinct(keys)  # sorted: row by row, each row's columns ascending (canonical CSR)
    indptr = np.zeros(ncell + 1, dtype=np.int32)
    np.cumsum(np.bincount(uniq // ncell, minlength=ncell), out=indptr[1:])
    pos = np.searchsorted(uniq, keys)
    nf = mesh.n_faces
    return Stencil(
        geometry=geometry,
        dist_owner=dist_owner,
        dist_neighbour=dist_neighbour,
        weight_owner=weight_owner,
        tangent=np.ascontiguousarray(tangent),
        nonorthogonal=nonorth,
        boundary_distance=bdist,
        boundary_offset=np.ascontiguousarray(boffset),
        lsq_owner=np.ascontiguousarray(lsq_owner),
        lsq_neighbour=np.ascontiguousarray(lsq_neighbour),
        lsq_boundary=np.ascontiguousarray(lsq_boundary),
        pattern_indptr=indptr,
        pattern_indices=(uniq % ncell).astype(np.int32),
        diag_pos=pos[:ncell].copy(),
        owner_pos=pos[ncell:ncell + nf].copy(),
        neighbour_pos=pos[ncell + nf:].copy(),
        max_nonorthogonality_deg=float(angle.max()) if len(angle) else 0.0,
        boundary_nonorthogonal=boundary_nonorth,
    )
