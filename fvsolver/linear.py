"""Sparse direct solves with a reusable factorisation (scipy SuperLU).

A Jacobian may come as a plain sparse matrix or as a :class:`LowRankUpdate` ``A + U W^T``: a
sparse part and a few dense couplings (every vapour-space wall face to the mean wall
temperature, say). The update is never formed: it is factorised through the bordered system

.. math:: \\begin{pmatrix} A & U \\\\ W^T & -I \\end{pmatrix}
          \\begin{pmatrix} x \\\\ s \\end{pmatrix} = \\begin{pmatrix} b \\\\ 0 \\end{pmatrix}
          \\quad\\Longrightarrow\\quad (A + U W^T)\\, x = b,

which keeps the factor sparse where the product would put a dense k x k block per coupling.

A :class:`Factoriser` factorises a sequence of matrices of one sparsity pattern (the Newton
Jacobians of a run): it computes the fill-reducing ordering once and hands SuperLU the
symmetrically permuted matrix afterwards, which saves the ordering's share of each
factorisation (about 40 % on the device head). Pivoting is still SuperLU's, so any matrix of
the pattern is factorised correctly; only its fill could differ from a fresh ordering's.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from fvsolver.errors import SolverError

# MMD on A^T + A keeps the fill of these near-symmetric matrices about half of COLAMD's;
# with SymmetricMode SuperLU prefers the diagonal pivots, which are dominant here.
ORDERING = "MMD_AT_PLUS_A"
SPLU_OPTIONS = dict(permc_spec=ORDERING, diag_pivot_thresh=0.1, options=dict(SymmetricMode=True))
_PRE_ORDERED = dict(SPLU_OPTIONS, permc_spec="NATURAL")


@dataclass(frozen=True)
class LowRankUpdate:
    """The matrix ``base + left @ right.T`` with ``left`` and ``right`` of a few columns.

    base : (n, n) sparse
    left, right : (n, k) sparse, k small (one column per dense coupling)
    """

    base: sp.csr_matrix
    left: sp.csr_matrix
    right: sp.csr_matrix

    def __post_init__(self):
        n = self.base.shape[0]
        if self.left.shape != self.right.shape or self.left.shape[0] != n:
            raise ValueError(f"LowRankUpdate: base {self.base.shape}, left {self.left.shape} and "
                             f"right {self.right.shape} do not fit together; left and right must be (n, k)")

    @property
    def shape(self) -> tuple[int, int]:
        return self.base.shape

    @property
    def rank(self) -> int:
        return self.left.shape[1]

    def __matmul__(self, x: np.ndarray) -> np.ndarray:
        return self.base @ x + self.left @ (self.right.T @ x)

    def tocsr(self) -> sp.csr_matrix:
        """The product formed explicitly (dense blocks included): for tests and small checks."""
        return (self.base + self.left @ self.right.T).tocsr()

    def bordered(self) -> sp.csc_matrix:
        k = self.rank
        return sp.bmat([[self.base, self.left], [self.right.T, -sp.identity(k)]], format="csc")


class Factor:
    """LU factors of an (n, n) system, possibly bordered and symmetrically pre-ordered.

    ``solve(rhs)`` returns x with ``matrix @ x = rhs`` for the matrix that was factorised.
    """

    def __init__(self, lu: spla.SuperLU, n: int, order: np.ndarray | None = None):
        self.lu, self.n, self.order = lu, n, order
        self._m = lu.shape[0]
        # the plain case (not bordered, not pre-ordered) is SuperLU's own solve, nothing around it
        if self._m == n and order is None:
            self.solve = lu.solve

    @property
    def shape(self) -> tuple[int, int]:
        return (self.n, self.n)

    @property
    def fill(self) -> int:
        """nnz(L) + nnz(U) of the factor (bordered system included)."""
        return int(self.lu.L.nnz + self.lu.U.nnz)

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        m = self._m
        b = rhs if m == self.n else np.concatenate([rhs, np.zeros(m - self.n)])
        if self.order is None:
            return self.lu.solve(b)[: self.n]
        x = np.empty(m)
        x[self.order] = self.lu.solve(b[self.order])
        return x[: self.n]


def _splu(matrix: sp.csc_matrix, options: dict) -> spla.SuperLU:
    try:
        return spla.splu(matrix, **options)
    except RuntimeError as exc:  # SuperLU reports an exactly singular factor this way
        raise SolverError(
            f"linear solve: the system matrix is singular ({exc}); a steady problem needs at least "
            "one patch with a fixed temperature, convection or radiation"
        ) from exc


def _system(matrix: sp.spmatrix | LowRankUpdate) -> sp.csc_matrix:
    a = matrix.bordered() if isinstance(matrix, LowRankUpdate) else sp.csc_matrix(matrix)
    a.sum_duplicates()  # canonical: sorted indices, so equal patterns compare equal
    return a


def factorise(matrix: sp.spmatrix | LowRankUpdate) -> Factor:
    """LU factors of ``matrix`` with a fresh ordering; a singular matrix raises SolverError."""
    return Factoriser()(matrix)


class Factoriser:
    """Factorises matrices of one sparsity pattern, ordering the pattern only once.

    A matrix of another pattern is ordered afresh and becomes the pattern remembered.
    """

    def __init__(self):
        self._indptr: np.ndarray | None = None
        self._indices: np.ndarray | None = None
        self._order: np.ndarray | None = None
        self.orderings = 0  # fresh orderings computed (a counter for tests and benchmarks)

    def _same_pattern(self, a: sp.csc_matrix) -> bool:
        return (self._indptr is not None and a.indptr.shape == self._indptr.shape
                and a.indices.shape == self._indices.shape
                and np.array_equal(a.indptr, self._indptr) and np.array_equal(a.indices, self._indices))

    def __call__(self, matrix: sp.spmatrix | LowRankUpdate) -> Factor:
        a = _system(matrix)
        n = matrix.shape[0]
        if self._same_pattern(a):
            q = self._order
            return Factor(_splu(a[q][:, q].tocsc(), _PRE_ORDERED), n, q)
        lu = _splu(a, SPLU_OPTIONS)
        self.orderings += 1
        self._indptr, self._indices = a.indptr.copy(), a.indices.copy()
        # SuperLU factorises Pr A Pc; symmetric pre-ordering with the inverse of perm_c
        # reproduces its column order (and so its fill)
        self._order = np.argsort(lu.perm_c)
        return Factor(lu, n)


def solve(lu: Factor, rhs: np.ndarray) -> np.ndarray:
    x = lu.solve(rhs)
    if not np.isfinite(np.add.reduce(x)):  # one pass: a sum is finite only if every term is
        raise SolverError("linear solve: the solution is not finite; the system matrix is near-singular")
    return x
