"""Sparse direct solves with a reusable factorisation (scipy SuperLU)."""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from fvsolver.errors import SolverError

# MMD on A^T + A keeps the fill of these near-symmetric matrices about half of COLAMD's;
# with SymmetricMode SuperLU prefers the diagonal pivots, which are dominant here.
ORDERING = "MMD_AT_PLUS_A"
SPLU_OPTIONS = dict(permc_spec=ORDERING, diag_pivot_thresh=0.1, options=dict(SymmetricMode=True))


def factorise(matrix: sp.spmatrix) -> spla.SuperLU:
    """LU factors of ``matrix``; a singular matrix raises SolverError."""
    try:
        return spla.splu(sp.csc_matrix(matrix), **SPLU_OPTIONS)
    except RuntimeError as exc:  # SuperLU reports an exactly singular factor this way
        raise SolverError(
            f"linear solve: the system matrix is singular ({exc}); a steady problem needs at least "
            "one patch with a fixed temperature, convection or radiation"
        ) from exc


def solve(lu: spla.SuperLU, rhs: np.ndarray) -> np.ndarray:
    x = lu.solve(rhs)
    if not np.isfinite(np.add.reduce(x)):  # one pass: a sum is finite only if every term is
        raise SolverError("linear solve: the solution is not finite; the system matrix is near-singular")
    return x
