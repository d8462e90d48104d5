"""Every covariance structure (and the dense Factor) against its dense form, plus what is special to each.

The shared checks live in :mod:`tests.linalg.contract`; each class below only
says how to build its object and, independently with numpy, its dense matrix.
References: numpy.linalg (slogdet, solve, cholesky, cond), scipy.linalg
(cho_factor / cho_solve) and, for the specifics, the identities named beside them.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.errors import InputError, NotPositiveDefiniteError

from .contract import EPS, CovarianceContract, spd


# ---------------------------------------------------------------- the contract, once per structure
class TestFactorContract(CovarianceContract):
    method = "cholesky"
    columns = ["a", "b", "c", "d", "e", "f", "g"]

    def build(self):
        a = spd(7, 1e3, seed=1) * np.outer(np.logspace(0, 2, 7), np.logspace(0, 2, 7))
        return whiten.cholesky(pd.DataFrame(a, index=self.columns, columns=self.columns)), a


class TestJitteredFactorContract(CovarianceContract):
    method = "cholesky+jitter"
    jitter = 1e-3

    def build(self):
        a = (lambda m: m.T @ m)(np.array([[1.0, 2, 3], [4, 5, 6], [7, 8, 9]]))  # rank 2
        return whiten.cholesky(a, jitter=self.jitter), a + self.jitter * np.eye(3)


class TestGivenFactorContract(CovarianceContract):
    method = "given"

    def build(self):
        lower = np.linalg.cholesky(spd(5, 1e2, seed=7))
        return whiten.Factor.from_lower(lower), lower @ lower.T


class TestDiagonalContract(CovarianceContract):
    method = "diagonal"
    columns = ["u", "v", "w", "x", "y", "z"]

    def build(self):
        d = np.array([3.0, 0.2, 1e-3, 5.0, 0.7, 2.5])
        return whiten.diagonal(d, columns=self.columns), np.diag(d)


class TestLowRankPlusDiagonalContract(CovarianceContract):
    method = "low-rank+diagonal"

    def build(self):
        rng = np.random.default_rng(5)
        u = rng.standard_normal((9, 3)) * np.array([2.0, 0.5, 0.1])
        d = rng.uniform(0.1, 2.0, 9)
        return whiten.low_rank_plus_diagonal(u, d), np.diag(d) + u @ u.T


class TestBlockDiagonalContract(CovarianceContract):
    method = "block-diagonal(3 blocks)"
    columns = ["a0", "a1", "a2", "b0", "b1", "b2", "b3", "c0", "c1"]

    def build(self):
        a = spd(3, 50.0, seed=2)
        b = spd(4, 10.0, seed=3) * 1e-2
        c = np.array([0.4, 0.9])
        obj = whiten.block_diagonal([pd.DataFrame(a, index=self.columns[:3], columns=self.columns[:3]),
                                     whiten.cholesky(b, columns=self.columns[3:7]),
                                     whiten.diagonal(c, columns=self.columns[7:])])
        dense = np.zeros((9, 9))
        dense[:3, :3], dense[3:7, 3:7], dense[7:, 7:] = a, b, np.diag(c)
        return obj, dense


class TestBlockDiagonalWithJitterContract(CovarianceContract):
    method = "block-diagonal(2 blocks)"
    jitter = 1e-3

    def build(self):
        a = spd(3, 20.0, seed=8)
        g = (lambda m: m.T @ m)(np.array([[1.0, 2, 3], [4, 5, 6], [7, 8, 9]]))  # rank 2, repaired below
        obj = whiten.block_diagonal([a, whiten.cholesky(g, jitter=self.jitter)])
        dense = np.zeros((6, 6))
        dense[:3, :3], dense[3:, 3:] = a, g + self.jitter * np.eye(3)
        return obj, dense


class TestKroneckerContract(CovarianceContract):
    method = "kronecker"

    def build(self):
        a = spd(3, 20.0, seed=4)
        b = spd(4, 30.0, seed=6)
        return whiten.kronecker(a, whiten.cholesky(b)), np.kron(a, b)


class TestKroneckerWithJitterContract(CovarianceContract):
    method = "kronecker+jitter"
    jitter = 1e-3

    def build(self):
        a = spd(2, 5.0, seed=9)
        g = (lambda m: m.T @ m)(np.array([[1.0, 2, 3], [4, 5, 6], [7, 8, 9]]))
        return whiten.kronecker(a, whiten.cholesky(g, jitter=self.jitter)), np.kron(a, g + self.jitter * np.eye(3))


# ---------------------------------------------------------------- specifics
def test_diagonal_rejects_zero_and_negative_variances():
    with pytest.raises(NotPositiveDefiniteError, match="entry 1 is 0"):
        whiten.diagonal([1.0, 0.0, 2.0])
    with pytest.raises(NotPositiveDefiniteError, match="entry 0 is -1"):
        whiten.diagonal([-1.0, 2.0])
    with pytest.raises(InputError, match="1-D"):
        whiten.diagonal(np.eye(2))


def test_diagonal_wide_dynamic_range_loses_no_digits():
    s = whiten.diagonal([1.0, 1e-300])
    assert s.health.digits_lost == 0.0
    # exact: sum of squares of x / sqrt(d)
    assert s.quad([1.0, 1e-150]) == pytest.approx(2.0, rel=4 * EPS)


def test_low_rank_shape_errors():
    with pytest.raises(InputError, match=r"expected shape \(3, k\)"):
        whiten.low_rank_plus_diagonal(np.ones((4, 2)), np.ones(3))
    with pytest.raises(InputError, match="row 0, column 1"):
        whiten.low_rank_plus_diagonal(np.array([[1.0, np.nan]] * 3), np.ones(3))


def test_low_rank_capacitance_is_small():
    u = np.ones((50, 2)) * np.array([1.0, -1.0])
    s = whiten.low_rank_plus_diagonal(u, np.ones(50))
    assert s.capacitance.dim == 2 and s.rank == 2


def test_dense_refuses_huge():
    s = whiten.diagonal(np.ones(10_000))
    with pytest.raises(InputError, match="GB; use solve/quad/whiten"):
        s.dense()


def test_block_diagonal_names_failing_block():
    with pytest.raises(NotPositiveDefiniteError, match=r"blocks\[1\]"):
        whiten.block_diagonal([np.eye(2), np.array([[1.0, 2.0], [2.0, 1.0]])])
    with pytest.raises(InputError, match="non-empty list"):
        whiten.block_diagonal([])


def test_kronecker_health_multiplies_condition():
    # cond(A ⊗ B) = cond(A) cond(B) (Van Loan 2000, property of the Kronecker product)
    a, b = np.diag([1.0, 1e-3]), np.diag([1.0, 1e-2])
    s = whiten.kronecker(a, b)
    assert s.rcond == pytest.approx(1e-5, rel=1e-12)
    with pytest.raises(InputError, match="matrix or a whiten.Factor"):
        whiten.kronecker(whiten.diagonal([1.0, 2.0]), b)


def test_low_rank_quad_along_shared_source_keeps_digits():
    # One source u with g = u^T D^{-1} u = 1e12: by the Sherman-Morrison formula
    # (Sherman & Morrison, 1950) u^T (D + u u^T)^{-1} u = g / (1 + g) exactly.
    # The subtraction form ||c||^2 - ... would lose about 12 digits here.
    n = 100
    d = np.linspace(0.5, 2.0, n)
    u = np.full(n, 1.0)
    u *= np.sqrt(1e12 / np.sum(u**2 / d))
    g = float(np.sum(u**2 / d))
    s = whiten.low_rank_plus_diagonal(u, d)
    assert s.health.digits_lost == pytest.approx(12.0, abs=0.5)
    assert s.quad(u) == pytest.approx(g / (1 + g), rel=1e-12)
    # and a direction orthogonal (in the D^{-1} metric) to u sees only the noise
    x = np.zeros(n)
    x[0], x[1] = d[0], -d[1]  # x^T D^{-1} u = u0 - u1 = 0
    assert s.quad(x) == pytest.approx(d[0] + d[1], rel=1e-12)


hyp = pytest.importorskip("hypothesis")
from hypothesis import given  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@given(n=st.integers(2, 12), k=st.integers(1, 4), scale=st.floats(1e-3, 1e3), spread=st.floats(0.0, 6.0),
       seed=st.integers(0, 2**16))
def test_low_rank_random_against_dense(n, k, scale, spread, seed):
    # random shared-source loadings of any scale and variances spread over
    # `spread` decades; reference numpy slogdet / solve on the dense matrix
    rng = np.random.default_rng(seed)
    u = scale * rng.standard_normal((n, k))
    d = 10.0 ** rng.uniform(-spread, 0.0, n)
    dense = np.diag(d) + u @ u.T
    s = whiten.low_rank_plus_diagonal(u, d)
    x = rng.standard_normal((3, n))
    # judge in the D^{-1/2} scaling, where the structured path works (van der Sluis 1969)
    kappa = np.linalg.cond(dense / np.sqrt(np.outer(d, d)))
    tol = 50 * n * kappa * EPS
    ref_q = np.einsum("ij,ji->i", x, np.linalg.solve(dense, x.T))
    np.testing.assert_allclose(s.quad(x), ref_q, rtol=tol)
    assert s.logdet() == pytest.approx(np.linalg.slogdet(dense)[1], abs=tol * n)
    # numpy's cond of the formed matrix is itself only good to ~kappa*eps relative
    assert s.health.digits_lost == pytest.approx(np.log10(kappa), abs=1e-9 + 50 * n * kappa * EPS)


@given(a=st.integers(1, 5), b=st.integers(1, 5), ca=st.floats(1.0, 1e4), cb=st.floats(1.0, 1e4),
       seed=st.integers(0, 2**16))
def test_kronecker_random_against_dense(a, b, ca, cb, seed):
    A, B = spd(a, ca, seed), spd(b, cb, seed + 1)
    s = whiten.kronecker(A, B)
    dense = np.kron(A, B)  # numpy reference
    x = np.random.default_rng(seed).standard_normal((2, a * b))
    kappa = np.linalg.cond(dense)
    tol = 50 * a * b * kappa * EPS
    ref = np.linalg.solve(dense, x.T)
    np.testing.assert_allclose(s.solve(x.T), ref, rtol=0, atol=tol * np.abs(ref).max())
    assert s.logdet() == pytest.approx(np.linalg.slogdet(dense)[1], abs=tol * a * b)


def test_the_package_keeps_every_public_name():
    import whiten.linalg.structured as structured

    for name in structured.__all__:
        assert getattr(structured, name) is getattr(whiten, name)
    assert structured.diagonal([1.0, 2.0]).dim == 2  # the function, not the module of the same name


def test_columns_is_the_one_keyword_for_labels():
    s = whiten.diagonal([1.0, 2.0], columns=["a", "b"])
    assert s.columns == ["a", "b"]
    assert whiten.block_diagonal([s, whiten.diagonal([3.0])]).columns is None  # one block unlabelled
    with pytest.raises(TypeError):
        whiten.diagonal([1.0, 2.0], names=["a", "b"])
    with pytest.raises(TypeError):
        whiten.cholesky(np.eye(2), names=["a", "b"])
    with pytest.raises(InputError, match="columns: expected 2 names, got 1"):
        whiten.diagonal([1.0, 2.0], columns=["a"])
