"""Gaussian: densities, marginals, conditionals, sampling, entropy, KL, missing values."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import whiten
from whiten import InputError

from .helpers.matrices import EPS, covariance_with_scales, spd_with_condition


@pytest.fixture
def model():
    rng = np.random.default_rng(21)
    cov = covariance_with_scales(5, 1e3, rng, decades=2)
    mean = rng.standard_normal(5)
    return whiten.Gaussian(mean, cov, columns=["a", "b", "c", "d", "e"]), mean, cov, rng


def test_marginal_matches_sub_matrix(model):
    # textbook: the marginal of a normal is normal with the sub-vector / sub-matrix
    # (Anderson, An Introduction to Multivariate Statistical Analysis, 3rd ed. 2003, sec. 2.4; from memory)
    g, mean, cov, rng = model
    m = g.marginal(["d", "b"])
    idx = [3, 1]
    assert m.columns == ["d", "b"]
    assert np.allclose(m.mean, mean[idx])
    assert np.allclose(m.cov, cov[np.ix_(idx, idx)], rtol=1e-12, atol=0)
    x = rng.standard_normal((10, 2))
    ref = stats.multivariate_normal(mean[idx], cov[np.ix_(idx, idx)]).logpdf(x)
    assert np.allclose(m.logpdf(x), ref, rtol=1e-10)


def test_conditional_matches_textbook_formula(model):
    # textbook (Anderson 2003, Thm 2.5.1; from memory):
    #   mu_b|a = mu_b + S_ba S_aa^{-1} (x_a - mu_a),  S_b|a = S_bb - S_ba S_aa^{-1} S_ab,
    # evaluated here with numpy.linalg.solve
    g, mean, cov, rng = model
    a, b = [0, 2], [1, 3, 4]
    xa = np.array([0.3, -1.2])
    c = g.conditional(["a", "c"], xa)
    s_aa, s_ba, s_bb = cov[np.ix_(a, a)], cov[np.ix_(b, a)], cov[np.ix_(b, b)]
    mu_ref = mean[b] + s_ba @ np.linalg.solve(s_aa, xa - mean[a])
    cov_ref = s_bb - s_ba @ np.linalg.solve(s_aa, s_ba.T)
    kappa = np.linalg.cond(cov)
    assert c.columns == ["b", "d", "e"]
    assert np.allclose(c.mean, mu_ref, rtol=0, atol=50 * kappa * EPS * np.abs(mu_ref).max())
    assert np.allclose(c.cov, cov_ref, rtol=0, atol=50 * kappa * EPS * np.abs(cov).max())


def test_sampling_moments_within_statistical_tolerance(model):
    g, mean, cov, _ = model
    n = 40000
    x = g.sample(n, rng=123)
    sd = np.sqrt(np.diag(cov))
    # sample mean: standard error sd/sqrt(n); allow 4.5 standard errors
    assert np.all(np.abs(x.mean(0) - mean) <= 4.5 * sd / np.sqrt(n))
    # sample covariance entry (i,j) has variance (s_ii s_jj + s_ij^2)/n for normal data
    # (Anderson 2003, sec. 3.4; from memory); allow 5 standard errors
    se = np.sqrt((np.outer(np.diag(cov), np.diag(cov)) + cov**2) / n)
    assert np.all(np.abs(np.cov(x.T) - cov) <= 5 * se)


def test_entropy_matches_scipy(model):
    g, mean, cov, _ = model
    assert g.entropy() == pytest.approx(stats.multivariate_normal(mean, cov).entropy(), rel=1e-12)


def test_kl_divergence_matches_closed_form(model):
    # closed form KL(N1||N2) = (tr(S2^-1 S1) + d' S2^-1 d - p + ln det S2 - ln det S1) / 2
    # (standard result, e.g. Kullback, Information Theory and Statistics, 1959; from memory),
    # evaluated here with numpy.linalg.inv
    g, mean, cov, rng = model
    cov2 = spd_with_condition(5, 50.0, rng) * 0.3
    mean2 = mean + 0.2
    h = whiten.Gaussian(mean2, cov2)
    s2i = np.linalg.inv(cov2)
    d = mean2 - mean
    ref = 0.5 * (np.trace(s2i @ cov) + d @ s2i @ d - 5 + np.linalg.slogdet(cov2)[1] - np.linalg.slogdet(cov)[1])
    assert g.kl_divergence(h) == pytest.approx(ref, rel=1e-9)
    assert g.kl_divergence(g) == pytest.approx(0.0, abs=1e-12)


def test_missing_values_marginalize_matches_scipy_on_sub_vector(model):
    # reference: scipy.stats.multivariate_normal on the observed sub-vector
    g, mean, cov, rng = model
    x = rng.standard_normal((6, 5)) + mean
    x[1, 2] = np.nan
    x[2, [0, 4]] = np.nan
    x[3, :] = np.nan
    x[5, 2] = np.nan  # same pattern as row 1
    ev = g.evaluate(x, missing="marginalize")
    for r in range(6):
        obs = np.flatnonzero(~np.isnan(x[r]))
        assert ev.n_observed[r] == obs.size
        if obs.size == 0:
            assert np.isnan(ev.d2[r]) and np.isnan(ev.logpdf[r])
            continue
        sub = cov[np.ix_(obs, obs)]
        ref = stats.multivariate_normal(mean[obs], sub).logpdf(x[r, obs])
        dd = x[r, obs] - mean[obs]
        assert ev.logpdf[r] == pytest.approx(ref, rel=1e-10)
        assert ev.d2[r] == pytest.approx(dd @ np.linalg.solve(sub, dd), rel=1e-10)


def test_missing_value_without_marginalize_names_row_and_column(model):
    g, mean, _, _ = model
    df = pd.DataFrame([mean, mean], columns=list("abcde"), index=["t0", "t1"])
    df.iloc[1, 3] = np.nan
    with pytest.raises(InputError, match=r"row 1 \(index 't1'\), column 'd' is nan"):
        g.logpdf(df)


def test_dataframe_columns_matched_by_name_and_index_kept(model):
    g, mean, cov, rng = model
    x = rng.standard_normal((4, 5)) + mean
    df = pd.DataFrame(x, columns=list("abcde"), index=pd.date_range("2026-01-01", periods=4, freq="h"))
    shuffled = df[["e", "c", "a", "b", "d"]]
    out = g.logpdf(shuffled)
    assert isinstance(out, pd.Series) and out.index.equals(df.index)
    assert np.allclose(out.to_numpy(), g.logpdf(x))
    with pytest.raises(InputError, match=r"missing columns \['e'\], extra columns \['z'\]"):
        g.logpdf(df.rename(columns={"e": "z"}))


def test_single_vector_gives_float(model):
    g, mean, _, _ = model
    v = g.logpdf(mean)
    assert isinstance(v, float)
    assert g.mahalanobis(mean) == pytest.approx(0.0, abs=1e-12)


def test_shape_and_name_errors():
    with pytest.raises(InputError, match="mean has length 3 but cov is 2 x 2"):
        whiten.Gaussian([0, 0, 0], np.eye(2))
    g = whiten.Gaussian([0, 0], np.eye(2))
    with pytest.raises(InputError, match="expected 2 columns"):
        g.logpdf(np.zeros((3, 3)))
    with pytest.raises(InputError, match="missing: expected one of"):
        g.logpdf(np.zeros((3, 2)), missing="skip")
    with pytest.raises(InputError, match="unknown variable"):
        g.marginal(["q"])


def test_nonfinite_rows_are_found_by_the_blocked_pass():
    # the many-row path skips a separate scan: a NaN/inf must still be named exactly,
    # in whichever row block it sits (block_rows=4 puts row 9 in the third block)
    g = whiten.Gaussian([0.0, 0.0, 0.0], np.eye(3), columns=["a", "b", "c"])
    x = np.zeros((12, 3))
    x[9, 2] = -np.inf
    with whiten.settings(block_rows=4):
        with pytest.raises(InputError, match=r"row 9, column 'c' is -inf"):
            g.logpdf(x)
    x[9, 2] = 0.0
    x[11, 0] = np.nan
    with pytest.raises(InputError, match=r"row 11, column 'a' is nan"):
        g.mahalanobis(x)
    # a finite row far beyond the float range of d2 is not an input error: it is that far out
    assert g.mahalanobis(np.array([[1e200, 0.0, 0.0]]), squared=True)[0] == np.inf
