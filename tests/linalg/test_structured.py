"""Every covariance structure (and Factor itself) against its dense form.

One contract class, ``CovarianceContract``; each structure inherits it and only
says how to build itself and its dense matrix *independently* (from numpy, not
from the object's own dense()). References: numpy.linalg (slogdet, solve,
cholesky) and scipy.stats.multivariate_normal.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

import whiten
from whiten.errors import InputError, NotPositiveDefiniteError

EPS = np.finfo(float).eps


def _spd(n, cond, seed):
    """Random SPD matrix with 2-norm condition number ``cond`` (Q diag Q^T)."""
    rng = np.random.default_rng(seed)
    q, _ = np.linalg.qr(rng.standard_normal((n, n)))
    ev = np.geomspace(1.0, 1.0 / cond, n)
    m = (q * ev) @ q.T
    return 0.5 * (m + m.T)


class CovarianceContract:
    """Checks every covariance object against its dense matrix.

    Subclasses define ``build(self) -> (cov_object, dense_matrix)`` where the
    dense matrix is computed with numpy from the same ingredients.
    """

    n_rows = 5

    def build(self):  # pragma: no cover - abstract
        raise NotImplementedError

    @pytest.fixture
    def case(self):
        obj, dense = self.build()
        kappa = np.linalg.cond(dense)
        n = dense.shape[0]
        # Backward-stable factor-and-solve: relative error bounded by c * n * kappa * eps
        # (Higham, Accuracy and Stability of Numerical Algorithms, 2002, ch. 10).
        tol = 20 * n * kappa * EPS
        rng = np.random.default_rng(99)
        x = rng.standard_normal((self.n_rows, n))
        return obj, dense, tol, x

    def test_dim(self, case):
        obj, dense, _, _ = case
        assert obj.dim == dense.shape[0]

    def test_dense(self, case):
        obj, dense, tol, _ = case
        dense_of = obj.dense() if hasattr(obj, "dense") else obj.matrix()
        np.testing.assert_allclose(dense_of, dense, rtol=0, atol=tol * np.abs(dense).max())

    def test_logdet_against_numpy_slogdet(self, case):
        obj, dense, tol, _ = case
        sign, ref = np.linalg.slogdet(dense)  # numpy reference
        assert sign == 1.0
        assert obj.logdet() == pytest.approx(ref, rel=tol, abs=tol * dense.shape[0])

    def test_solve_against_numpy_solve(self, case):
        obj, dense, tol, x = case
        ref = np.linalg.solve(dense, x.T)  # numpy reference (LU), for the test only
        got = obj.solve(x.T)
        assert got.shape == x.T.shape
        np.testing.assert_allclose(got, ref, rtol=0, atol=tol * np.abs(ref).max())
        one = obj.solve(x[0])
        assert one.shape == (dense.shape[0],)
        np.testing.assert_allclose(one, ref[:, 0], rtol=0, atol=tol * np.abs(ref).max())

    def test_quad_against_numpy(self, case):
        obj, dense, tol, x = case
        shift = np.linspace(-0.5, 0.5, dense.shape[0])
        d = x - shift
        ref = np.einsum("ij,ji->i", d, np.linalg.solve(dense, d.T))  # numpy reference
        got = obj.quad(x, shift=shift)
        assert got.shape == (x.shape[0],)
        np.testing.assert_allclose(got, ref, rtol=tol)
        assert isinstance(obj.quad(x[0]), float)

    def test_whiten_gives_identity_covariance(self, case):
        # A whitening W satisfies W S W^T = I: applied to the columns of a numpy
        # Cholesky factor of S it yields an orthogonal matrix (common practice).
        obj, dense, tol, x = case
        lo = np.linalg.cholesky(dense)
        z = obj.whiten(lo.T)  # rows are W l_j
        np.testing.assert_allclose(z.T @ z, np.eye(dense.shape[0]), rtol=0, atol=tol)
        # and ||W (x - shift)||^2 is the quadratic form
        shift = np.full(dense.shape[0], 0.25)
        zx = obj.whiten(x, shift=shift)
        np.testing.assert_allclose(np.sum(zx**2, axis=1), obj.quad(x, shift=shift), rtol=tol)
        assert obj.whiten(x[0]).shape == (dense.shape[0],)

    def test_loglik_against_scipy_multivariate_normal(self, case):
        obj, dense, tol, x = case
        ref = stats.multivariate_normal(np.zeros(dense.shape[0]), dense).logpdf(x)  # scipy.stats reference
        got = whiten.gaussian_loglik(x, obj)
        np.testing.assert_allclose(got, ref, rtol=tol * 10)

    def test_health_summary(self, case):
        obj, dense, _, _ = case
        h = obj.health
        assert isinstance(h, whiten.FactorHealth)
        assert 0 < h.rcond <= 1 and 0 < h.rcond_scaled <= 1
        # rcond is an estimate of 1/cond_1; LAPACK's estimator is within a factor of
        # ~n of the truth (Higham 2002, ch. 15) and never above 1/cond.
        true = 1.0 / np.linalg.cond(dense, 1)
        assert true / (10 * dense.shape[0]) <= h.rcond <= true * (10 * dense.shape[0])
        assert h.digits_lost >= 0

    def test_inputs_are_not_modified(self, case):
        obj, _, _, x = case
        before = x.copy()
        obj.quad(x, shift=np.ones(x.shape[1]))
        obj.whiten(x)
        obj.solve(x.T)
        np.testing.assert_array_equal(x, before)

    def test_shape_and_value_errors(self, case):
        obj, dense, _, x = case
        n = dense.shape[0]
        with pytest.raises(InputError, match="expected rows of length"):
            obj.quad(np.ones((2, n + 1)))
        with pytest.raises(InputError, match=r"expected shape"):
            obj.solve(np.ones(n + 1))
        bad = x.copy()
        bad[1, 0] = np.nan
        with pytest.raises(InputError, match="row 1, column 0"):
            obj.whiten(bad)


class TestFactorContract(CovarianceContract):
    def build(self):
        a = _spd(7, 1e3, seed=1)
        return whiten.cholesky(a), a


class TestDiagonalContract(CovarianceContract):
    def build(self):
        d = np.array([3.0, 0.2, 1e-3, 5.0, 0.7, 2.5])
        return whiten.diagonal(d), np.diag(d)


class TestLowRankPlusDiagonalContract(CovarianceContract):
    def build(self):
        rng = np.random.default_rng(5)
        u = rng.standard_normal((9, 3)) * np.array([2.0, 0.5, 0.1])
        d = rng.uniform(0.1, 2.0, 9)
        return whiten.low_rank_plus_diagonal(u, d), np.diag(d) + u @ u.T


class TestBlockDiagonalContract(CovarianceContract):
    def build(self):
        a = _spd(3, 50.0, seed=2)
        b = _spd(4, 10.0, seed=3) * 1e-2
        c = np.array([0.4, 0.9])
        obj = whiten.block_diagonal([a, whiten.cholesky(b), whiten.diagonal(c)])
        dense = np.zeros((9, 9))
        dense[:3, :3], dense[3:7, 3:7], dense[7:, 7:] = a, b, np.diag(c)
        return obj, dense


class TestKroneckerContract(CovarianceContract):
    def build(self):
        a = _spd(3, 20.0, seed=4)
        b = _spd(4, 30.0, seed=6)
        return whiten.kronecker(a, whiten.cholesky(b)), np.kron(a, b)


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
    A, B = _spd(a, ca, seed), _spd(b, cb, seed + 1)
    s = whiten.kronecker(A, B)
    dense = np.kron(A, B)  # numpy reference
    x = np.random.default_rng(seed).standard_normal((2, a * b))
    kappa = np.linalg.cond(dense)
    tol = 50 * a * b * kappa * EPS
    ref = np.linalg.solve(dense, x.T)
    np.testing.assert_allclose(s.solve(x.T), ref, rtol=0, atol=tol * np.abs(ref).max())
    assert s.logdet() == pytest.approx(np.linalg.slogdet(dense)[1], abs=tol * a * b)
