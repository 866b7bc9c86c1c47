"""The sparse direct solves: bordered low-rank updates and the reused ordering."""
from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from fvsolver.errors import SolverError
from fvsolver.linear import Factoriser, LowRankUpdate, factorise, solve


def laplacian(n: int, shift: float = 0.1) -> sp.csr_matrix:
    """A 2D five-point Laplacian plus a diagonal shift: the pattern of a two-point matrix."""
    one = sp.diags([-np.ones(n - 1), 2.0 * np.ones(n), -np.ones(n - 1)], [-1, 0, 1])
    eye = sp.identity(n)
    return (sp.kron(one, eye) + sp.kron(eye, one) + shift * sp.identity(n * n)).tocsr()


def test_low_rank_update_solves_the_formed_product(rng):
    A = laplacian(12)
    n = A.shape[0]
    cells = rng.choice(n, 30, replace=False)  # a dense coupling among 30 "wall" cells
    u = np.zeros(n)
    u[cells] = rng.normal(size=30)
    w = np.zeros(n)
    w[cells] = rng.random(30) / 30.0
    update = LowRankUpdate(A, sp.csr_matrix(u[:, None]), sp.csr_matrix(w[:, None]))
    dense = A.toarray() + np.outer(u, w)  # numpy's dense product as the reference
    b = rng.normal(size=n)
    x = solve(factorise(update), b)
    assert np.allclose(x, np.linalg.solve(dense, b), rtol=1e-12, atol=1e-12)
    assert np.allclose(update @ x, b, atol=1e-12)
    assert np.allclose(update.tocsr().toarray(), dense)
    # the bordered factor stays sparse: no dense 30 x 30 block
    assert factorise(update).fill < factorise(update.tocsr()).fill


def test_low_rank_update_refuses_mismatched_shapes():
    A = laplacian(4)
    with pytest.raises(ValueError, match="do not fit"):
        LowRankUpdate(A, sp.csr_matrix(np.ones((16, 1))), sp.csr_matrix(np.ones((15, 1))))


def test_factoriser_orders_a_pattern_once_and_solves_every_matrix_of_it(rng):
    A = laplacian(20)
    n = A.shape[0]
    factorise_ = Factoriser()
    first = factorise_(A)
    fresh_fill = first.fill
    for k in range(3):
        B = A.copy()
        B.data = B.data * (1.0 + 0.3 * rng.random(B.nnz))  # new values (not symmetric), same pattern
        lu = factorise_(B)
        b = rng.normal(size=n)
        assert np.allclose(B @ solve(lu, b), b, atol=1e-10)
        assert lu.order is not None
        assert lu.fill <= 1.01 * fresh_fill  # the kept order gives the fresh order's fill
    assert factorise_.orderings == 1
    factorise_(laplacian(21))  # another pattern is ordered afresh
    assert factorise_.orderings == 2


def test_singular_matrix_is_refused_with_a_hint():
    A = sp.csr_matrix(np.array([[1.0, 1.0], [1.0, 1.0]]))
    with pytest.raises(SolverError, match="singular"):
        factorise(A)


def test_factoriser_keeps_its_ordering_when_exact_zeros_leave_the_pattern(rng):
    A = laplacian(15)
    n = A.shape[0]
    factorise_ = Factoriser()
    factorise_(A)
    B = A.tolil()
    B[3, 4] = B[4, 3] = 0.0  # an exact zero, dropped from the pattern
    B = B.tocsr()
    B.eliminate_zeros()
    assert B.nnz == A.nnz - 2
    b = rng.normal(size=n)
    assert np.allclose(B @ solve(factorise_(B), b), b, atol=1e-10)
    assert factorise_.orderings == 1  # the pattern lies inside the one kept: explicit zeros
    C = A.tolil()
    C[0, n - 1] = C[n - 1, 0] = -0.5  # an entry outside it: ordered afresh, on the union
    C = C.tocsr()
    assert np.allclose(C @ solve(factorise_(C), b), b, atol=1e-10)
    assert factorise_.orderings == 2
    for M in (A, B, C):  # every pattern seen now lies inside the union
        assert np.allclose(M @ solve(factorise_(M), b), b, atol=1e-10)
    assert factorise_.orderings == 2


def test_weak_lumped_rows_are_scaled_so_the_pivots_stay_on_the_diagonal(rng):
    # cells coupled to a lumped unknown measured in tiny units (a mass in kg beside energies in J):
    # its column holds entries 1e6 times its diagonal, which SuperLU's threshold test refuses
    cells = laplacian(12, shift=1.0)
    n = cells.shape[0]
    column = sp.csr_matrix(([1e3], ([40], [0])), shape=(n, 1))  # a face inventory, on its wall cell
    row = sp.csr_matrix(([-1e-6], ([0], [40])), shape=(1, n))  # condensation grows as the wall cools
    A = sp.bmat([[cells, column], [row, sp.csr_matrix([[1e-3]])]], format="csc")
    lu = Factoriser()(A)
    assert lu.row_scale is not None and lu.row_scale[n] > 1.0
    assert np.all(lu.row_scale[:n] == 1.0)  # the dominant cell rows are left alone
    pivot_row = np.argsort(lu.lu.perm_r)[lu.lu.perm_c]
    assert np.array_equal(pivot_row, np.arange(n + 1))  # every pivot on the diagonal
    b = rng.normal(size=n + 1)
    reference = np.linalg.solve(A.toarray(), b)  # numpy's dense LU as the reference
    assert np.allclose(solve(lu, b), reference, rtol=1e-10, atol=1e-12 * np.abs(reference).max())
    # without the scaling SuperLU pivots off the diagonal here (so the test has something to show)
    import scipy.sparse.linalg as spla
    from fvsolver.linear import SPLU_OPTIONS
    plain = spla.splu(A, **SPLU_OPTIONS)
    assert not np.array_equal(np.argsort(plain.perm_r)[plain.perm_c], np.arange(n + 1))


def test_dominant_matrices_keep_superlus_own_solve():
    lu = Factoriser()(laplacian(10))
    assert lu.row_scale is None and lu.solve == lu.lu.solve


def test_a_restored_factoriser_keeps_the_pattern_and_ordering(rng):
    A = laplacian(12)
    first = Factoriser()
    first(A)
    state = first.state()
    again = Factoriser()
    again.restore(state["indptr"], state["indices"], state["order"])
    b = rng.normal(size=A.shape[0])
    lu = again(A)
    assert again.orderings == 0 and lu.order is not None  # the kept ordering, not a fresh one
    assert np.allclose(A @ solve(lu, b), b, atol=1e-10)


# -- the kept assembly of a bordered low-rank update ----------------------------------------------
def bordered_triplets(rng, n: int = 60, k: int = 2):
    """A Laplacian's entries, duplicated couplings and exact zeros, and k dense columns, as triplets of
    the bordered system (U's column j at column n + j, W's column j at row n + j)."""
    A = laplacian(int(np.sqrt(n)), shift=1.0).tocoo()
    n = A.shape[0]
    rows, cols, vals = [A.row], [A.col], [A.data]
    extra = rng.integers(0, n, (2, 40))  # couplings summed onto (possibly) the same entries
    rows.append(extra[0]), cols.append(extra[1]), vals.append(rng.normal(size=40))
    rows.append(np.array([3])), cols.append(np.array([n - 1])), vals.append(np.zeros(1))  # an exact zero
    for j in range(k):
        support = rng.choice(n, 12, replace=False)
        rows.append(support), cols.append(np.full(12, n + j)), vals.append(rng.normal(size=12))
        support = rng.choice(n, 8, replace=False)
        rows.append(np.full(8, n + j)), cols.append(support), vals.append(rng.random(8))
    return n, k, np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)


def test_bordered_assembly_sums_triplets_into_the_update_and_its_bordered_system(rng):
    from fvsolver.linear import BorderedAssembly
    n, k, rows, cols, vals = bordered_triplets(rng)
    assembly = BorderedAssembly(n, k, rows, cols)
    for _ in range(2):  # new values in the kept pattern
        vals = vals * (1.0 + rng.random(len(vals)))
        assembly.values[: len(vals)] = vals
        J = assembly()
        # the reference: scipy's COO sum of the same triplets, and scipy's own bordered bmat
        full = sp.coo_matrix((np.append(vals, -np.ones(k)), (np.append(rows, np.arange(n, n + k)),
                                                             np.append(cols, np.arange(n, n + k)))),
                             shape=(n + k, n + k)).toarray()
        assert np.allclose(J.base.toarray(), full[:n, :n], rtol=1e-14, atol=0.0)
        assert np.allclose(J.left.toarray(), full[:n, n:], rtol=1e-14, atol=0.0)
        assert np.allclose(J.right.toarray(), full[n:, :n].T, rtol=1e-14, atol=0.0)
        assert np.allclose(J.system.toarray(), full, rtol=1e-14, atol=0.0)
        assert np.array_equal(LowRankUpdate(J.base, J.left, J.right).bordered().toarray(), J.system.toarray())
        # the exact zero stays an explicit entry, so the pattern does not depend on the values
        assert J.system.nnz == len(np.unique((cols.astype(np.int64) * (n + k) + rows))) + k
        b = rng.normal(size=n)
        x = solve(factorise(J), b)
        assert np.allclose(J.tocsr() @ x, b, atol=1e-10)


def test_kept_triplets_record_once_and_refuse_another_sequence(rng):
    from fvsolver.linear import KeptTriplets
    n, k, rows, cols, vals = bordered_triplets(rng)
    kept = KeptTriplets(n, k)
    kept.begin()
    kept.add(rows, cols, vals)
    first = kept.matrix().system.toarray()
    kept.begin()
    kept.add(None, None, 2.0 * vals)  # later calls give the values only
    assert np.allclose(kept.matrix().system.toarray()[:n], 2.0 * first[:n], rtol=1e-14, atol=0.0)
    kept.begin()
    with pytest.raises(ValueError):  # a block of another length
        kept.add(None, None, vals[:-1])
    kept.begin()
    kept.add(None, None, vals)
    with pytest.raises(ValueError, match="more blocks"):
        kept.add(None, None, vals)
    kept.begin()
    with pytest.raises(ValueError, match="recorded"):  # fewer blocks than recorded
        kept.matrix()
    kept.forget()
    kept.begin()
    kept.add(rows[:10], cols[:10], vals[:10])  # afresh
    assert kept.matrix().system.nnz <= 10 + k


def test_a_kept_bordered_pattern_is_factorised_with_one_ordering_and_the_same_answer(rng):
    """A kept pattern handed over as its bordered system: one ordering, the answers of fresh factors."""
    from fvsolver.linear import BorderedAssembly
    n, k, rows, cols, vals = bordered_triplets(rng)
    assembly = BorderedAssembly(n, k, rows, cols)
    kept = Factoriser()
    for _ in range(3):
        assembly.values[: len(vals)] = vals * (1.0 + rng.random(len(vals)))
        J = assembly()
        b = rng.normal(size=n)
        x = solve(kept(J), b)
        fresh = LowRankUpdate(J.base.tocsr(), J.left.tocsr(), J.right.tocsr())  # no system handed over
        assert np.allclose(x, solve(factorise(fresh), b), rtol=1e-10, atol=1e-12)
        assert np.allclose(J @ x, b, atol=1e-10)
    assert kept.orderings == 1


def test_with_data_gives_the_constructors_matrix(rng):
    from fvsolver.linear import with_data
    A = laplacian(6)
    for template in (A.tocsr(), A.tocsc()):
        data = rng.normal(size=template.nnz)
        got = with_data(template, data)
        want = template.__class__((data, template.indices, template.indptr), shape=template.shape)
        assert type(got) is type(want) and got.shape == want.shape
        assert np.array_equal(got.toarray(), want.toarray())
        assert np.array_equal((got @ np.ones(A.shape[0])), want @ np.ones(A.shape[0]))
        assert got.data is data and template.data is not data  # the template keeps its own values


def weak_rows_matrix(rng, n: int = 40) -> sp.csc_matrix:
    """A canonical CSC matrix with dominant rows and a few weak ones (small diagonals beside large
    column entries), an absent pivot, a ratio that overflows, and an empty row and column."""
    A = sp.random(n, n, density=0.15, random_state=np.random.RandomState(1), format="lil")
    A.setdiag(rng.uniform(1.0, 2.0, n))
    A[3, 3], A[7, 7], A[9, 9] = 1e-6, 0.0, 1e-300
    A[0, 3], A[12, 3], A[9, 5] = 50.0, -80.0, 1e10
    A[20, :] = 0.0
    A[:, 21] = 0.0
    A = A.tocsc()
    A.eliminate_zeros()
    A.sum_duplicates()
    return A


def test_the_kept_row_scaling_gives_row_scale_bit_for_bit(rng):
    from fvsolver.linear import _RowScaling, row_scale
    A = weak_rows_matrix(rng)
    scaling = _RowScaling(A)
    for _ in range(3):  # new values on the kept pattern
        B = A.__class__((A.data * rng.uniform(0.5, 2.0, A.nnz), A.indices, A.indptr), shape=A.shape)
        want, got = row_scale(B), scaling(B.data)
        assert want is not None and np.array_equal(got, want)
    assert np.sum(want > 1.0) >= 2  # weak rows were lifted (the test has something to compare)
    # a weak row turning strong and back (the kept set of weak rows' entries is renewed)
    diagonal = np.flatnonzero(A.indices == np.repeat(np.arange(A.shape[0]), np.diff(A.indptr)))
    for factor in (1e12, 1.0):
        data = A.data.copy()
        data[diagonal[3]] *= factor
        B = A.__class__((data, A.indices, A.indptr), shape=A.shape)
        want, got = row_scale(B), scaling(B.data)
        assert (want is None and got is None) or np.array_equal(got, want)
    assert scaling._weak[3]
    dominant = sp.identity(8, format="csc")
    assert _RowScaling(dominant)(dominant.data) is None and row_scale(dominant) is None


def test_column_by_column_factors_have_superlus_default_pivots_fill_and_solutions(rng):
    """SPLU_OPTIONS factorise column by column (panel_size 1, no relaxed supernodes) for speed:
    on a 2-D five-point matrix with a few dense border rows and columns, the same row pivots and
    fill as SuperLU's own panel and supernode sizes, and the same solution to round-off."""
    import scipy.sparse.linalg as spla

    from fvsolver.linear import SPLU_OPTIONS

    nx, ny, k = 30, 20, 4
    lap = sp.kronsum(sp.diags([-1.0, 2.2, -1.0], [-1, 0, 1], shape=(nx, nx)),
                     sp.diags([-1.0, 2.2, -1.0], [-1, 0, 1], shape=(ny, ny)))
    border = sp.random(nx * ny, k, density=0.05, random_state=3)
    a = sp.bmat([[lap, border], [border.T, -sp.identity(k)]], format="csc")
    a.data *= 1.0 + 0.1 * rng.random(a.nnz)  # unsymmetric values on the symmetric pattern
    defaults = {key: value for key, value in SPLU_OPTIONS.items() if key not in ("panel_size", "relax")}
    assert SPLU_OPTIONS["panel_size"] == 1 and SPLU_OPTIONS["relax"] == 1
    tuned, plain = spla.splu(a, **SPLU_OPTIONS), spla.splu(a, **defaults)
    np.testing.assert_array_equal(tuned.perm_r, plain.perm_r)
    np.testing.assert_array_equal(tuned.perm_c, plain.perm_c)
    assert tuned.L.nnz + tuned.U.nnz == plain.L.nnz + plain.U.nnz
    b = rng.normal(size=a.shape[0])
    x = tuned.solve(b)
    np.testing.assert_allclose(x, plain.solve(b), rtol=0, atol=1e-13 * np.abs(x).max())
    np.testing.assert_allclose(a @ x, b, rtol=0, atol=1e-11 * np.abs(b).max())
