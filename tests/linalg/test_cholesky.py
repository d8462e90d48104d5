"""cholesky(): repair with disclosure, failure in tiers, warnings at the user's line, labels.

References: numpy.linalg (solve, eigenvalues through the matrices built here)
and scipy.stats.norm, named beside each check.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import whiten
from whiten import ConditioningWarning, InputError, JitterWarning, NotPositiveDefiniteError

from ..helpers.matrices import EPS, spd_with_condition

#: the Gram matrix of [[1,2,3],[4,5,6],[7,8,9]], which has rank 2
GRAM_RANK2 = (lambda a: a.T @ a)(np.array([[1.0, 2, 3], [4, 5, 6], [7, 8, 9]]))


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
    with whiten.settings(jitter_ceiling=1e-12, jitter_start=1e-13):
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
    with whiten.settings(digits_warn=3.0):
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


def test_dataframe_columns_flow_into_the_factor():
    df = pd.DataFrame([[2.0, 0.3], [0.3, 1.0]], columns=["flow", "temp"], index=["flow", "temp"])
    f = whiten.cholesky(df)
    assert f.columns == ["flow", "temp"]


def test_float32_input_is_promoted():
    a = np.array([[2.0, 0.5], [0.5, 1.0]], dtype=np.float32)
    f = whiten.cholesky(a)
    assert f.lower.dtype == np.float64
    assert f.quad(np.array([1.0, 1.0], dtype=np.float32)) == pytest.approx(
        np.array([1.0, 1.0]) @ np.linalg.solve(a.astype(float), [1.0, 1.0]))


def test_unknown_option_is_refused():
    with pytest.raises(InputError, match="unknown setting"):
        whiten.change_settings(jiter_ceiling=1.0)


def test_columns_are_checked_and_name_the_variable_in_messages():
    with pytest.raises(InputError, match="columns: expected 3 names, got 2"):
        whiten.cholesky(np.eye(3), columns=["a", "b"])
    with pytest.raises(NotPositiveDefiniteError, match="diagonal entry 'flow' is negative"):
        whiten.cholesky(np.diag([1.0, -1.0]), columns=["temp", "flow"])
    f = whiten.cholesky(np.eye(2), columns=["temp", "flow"])
    assert f.columns == ["temp", "flow"]
    assert whiten.cholesky(np.eye(2)).columns is None
