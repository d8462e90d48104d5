"""Cholesky Factor: accuracy against numpy/scipy, repair with disclosure, failure tiers.

Tolerances are written as c * p * kappa * eps (forward errors) or c * p * eps
(backward errors of Cholesky, which is backward stable: Higham, *Accuracy and
Stability of Numerical Algorithms*, 2nd ed., 2002, ch. 10; bound quoted from
memory, the constants c are generous).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, strategies as st
from scipy import stats
from scipy.spatial.distance import mahalanobis as scipy_mahalanobis

import whiten
from whiten import ConditioningWarning, InputError, JitterWarning, NotPositiveDefiniteError

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


def test_wide_dynamic_range_is_not_singular():
    # worked case: diag(1, 1e-11) is a valid covariance; logpdf equals the sum of the
    # two univariate normal log-densities (reference: scipy.stats.norm)
    cov = np.diag([1.0, 1e-11])
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no jitter and no conditioning warning
        f = whiten.cholesky(cov)
        g = whiten.Gaussian([0.5, -2.0], f)
    assert f.jitter == 0.0 and f.digits_lost < 1
    x = np.array([[0.7, -2.0 + 3e-6], [-1.0, -2.0 - 1e-6]])
    ref = stats.norm(0.5, 1.0).logpdf(x[:, 0]) + stats.norm(-2.0, np.sqrt(1e-11)).logpdf(x[:, 1])
    assert np.allclose(g.logpdf(x), ref, rtol=1e-12)


GRAM_RANK2 = (lambda a: a.T @ a)(np.array([[1.0, 2, 3], [4, 5, 6], [7, 8, 9]]))


def test_rank_two_gram_is_found_by_pivoted_factorization():
    # [[1,2,3],[4,5,6],[7,8,9]] has rank 2 (second column is the mean of the others), so its Gram does
    rep = whiten.pivoted_cholesky(GRAM_RANK2, columns=["c1", "c2", "c3"])
    assert rep.rank == 2 and not rep.full_rank
    (dep,) = rep.dependent
    assert set(rep.dependencies[dep]) == {"c1", "c2", "c3"} - {dep}
    assert "is a linear combination of" in rep.describe()[0]
    # coefficients reproduce the dependent column of the data (numpy check on the data itself)
    a = np.array([[1.0, 2, 3], [4, 5, 6], [7, 8, 9]])
    cols = {"c1": 0, "c2": 1, "c3": 2}
    recon = sum(c * a[:, cols[n]] for n, c in rep.coefficients[dep].items())
    assert np.allclose(recon, a[:, cols[dep]], rtol=1e-8)


def test_rank_two_gram_refused_without_jitter():
    with pytest.raises(NotPositiveDefiniteError, match="singular to working precision"):
        whiten.cholesky(GRAM_RANK2, jitter=False)


def test_singular_psd_is_jittered_with_disclosure():
    with pytest.warns(JitterWarning, match=r"added jitter [0-9.e+-]+ to the diagonal"):
        f = whiten.cholesky(GRAM_RANK2)
    assert f.jitter > 0 and f.health.method == "cholesky+jitter"
    assert f.health.jitter_relative == pytest.approx(f.jitter / np.mean(np.diag(GRAM_RANK2)))
    target = GRAM_RANK2 + f.jitter * np.eye(3)
    assert np.allclose(f.lower @ f.lower.T, target, rtol=0, atol=50 * EPS * np.abs(target).max())
    assert np.allclose(f.matrix(), target, rtol=0, atol=50 * EPS * np.abs(target).max())


def test_jitter_ceiling_is_respected():
    # eigenvalues about 2 and -5e-10: rounding-level negative, so jitter may repair it,
    # but only a jitter above ~5e-10 of the mean diagonal does
    a = np.array([[1.0, 1.0], [1.0, 1.0 - 1e-9]])
    with whiten.options(jitter_ceiling=1e-12, jitter_start=1e-13):
        with pytest.raises(NotPositiveDefiniteError, match="even with jitter"):
            whiten.cholesky(a)
    with pytest.warns(JitterWarning, match="1.0e-09 of the mean diagonal"):
        f = whiten.cholesky(a)
    assert f.jitter == pytest.approx(1e-9 * (1 - 0.5e-9))


def test_explicit_jitter_amount_is_added_and_recorded():
    f = whiten.cholesky(GRAM_RANK2, jitter=1e-3)
    assert f.jitter == 1e-3
    assert np.allclose(f.matrix(), GRAM_RANK2 + 1e-3 * np.eye(3))


@pytest.mark.parametrize("a", [
    np.array([[1.0, 2.0], [2.0, 1.0]]),                 # eigenvalues 3, -1
    np.array([[4.0, 0, 0], [0, 1.0, 0], [0, 0, -1e-3]]),
])
def test_indefinite_is_an_error_not_jittered(a):
    with pytest.raises(NotPositiveDefiniteError, match="indefinite|negative"):
        whiten.cholesky(a)


def test_ill_conditioned_warns_once_at_the_users_line():
    rng = np.random.default_rng(3)
    a = spd_with_condition(6, 1e13, rng)
    with pytest.warns(ConditioningWarning, match=r"about 1[0-9.]+ of ~16 significant digits") as rec:
        f = whiten.cholesky(a)
    assert rec[0].filename == __file__  # stacklevel points here, not into whiten
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for _ in range(50):  # reuse never warns again
            f.solve(np.ones(6))
            f.quad(np.ones(6))
    assert f.digits_lost > 10 and f.jitter == 0.0


def test_digits_warn_threshold_is_settable():
    rng = np.random.default_rng(4)
    a = spd_with_condition(4, 1e5, rng)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        whiten.cholesky(a)
    with whiten.options(digits_warn=3.0):
        with pytest.warns(ConditioningWarning):
            whiten.cholesky(a)


@pytest.mark.parametrize("bad, match", [
    (np.array([[1.0, np.nan], [np.nan, 1.0]]), r"row 0, column 1 is nan"),
    (np.array([[1.0, 0.0], [0.0, np.inf]]), r"row 1, column 1 is inf"),
    (np.ones((2, 3)), r"must be square"),
    (np.array([[2.0, 1.0], [0.5, 2.0]]), r"not symmetric: largest asymmetry"),
    (np.zeros((0, 0)), r"empty"),
])
def test_bad_matrices_are_input_errors(bad, match):
    with pytest.raises(InputError, match=match):
        whiten.cholesky(bad)


def test_non_numeric_dataframe_column_is_named():
    df = pd.DataFrame({"p1": [1.0, 0.1], "p2": ["0.1", "abc"]}, index=["p1", "p2"])
    with pytest.raises(InputError, match=r"column 'p2' is not numeric: row 1 .* 'abc'"):
        whiten.cholesky(df)


def test_dataframe_names_flow_into_the_factor():
    df = pd.DataFrame([[2.0, 0.3], [0.3, 1.0]], columns=["flow", "temp"], index=["flow", "temp"])
    f = whiten.cholesky(df)
    assert f.columns == ["flow", "temp"]


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
    with whiten.options(block_rows=7):
        small = f.quad(x)
        z = f.whiten(x)
    big = f.quad(x)
    assert np.allclose(small, ref, rtol=1e-9) and np.allclose(big, small, rtol=1e-13)
    assert np.allclose(np.einsum("ij,ij->i", z, z), ref, rtol=1e-9)
    assert np.allclose(f.unwhiten(z), x, rtol=1e-9, atol=1e-12)


def test_float32_input_is_promoted():
    a = np.array([[2.0, 0.5], [0.5, 1.0]], dtype=np.float32)
    f = whiten.cholesky(a)
    assert f.lower.dtype == np.float64
    assert f.quad(np.array([1.0, 1.0], dtype=np.float32)) == pytest.approx(
        np.array([1.0, 1.0]) @ np.linalg.solve(a.astype(float), [1.0, 1.0]))


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


def test_unknown_option_is_refused():
    with pytest.raises(InputError, match="unknown option"):
        whiten.set_options(jiter_ceiling=1.0)
