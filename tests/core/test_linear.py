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
