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
