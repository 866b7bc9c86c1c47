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
the pattern is factorised correctly; only its fill could differ from a fresh ordering's. The
pattern it keeps is the union of those it has seen: an entry that is exactly zero in one
Jacobian (a wall face that stops re-evaporating) stays in as an explicit zero, so the
ordering is not computed again when faces switch.

Rows whose diagonal is weaker than the largest other entry of its column (the lumped
unknowns' rows: a vapour mass in kg beside energies in J) are scaled up before the
factorisation, as far as the row's other entries allow, so that SuperLU's threshold test
keeps the diagonal pivots the ordering planned for:

.. math:: (R A)\\, x = R\\, b, \\qquad R = \\mathrm{diag}(\\rho), \\quad \\rho_j \\ge 1,

which changes the solution only at round-off level and keeps the fill of the ordering.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from fvsolver.deferred import deferred
from fvsolver.errors import SolverError

# imported by the first factorisation: a set-up that is only checked needs neither
sp = deferred("scipy.sparse", "sp", globals())
spla = deferred("scipy.sparse.linalg", "spla", globals())

# MMD on A^T + A keeps the fill of these near-symmetric matrices about half of COLAMD's;
# with SymmetricMode SuperLU prefers the diagonal pivots, which are dominant here.
ORDERING = "MMD_AT_PLUS_A"
# Columns one at a time (panel_size 1) and no relaxed supernodes (relax 1): the same pivots and
# fill, and factors equal to round-off (1e-17 relative in the solves), in 0.6-0.7 of the time of
# SuperLU's defaults on the device Jacobians from 500 to 110,000 unknowns (bench/README.md): their
# supernodes are too small to pay for the panel bookkeeping.
SPLU_OPTIONS = dict(permc_spec=ORDERING, diag_pivot_thresh=0.1, panel_size=1, relax=1,
                    options=dict(SymmetricMode=True))
_PRE_ORDERED = dict(SPLU_OPTIONS, permc_spec="NATURAL")


@dataclass(frozen=True)
class LowRankUpdate:
    """The matrix ``base + left @ right.T`` with ``left`` and ``right`` of a few columns.

    base : (n, n) sparse
    left, right : (n, k) sparse, k small (one column per dense coupling)
    system : (n + k, n + k) canonical CSC, optional: the bordered system already assembled (a
        :class:`BorderedAssembly` hands it over, so that a factorisation need not build it again)
    """

    base: sp.csr_matrix
    left: sp.csr_matrix
    right: sp.csr_matrix
    system: sp.csc_matrix | None = field(default=None, compare=False, repr=False)

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
        if self.system is not None:
            return self.system
        k = self.rank
        return sp.bmat([[self.base, self.left], [self.right.T, -sp.identity(k)]], format="csc")


class Factor:
    """LU factors of an (n, n) system, possibly bordered and symmetrically pre-ordered.

    ``solve(rhs)`` returns x with ``matrix @ x = rhs`` for the matrix that was factorised.
    """

    def __init__(self, lu: spla.SuperLU, n: int, order: np.ndarray | None = None,
                 row_scale: np.ndarray | None = None, inverse: np.ndarray | None = None):
        self.lu, self.n, self.order, self.row_scale = lu, n, order, row_scale
        self._m = lu.shape[0]
        # the plain case (not bordered, pre-ordered or scaled) is SuperLU's own solve, nothing around it
        if self._m == n and order is None and row_scale is None:
            self.solve = lu.solve
        if order is not None:
            # for the pre-ordered solve (inverse: argsort(order)[:n], kept by a Factoriser)
            self._inverse = np.argsort(order)[:n] if inverse is None else inverse
            self._scale_ordered = None if row_scale is None else row_scale[order]

    @property
    def shape(self) -> tuple[int, int]:
        return (self.n, self.n)

    @property
    def fill(self) -> int:
        """nnz(L) + nnz(U) of the factor (bordered system included)."""
        return int(self.lu.L.nnz + self.lu.U.nnz)

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        # (the plain case's solve is SuperLU's own, set in __init__: the instance does not hold a
        # bound method of itself, a reference cycle that would keep each factor until a collection)
        if self.order is not None:
            # pre-ordered: two gathers, the right-hand side (scaled) in the order and the first n
            # unknowns back from it
            b = np.zeros(self._m)
            b[: self.n] = rhs
            b = b[self.order]
            if self._scale_ordered is not None:
                b *= self._scale_ordered
            return self.lu.solve(b)[self._inverse]
        m = self._m
        b = rhs if m == self.n else np.concatenate([rhs, np.zeros(m - self.n)])
        if self.row_scale is not None:
            b = b * self.row_scale
        return self.lu.solve(b)[: self.n]


def with_data(template: sp.spmatrix, data: np.ndarray) -> sp.spmatrix:
    """A compressed sparse matrix of ``template``'s structure (shared, never to be written) holding
    ``data``: the constructor's checks are skipped, since the structure was checked when the
    template was built (a few microseconds instead of some twenty)."""
    if not hasattr(template, "__dict__") or not hasattr(template, "indptr"):  # pragma: no cover
        return template.__class__((data, template.indices, template.indptr), shape=template.shape)
    out = template.__class__.__new__(template.__class__)
    out.__dict__.update(template.__dict__)
    out.data = data
    return out


def _splu(matrix: sp.csc_matrix, options: dict) -> spla.SuperLU:
    try:
        return spla.splu(matrix, **options)
    except RuntimeError as exc:  # SuperLU reports an exactly singular factor this way
        raise SolverError(
            f"linear solve: the system matrix is singular ({exc}); a steady problem needs at least "
            "one patch with a fixed temperature, convection or radiation"
        ) from exc


class Assembler:
    """Sums (row, column, value) triplets into a canonical CSC matrix (sorted, duplicates summed,
    zeros kept as explicit entries). The sort of the structure is kept: a call with the same rows
    and columns as the last one costs one ``bincount`` of the values."""

    def __init__(self):
        self._rows = self._cols = self._shape = None

    def __call__(self, rows: np.ndarray, cols: np.ndarray, values: np.ndarray, shape: tuple[int, int]) -> sp.csc_matrix:
        if not (shape == self._shape and rows.shape == self._rows.shape and np.array_equal(rows, self._rows)
                and np.array_equal(cols, self._cols)):
            keys = np.asarray(cols, dtype=np.int64) * shape[0] + np.asarray(rows, dtype=np.int64)
            unique, self._inverse = np.unique(keys, return_inverse=True)
            c, self._indices = np.divmod(unique, shape[0])
            self._indptr = np.zeros(shape[1] + 1, dtype=np.int64)
            np.cumsum(np.bincount(c, minlength=shape[1]), out=self._indptr[1:])
            self._rows, self._cols, self._shape = rows.copy(), cols.copy(), shape
        data = np.bincount(self._inverse, weights=values, minlength=len(self._indices))
        return sp.csc_matrix((data, self._indices, self._indptr), shape=shape)


def _triplets(a) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(rows, cols, values) of a sparse matrix's stored entries (explicit zeros included)."""
    if sp.isspmatrix_csr(a) or sp.isspmatrix_csc(a):
        major = np.repeat(np.arange(len(a.indptr) - 1), np.diff(a.indptr))
        return (major, a.indices, a.data) if sp.isspmatrix_csr(a) else (a.indices, major, a.data)
    c = a.tocoo()
    return c.row, c.col, c.data


class BorderedAssembly:
    """Assembles :class:`LowRankUpdate` matrices of one fixed pattern from the values of their
    bordered system's (row, column, value) triplets, the pattern's work done once.

    The triplets are numbered in the bordered system ``[[A, U], [W^T, -I]]`` of size n + k: an
    entry of U's column j sits at column n + j, an entry of W's column j at row n + j; the -I block
    is added here. Duplicates are summed (in the order given) and every triplet's position stays in
    the pattern, an exact zero as an explicit entry, so the pattern does not depend on the values.
    Each call costs one ``bincount`` of the values and three gathers; the matrices it returns share
    their index arrays, which are never to be written to.

    n, k : sizes of A and of the update
    rows, cols : (n_entries,) int, the triplets' positions in the bordered system
    """

    def __init__(self, n: int, k: int, rows: np.ndarray, cols: np.ndarray):
        m = n + k
        self.n, self.k, self.n_entries = n, k, len(rows)
        rows = np.concatenate([np.asarray(rows, dtype=np.int64), np.arange(n, m)])
        cols = np.concatenate([np.asarray(cols, dtype=np.int64), np.arange(n, m)])
        if len(rows) and (rows.min() < 0 or rows.max() >= m or cols.min() < 0 or cols.max() >= m):
            raise ValueError(f"BorderedAssembly: triplet positions outside the ({m}, {m}) bordered system")
        unique, self._inverse = np.unique(cols * m + rows, return_inverse=True)
        self._inverse = self._inverse.ravel()
        col, row = np.divmod(unique, m)
        # the unique keys are sorted by (column, row): the system's CSC pattern as they stand
        # (indices and indptr int32, SuperLU's own)
        self._indices = row.astype(np.intc)
        self._indptr = np.zeros(m + 1, dtype=np.intc)
        np.cumsum(np.bincount(col, minlength=m), out=self._indptr[1:])
        self._positions = (col, row)  # for the parts' patterns, worked out when first asked for
        self._parts_pattern = None
        self._shape = (m, m)
        self._system_template = sp.csc_matrix((np.zeros(len(self._indices)), self._indices, self._indptr),
                                              shape=self._shape)
        self._system_template.has_canonical_format = True
        # the values, written by the caller in the order of the triplets; the -I block's are fixed
        self.values = np.zeros(len(rows))
        self.values[self.n_entries:] = -1.0

    def __call__(self) -> LowRankUpdate:
        """The matrix of the triplets' current ``values[:n_entries]``."""
        data = np.bincount(self._inverse, weights=self.values, minlength=len(self._indices))
        return _AssembledUpdate(self, data)

    def parts(self, data: np.ndarray) -> tuple:
        """(base, left, right) of the bordered system's values ``data``."""
        return tuple(with_data(t, data[where]) for t, where in self._part_patterns())

    def _part_patterns(self) -> list:
        """(template, where each entry comes from in the system's data) of base, left and right."""
        if self._parts_pattern is None:
            n, k = self.n, self.k
            col, row = self._positions

            def pattern(select, major, minor, n_major, shape):
                """A template of the entries ``select`` ordered by (major, minor), and ``select`` so ordered."""
                where = select[np.lexsort((minor[select], major[select]))]
                indptr = np.zeros(n_major + 1, dtype=np.intc)
                np.cumsum(np.bincount(major[where], minlength=n_major), out=indptr[1:])
                template = sp.csc_matrix((np.zeros(len(where)), minor[where].astype(np.intc), indptr), shape=shape)
                template.has_canonical_format = True
                return template, where

            upper, low = row < n, col < n
            self._parts_pattern = [pattern(np.flatnonzero(upper & low), col, row, n, (n, n)),
                                   pattern(np.flatnonzero(upper & ~low), col - n, row, k, (n, k)),
                                   # W[c, r - n] = system[r, c]
                                   pattern(np.flatnonzero(~upper & low), row - n, col, k, (n, k))]
        return self._parts_pattern


class _AssembledUpdate(LowRankUpdate):
    """A :class:`BorderedAssembly`'s matrix: its bordered system at once (what a factorisation
    reads), ``base``, ``left`` and ``right`` gathered from it when first asked for."""

    def __init__(self, assembly: BorderedAssembly, data: np.ndarray):
        object.__setattr__(self, "system", with_data(assembly._system_template, data))
        object.__setattr__(self, "_assembly", assembly)

    def _part(self, i: int) -> sp.csc_matrix:
        parts = self.__dict__.get("_parts")
        if parts is None:
            parts = self._assembly.parts(self.system.data)
            object.__setattr__(self, "_parts", parts)
        return parts[i]

    base = property(lambda self: self._part(0))
    left = property(lambda self: self._part(1))
    right = property(lambda self: self._part(2))

    @property
    def shape(self) -> tuple[int, int]:
        n = self._assembly.n
        return (n, n)

    @property
    def rank(self) -> int:
        return self._assembly.k


class KeptTriplets:
    """A :class:`LowRankUpdate` given as triplets of its bordered system in the same order at every
    call (a Newton Jacobian's couplings): the first call records the rows and columns and builds a
    :class:`BorderedAssembly`; later calls only write the values, in order, into its buffer.

    Use: ``begin()``, then ``add(rows, cols, values)`` for each block (broadcast like NumPy; a
    block's rows and columns must be the same at every call), then ``matrix()``. A call that adds
    a different number of blocks, or blocks of other lengths, raises ValueError; ``forget()`` makes
    the next call record afresh.

    n, k : sizes of A and of the update (U's column j is column n + j, W's column j row n + j)
    """

    def __init__(self, n: int, k: int):
        self.n, self.k = n, k
        self.assembly: BorderedAssembly | None = None
        self._lengths: list[int] = []

    def forget(self) -> None:
        self.assembly = None

    def begin(self) -> None:
        self._block, self._pos = 0, 0
        if self.assembly is None:
            self._rows, self._cols, self._values, self._lengths = [], [], [], []

    def add(self, rows, cols, values) -> None:
        if self.assembly is None:
            r, c, v = (np.asarray(a).ravel() for a in (rows, cols, values))
            sizes = {r.size, c.size, v.size} - {1}
            if len(sizes) > 1:
                raise ValueError(f"KeptTriplets: a block's rows, columns and values have sizes {r.size}, {c.size} "
                                 f"and {v.size}; each must be one or the block's size")
            size = sizes.pop() if sizes else 1
            if not r.size == c.size == v.size:  # the single entries spread over the block, as NumPy broadcasts
                r, c, v = (a if a.size == size else np.repeat(a, size) for a in (r, c, v))
            self._rows.append(r)
            self._cols.append(c)
            self._values.append(v)
            self._lengths.append(size)
            return
        if self._block >= len(self._lengths):
            raise ValueError(f"KeptTriplets: more blocks than the {len(self._lengths)} recorded; call forget() "
                             "when the pattern changes")
        end = self._pos + self._lengths[self._block]
        self.assembly.values[self._pos:end] = values
        self._pos, self._block = end, self._block + 1

    def matrix(self) -> LowRankUpdate:
        if self.assembly is None:
            rows, cols = np.concatenate(self._rows), np.concatenate(self._cols)
            assembly = BorderedAssembly(self.n, self.k, rows, cols)
            assembly.values[: len(rows)] = np.concatenate(self._values)
            self.assembly = assembly
            del self._rows, self._cols, self._values
        elif self._block != len(self._lengths):
            raise ValueError(f"KeptTriplets: {self._block} blocks given, {len(self._lengths)} recorded; call "
                             "forget() when the pattern changes")
        return self.assembly()


def _system(matrix: sp.spmatrix | LowRankUpdate, assemble: Assembler | None = None) -> sp.csc_matrix:
    if isinstance(matrix, LowRankUpdate) and matrix.system is not None:
        return matrix.system  # canonical already (a BorderedAssembly's)
    if isinstance(matrix, LowRankUpdate) and assemble is not None:
        # the bordered system [[A, U], [W^T, -I]] from its pieces' triplets, by a kept assembly
        n, k = matrix.shape[0], matrix.rank
        parts = [_triplets(matrix.base)]
        r, c, v = _triplets(matrix.left)
        parts.append((r, c + n, v))
        r, c, v = _triplets(matrix.right)
        parts.append((c + n, r, v))
        parts.append((np.arange(n, n + k), np.arange(n, n + k), -np.ones(k)))
        rows, cols, vals = (np.concatenate(x) for x in zip(*parts))
        return assemble(rows, cols, vals, (n + k, n + k))
    a = matrix.bordered() if isinstance(matrix, LowRankUpdate) else sp.csc_matrix(matrix)
    a.sum_duplicates()  # canonical: sorted indices, so equal patterns compare equal
    return a


def row_scale(a: sp.csc_matrix) -> np.ndarray | None:
    """Row factors rho >= 1 that lift weak diagonals to their column's largest other entry.

    Row j is scaled by ``min(colmax_j / |a_jj|, min_k |a_kk| / |a_jk|)``: far enough for its
    diagonal to pass SuperLU's threshold test, and no further than keeps every other column's
    diagonal at least as large as row j's scaled entry in it. ``None`` when no row needs it.

    a : (m, m) canonical CSC (sorted indices, no duplicates)
    """
    m = a.shape[0]
    counts = np.diff(a.indptr)
    cols = np.repeat(np.arange(m), counts)
    rows = a.indices
    mag = np.abs(a.data)
    other = rows != cols
    diag = np.zeros(m)
    diag[cols[~other]] = mag[~other]
    colmax = np.zeros(m)
    np.maximum.at(colmax, cols[other], mag[other])
    weak = (colmax > diag) & (diag > 0.0)
    if not weak.any():
        return None
    # how large row j's entries are against the diagonals of their columns
    sel = other & weak[rows] & (diag[cols] > 0.0)
    reach = np.zeros(m)
    with np.errstate(over="ignore"):
        np.maximum.at(reach, rows[sel], mag[sel] / diag[cols[sel]])
    return _row_factors(m, weak, colmax, diag, reach)


def _row_factors(m: int, weak, colmax, diag, reach):
    """The rows' scale factors from the weak rows' wanted lift (their column's largest entry over
    their diagonal) capped by their reach (the largest of their entries over their columns'
    diagonals); None where no row is lifted."""
    with np.errstate(over="ignore"):
        want = np.ones(m)
        want[weak] = colmax[weak] / diag[weak]
        cap = np.full(m, np.inf)
        cap[reach > 0.0] = 1.0 / reach[reach > 0.0]
    rho = np.maximum(np.minimum(want, cap), 1.0)
    rho[~np.isfinite(rho)] = 1.0
    return rho if (rho > 1.0).any() else None


class _RowScaling:
    """:func:`row_scale` for matrices of one canonical CSC pattern, the pattern's index work done
    once (and the weak rows' entries while the weak rows stay the same): a few whole-array
    operations and two ``reduceat`` maxima, the same maxima and divisions as ``row_scale``, so the
    same factors bit for bit."""

    def __init__(self, a: sp.csc_matrix):
        m, nnz = a.shape[0], a.nnz
        self.m = m
        counts = np.diff(a.indptr)
        self.cols = np.repeat(np.arange(m), counts)
        self.rows = np.asarray(a.indices)
        self.other = self.rows != self.cols
        self.diag_at = np.flatnonzero(~self.other)
        self.diag_col = self.cols[self.diag_at]
        # segment starts for reduceat (an empty segment is set to zero afterwards)
        self.col_start = np.minimum(a.indptr[:-1], max(nnz - 1, 0))
        self.col_empty = counts == 0
        self.by_row = np.argsort(self.rows, kind="stable")  # the entries in row order
        self.row_counts = np.bincount(self.rows, minlength=m)
        self.row_ptr = np.concatenate([[0], np.cumsum(self.row_counts)])
        self._weak = None  # the weak rows of the last call, and their entries (below)
        # every column has its diagonal (a Jacobian's, a bordered system's -I): the diagonals are one gather
        self.full_diag = bool(np.array_equal(self.diag_col, np.arange(m)))
        self.any_empty = bool(self.col_empty.any())

    def __call__(self, data: np.ndarray) -> np.ndarray | None:
        m = self.m
        if len(data) == 0:
            return None
        mag = np.abs(data)
        if self.full_diag:
            diag = mag[self.diag_at]
        else:
            diag = np.zeros(m)
            diag[self.diag_col] = mag[self.diag_at]
        off = mag.copy()
        off[self.diag_at] = 0.0  # the column maxima of the other entries (magnitudes, so 0 is neutral)
        colmax = np.maximum.reduceat(off, self.col_start)
        if self.any_empty:
            colmax[self.col_empty] = 0.0
        weak = (colmax > diag) & (diag > 0.0)
        if not weak.any():
            return None
        if self._weak is None or not np.array_equal(weak, self._weak):
            # the weak rows' entries, row by row (the set is the same from one call to the next)
            rows = np.flatnonzero(weak)
            counts = self.row_counts[rows]  # >= 1: a weak row has its diagonal
            ends = np.cumsum(counts)
            starts = np.concatenate([[0], ends[:-1]])
            entries = self.by_row[np.repeat(self.row_ptr[rows] - starts, counts) + np.arange(ends[-1])]
            self._weak = weak
            self._entries = (rows, entries, starts, self.other[entries], self.cols[entries])
        rows, entries, starts, other, cols = self._entries
        below = diag[cols]
        sel = other & (below > 0.0)
        with np.errstate(over="ignore"):
            # how large a weak row's entries are against the diagonals of their columns
            ratio = np.divide(mag[entries], below, out=np.zeros(len(entries)), where=sel)
            reach = np.maximum.reduceat(ratio, starts)
            # _row_factors on the weak rows alone: every other row's wanted lift is 1, its factor 1
            want = colmax[rows] / diag[rows]
            cap = np.full(len(rows), np.inf)
            reached = reach > 0.0
            cap[reached] = 1.0 / reach[reached]
        lift = np.maximum(np.minimum(want, cap), 1.0)
        lift[~np.isfinite(lift)] = 1.0
        if not (lift > 1.0).any():
            return None
        rho = np.ones(m)
        rho[rows] = lift
        return rho


def factorise(matrix: sp.spmatrix | LowRankUpdate) -> Factor:
    """LU factors of ``matrix`` with a fresh ordering; a singular matrix raises SolverError."""
    return Factoriser()(matrix)


def _keys(a: sp.csc_matrix) -> np.ndarray:
    """Sorted (column, row) keys of a canonical CSC pattern."""
    cols = np.repeat(np.arange(a.shape[1], dtype=np.int64), np.diff(a.indptr))
    return cols * a.shape[0] + a.indices


def _from_keys(keys: np.ndarray, shape: tuple[int, int]) -> sp.csc_matrix:
    """A CSC matrix of explicit zeros holding the pattern ``keys`` (sorted)."""
    m = shape[0]
    cols, rows = np.divmod(keys, m)
    indptr = np.zeros(shape[1] + 1, dtype=np.int64)
    np.cumsum(np.bincount(cols, minlength=shape[1]), out=indptr[1:])
    return sp.csc_matrix((np.zeros(len(keys)), rows, indptr), shape=shape)


class Factoriser:
    """Factorises matrices of one sparsity pattern, ordering the pattern only once.

    The pattern remembered is the union of the patterns seen (entries missing from a matrix are
    explicit zeros), so a matrix whose pattern lies inside it keeps the ordering. A matrix with
    entries outside it is ordered afresh on the union; one of another shape starts anew.
    """

    def __init__(self):
        self._pattern: sp.csc_matrix | None = None  # the union pattern (values unused)
        self._keys: np.ndarray | None = None
        self._order: np.ndarray | None = None
        self._inverse: np.ndarray | None = None  # argsort(order)[:n]: the solves' gather back
        self._permuted = None  # (where each entry of the pattern goes, its row, indices, indptr) under the order
        self._seen = (None, None)  # index arrays last found equal to the pattern's
        self._scaling: _RowScaling | None = None  # the row scaling's pattern work, for the pattern
        self._assemble = Assembler()
        self.orderings = 0  # fresh orderings computed (a counter for tests and benchmarks)

    def state(self) -> dict | None:
        """The remembered pattern (CSC ``indptr``, ``indices``) and ``order``, for a checkpoint."""
        if self._order is None:
            return None
        return {"indptr": self._pattern.indptr, "indices": self._pattern.indices, "order": self._order}

    def restore(self, indptr: np.ndarray, indices: np.ndarray, order: np.ndarray) -> None:
        """Take back a pattern and ordering from :meth:`state` (a resumed run rounds as the first did)."""
        m = len(indptr) - 1
        self._pattern = sp.csc_matrix((np.zeros(len(indices)), np.asarray(indices), np.asarray(indptr)), shape=(m, m))
        self._keys = _keys(self._pattern)
        self._order = np.asarray(order)
        self._inverse = None
        self._permuted = None
        self._seen, self._scaling = (None, None), None

    def _same_pattern(self, a: sp.csc_matrix) -> bool:
        p = self._pattern
        if p is None or a.shape != p.shape:
            return False
        if a.indices is self._seen[0] and a.indptr is self._seen[1]:
            return True  # the index arrays already found equal (a BorderedAssembly's, kept for the run)
        same = (a.indptr.shape == p.indptr.shape and a.indices.shape == p.indices.shape
                and np.array_equal(a.indptr, p.indptr) and np.array_equal(a.indices, p.indices))
        if same:
            self._seen = (a.indices, a.indptr)  # held, so their identity cannot pass to other arrays
        return same

    def _on_pattern(self, a: sp.csc_matrix) -> sp.csc_matrix:
        """``a`` on the remembered pattern, widened to the union if it has entries outside it."""
        keys = _keys(a)
        pos = np.searchsorted(self._keys, keys)
        inside = pos < len(self._keys)
        inside[inside] = self._keys[pos[inside]] == keys[inside]
        if not inside.all():
            self._keys = np.union1d(self._keys, keys)
            self._pattern, self._order, self._permuted = _from_keys(self._keys, a.shape), None, None
            self._seen, self._scaling = (None, None), None
            pos = np.searchsorted(self._keys, keys)
        data = np.zeros(len(self._keys))
        data[pos] = a.data
        return sp.csc_matrix((data, self._pattern.indices, self._pattern.indptr), shape=a.shape)

    def _pre_ordered(self, a: sp.csc_matrix, rho: np.ndarray | None) -> sp.csc_matrix:
        """``(R a)[q][:, q]`` for the kept order q and the row factors rho, by a gather of a's values
        (the pattern's permutation is worked out once)."""
        if self._permuted is None:
            # entry (r, c) of a goes to (inv[r], inv[c]), inv the inverse of q; sorted by the new
            # (column, row): where each entry of the permuted matrix comes from
            q, m = self._order, a.shape[0]
            inv = np.empty(m, dtype=np.int64)
            inv[q] = np.arange(m)
            col = inv[np.repeat(np.arange(m), np.diff(a.indptr))]
            row = inv[np.asarray(a.indices)]
            where = np.argsort(col * m + row, kind="stable")
            indices = row[where].astype(np.intc)
            indptr = np.zeros(m + 1, dtype=np.intc)
            np.cumsum(np.bincount(col, minlength=m), out=indptr[1:])
            template = sp.csc_matrix((np.zeros(len(where)), indices, indptr), shape=a.shape)
            template.has_canonical_format = True
            self._permuted = (where, np.asarray(a.indices)[where], indices, indptr, template)
        where, rows = self._permuted[:2]
        data = a.data[where] if rho is None else a.data[where] * rho[rows]
        return with_data(self._permuted[4], data)

    def __call__(self, matrix: sp.spmatrix | LowRankUpdate) -> Factor:
        a = _system(matrix, self._assemble)
        n = matrix.shape[0]
        same = self._same_pattern(a)
        if self._pattern is not None and a.shape == self._pattern.shape and not same:
            a = self._on_pattern(a)
            same = True
        if same:
            if self._scaling is None:
                self._scaling = _RowScaling(a)
            rho = self._scaling(a.data)
        else:
            rho = row_scale(a)
        if self._order is not None and same:
            if self._inverse is None or len(self._inverse) != n:
                self._inverse = np.argsort(self._order)[:n]
            return Factor(_splu(self._pre_ordered(a, rho), _PRE_ORDERED), n, self._order, rho, self._inverse)
        if rho is not None:  # the same pattern, rows scaled (explicit zeros kept)
            a = sp.csc_matrix((a.data * rho[a.indices], a.indices, a.indptr), shape=a.shape)
        lu = _splu(a, SPLU_OPTIONS)
        self.orderings += 1
        self._permuted = None
        if not same:
            self._pattern = sp.csc_matrix((np.zeros(a.nnz), a.indices.copy(), a.indptr.copy()), shape=a.shape)
            self._keys = _keys(a)
            self._seen, self._scaling = (None, None), None
        # SuperLU factorises Pr A Pc; symmetric pre-ordering with the inverse of perm_c
        # reproduces its column order (and so its fill)
        self._order = np.argsort(lu.perm_c)
        self._inverse = None
        return Factor(lu, n, None, rho)


def solve(lu: Factor, rhs: np.ndarray) -> np.ndarray:
    x = lu.solve(rhs)
    if not np.isfinite(np.add.reduce(x)):  # one pass: a sum is finite only if every term is
        raise SolverError("linear solve: the solution is not finite; the system matrix is near-singular")
    return x
