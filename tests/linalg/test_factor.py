"""The Factor: accuracy against numpy/scipy, updates, whitening in blocks, the reported inverse diagonal.

Tolerances are written as c * p * kappa * eps (forward errors) or c * p * eps
(backward errors of Cholesky, which is backward stable: Higham, *Accuracy and
Stability of Numerical Algorithms*, 2nd ed., 2002, ch. 10; bound quoted from
memory, the constants c are generous).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import given, strategies as st
from scipy import stats
from scipy.spatial.distance import mahalanobis as scipy_mahalanobis

import whiten
from whiten import ConditioningWarning, InputError, NotPositiveDefiniteError

from ..helpers.matrices import EPS, covariance_with_scales, spd_with_condition


CONDS = [1e1, 1e3, 1e6, 1e9]


@pytest.mark.parametrize("cond", CONDS)
def test_logpdf_matches_scipy_multivariate_normal(cond):
    # reference: scipy.stats.multivariate_normal (eigendecomposition based)
    rng = np.random.default_rng(int(np.log10(cond)))
    p = 7
    cov = spd_with_condition(p, cond, rng)
    mean = rng.standard_normal(p)
    x = rng.multivariate_normal(mean, cov, size=300, method="cholesky") + 0.1 * rng.standard_normal((300, p))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConditioningWarning)
        g = whiten.Gaussian(mean, cov)
    ref = stats.multivariate_normal(mean, cov).logpdf(x)
    ours = g.logpdf(x)
    d2 = g.mahalanobis(x, squared=True)
    tol = 50 * p * cond * EPS * (np.abs(ref) + d2 + p)
    assert np.all(np.abs(ours - ref) <= tol), np.max(np.abs(ours - ref) / tol)


@pytest.mark.parametrize("cond", CONDS)
def test_mahalanobis_matches_scipy_spatial(cond):
    # reference: scipy.spatial.distance.mahalanobis with the inverse formed *in the test*
    rng = np.random.default_rng(10 + int(np.log10(cond)))
    p = 5
    cov = covariance_with_scales(p, cond, rng, decades=3)
    mean = rng.standard_normal(p)
    x = mean + rng.standard_normal((40, p)) * np.sqrt(np.diag(cov))
    vi = np.linalg.inv(cov)
    ref = np.array([scipy_mahalanobis(r, mean, vi) for r in x])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConditioningWarning)
        ours = whiten.Gaussian(mean, cov).mahalanobis(x)
    assert np.allclose(ours, ref, rtol=20 * p * cond * EPS, atol=0)


@st.composite
def spd_case(draw):
    p = draw(st.integers(1, 12))
    log_cond = draw(st.floats(0.0, 10.0))
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    scale = 10.0 ** draw(st.floats(-6, 6))
    return spd_with_condition(p, 10.0**log_cond, rng, scale=scale), 10.0**log_cond, rng


@given(spd_case())
def test_properties_on_random_spd(case):
    a, cond, rng = case
    p = a.shape[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConditioningWarning)
        f = whiten.cholesky(a)
    assert f.jitter == 0.0
    # backward error of the factorization (Higham 2002, Thm 10.3: c p eps ||a||)
    assert np.linalg.norm(f.lower @ f.lower.T - a) <= 20 * p * EPS * np.linalg.norm(a)
    # forward error of a solve: c p kappa eps
    x_true = rng.standard_normal(p)
    b = a @ x_true
    x = f.solve(b)
    assert np.linalg.norm(x - x_true) <= 50 * p * cond * EPS * np.linalg.norm(x_true) + 1e-300
    # quadratic forms are never negative
    rows = rng.standard_normal((5, p)) * np.sqrt(np.diag(a))
    assert np.all(f.quad(rows) >= 0)
    # logdet against numpy.linalg.slogdet (LU based)
    sign, ref = np.linalg.slogdet(a)
    assert sign == 1.0
    assert abs(f.logdet() - ref) <= 20 * p * cond * EPS + 1e-12 * abs(ref)
    # rcond estimate (LAPACK dpocon) within a factor 10 of 1 / cond_1 from numpy
    true_rcond = 1.0 / np.linalg.cond(a, 1)
    assert true_rcond / 10 <= f.rcond <= true_rcond * 10


@given(spd_case())
def test_update_and_downdate_equal_refactoring(case):
    a, cond, rng = case
    p = a.shape[0]
    v = rng.standard_normal(p) * np.sqrt(np.diag(a))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConditioningWarning)
        f = whiten.cholesky(a)
        up = f.update(v)
        ref = whiten.cholesky(a + np.outer(v, v))
    scale = np.linalg.norm(ref.lower)
    assert np.linalg.norm(up.lower - ref.lower) <= 100 * p * cond * EPS * scale
    back = up.downdate(v)
    assert np.linalg.norm(back.matrix() - a) <= 100 * p * cond * EPS * np.linalg.norm(a + np.outer(v, v))


def test_downdate_that_loses_definiteness_raises_naming_pivot():
    f = whiten.cholesky(np.diag([1.0, 2.0, 3.0]), columns=["t1", "t2", "t3"])
    with pytest.raises(NotPositiveDefiniteError, match=r"downdate would lose positive definiteness at pivot 't2'"):
        f.downdate([0.0, 2.0, 0.0])


def test_inputs_are_never_modified():
    rng = np.random.default_rng(5)
    a = spd_with_condition(5, 1e3, rng)
    x = rng.standard_normal((30, 5))
    a0, x0 = a.copy(), x.copy()
    f = whiten.cholesky(a)
    f.solve(x.T)
    f.whiten(x, shift=x[0])
    f.quad(x)
    f.update(x[:2])
    assert np.array_equal(a, a0) and np.array_equal(x, x0)
    assert not f.lower.flags.writeable


def test_blocked_path_keeps_order_and_values():
    rng = np.random.default_rng(6)
    a = spd_with_condition(9, 1e4, rng)
    x = rng.standard_normal((1001, 9))
    f = whiten.cholesky(a)
    ref = np.einsum("ij,ij->i", x @ np.linalg.inv(np.linalg.cholesky(a)).T, x @ np.linalg.inv(np.linalg.cholesky(a)).T)
    with whiten.settings(block_rows=7):
        small = f.quad(x)
        z = f.whiten(x)
    big = f.quad(x)
    assert np.allclose(small, ref, rtol=1e-9) and np.allclose(big, small, rtol=1e-13)
    assert np.allclose(np.einsum("ij,ij->i", z, z), ref, rtol=1e-9)
    assert np.allclose(f.unwhiten(z), x, rtol=1e-9, atol=1e-12)


def test_inv_diag_matches_numpy_inverse_diagonal():
    # reference: numpy.linalg.inv evaluated in the test
    rng = np.random.default_rng(7)
    a = spd_with_condition(6, 1e5, rng)
    f = whiten.cholesky(a)
    assert np.allclose(f.inv_diag(), np.diag(np.linalg.inv(a)), rtol=100 * 6 * 1e5 * EPS)


def test_from_lower_validates():
    with pytest.raises(InputError, match="above the diagonal"):
        whiten.Factor.from_lower([[1.0, 1.0], [0.0, 1.0]])
    with pytest.raises(NotPositiveDefiniteError, match="positive diagonal"):
        whiten.Factor.from_lower([[1.0, 0.0], [1.0, 0.0]])
    f = whiten.Factor.from_lower([[2.0, 0.0], [1.0, 3.0]])
    assert f.logdet() == pytest.approx(np.log(36.0))


def test_columns_follow_the_factor_through_its_operations():
    a = spd_with_condition(4, 10.0, np.random.default_rng(8))
    cols = ["a", "b", "c", "d"]
    f = whiten.cholesky(a, columns=cols)
    assert f.update(np.ones(4)).columns == cols
    assert f.subset([3, 1]).columns == ["d", "b"]
    g = whiten.Factor.from_lower(f.lower, columns=cols)
    assert g.columns == cols and g.health.method == "given"
    with pytest.raises(InputError, match="columns: expected 4 names, got 3"):
        whiten.Factor.from_lower(f.lower, columns=cols[:3])
    with pytest.raises(NotPositiveDefiniteError, match="diagonal entry 'b'"):
        whiten.Factor.from_lower(np.diag([1.0, 0.0, 1.0, 1.0]), columns=cols)
