"""Exact limits of the squared distance, checked against scipy.stats and simulation."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

import whiten
from whiten.errors import InputError
from whiten.monitor import Scorer, score, t2_limit, t2_pvalue

from .conftest import correlated_cov, standin  # numpy sample estimate: what the exact laws assume

# small reference sets on purpose: the weak-screen notice is tested in tests/estimate/test_weak_screen_law.py
pytestmark = pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")


def _null_new_pvalues(reps: int, m: int, p: int, seed: int, phase: str = "new") -> np.ndarray:
    """p-values of one fresh row per independently fitted baseline (so draws are independent)."""
    rng = np.random.default_rng(seed)
    cov = correlated_cov(p, rng)
    mu = rng.normal(size=p) * 10
    chol = np.linalg.cholesky(cov)
    cols = [f"s{j}" for j in range(p)]
    out = np.empty(reps)
    for r in range(reps):
        x = mu + rng.standard_normal((m + 1, p)) @ chol.T
        b = standin(x[:m], cols)
        out[r] = score(b, x[m:], phase=phase)["p_value"].iloc[0]
    return out


def test_phase_new_pvalues_uniform_and_false_alarm_rate():
    p, m = 4, 25
    pv = _null_new_pvalues(1500, m, p, seed=11)
    # scipy.stats.kstest: the p-values of a correct law are Uniform(0, 1)
    assert stats.kstest(pv, "uniform").pvalue > 1e-3
    # false-alarm rate near alpha: binomial test (scipy.stats.binomtest) at alpha = 0.05
    alarms = int(np.sum(pv < 0.05))
    assert stats.binomtest(alarms, pv.size, 0.05).pvalue > 1e-3


def test_chi_square_law_is_wrong_for_estimated_parameters():
    # the same null draws scored with phase='known' must be visibly too small (the
    # estimated covariance inflates T²): a check that the F law is needed, and that
    # the KS test above has power. Reference: common practice / Tracy, Young & Mason (1992).
    p, m = 4, 25
    pv = _null_new_pvalues(600, m, p, seed=12, phase="known")
    assert stats.kstest(pv, "uniform").pvalue < 1e-6
    assert np.mean(pv < 0.05) > 0.08


def test_phase_reference_limit_against_simulation():
    p, m, reps = 3, 20, 1200
    rng = np.random.default_rng(5)
    cov = correlated_cov(p, rng)
    chol = np.linalg.cholesky(cov)
    cols = ["a", "b", "c"]
    first = np.empty(reps)
    pooled = []
    for r in range(reps):
        x = rng.standard_normal((m, p)) @ chol.T
        # Scorer.score_array is what score() runs, without building a DataFrame each time
        s = Scorer(standin(x, cols), phase="reference").score_array(x)
        first[r] = s["p_value"][0]
        pooled.append(s["d2"])
        # bound of the Beta law (Tracy, Young & Mason 1992): T² <= (m-1)²/m for a reference row
        assert s["d2"].max() <= (m - 1) ** 2 / m * (1 + 1e-12)
    # scipy.stats.kstest: reference-row p-values uniform under the Beta law
    assert stats.kstest(first, "uniform").pvalue > 1e-3
    pooled = np.concatenate(pooled)
    # simulated 95% point of reference-row T² versus the exact limit; the pooled rows are
    # exchangeable, so the empirical tail fraction above the limit must be near 5%
    lim = t2_limit(0.05, p, m, phase="reference")
    frac = np.mean(pooled > lim)
    se = np.sqrt(0.05 * 0.95 / reps) * 3  # rows of one fit are dependent: inflate the binomial se
    assert abs(frac - 0.05) < 3 * se


def test_pvalue_formulas_against_scipy_distributions():
    d2 = np.array([0.5, 3.0, 12.0, 40.0])
    p, m = 5, 40
    # Tracy, Young & Mason (1992) / Montgomery, Introduction to SQC (from memory):
    # new row: T² m(m-p) / (p(m+1)(m-1)) ~ F(p, m-p)
    ref_new = stats.f.sf(d2 * m * (m - p) / (p * (m + 1) * (m - 1)), p, m - p)
    assert np.allclose(t2_pvalue(d2, p, m, phase="new"), ref_new, rtol=1e-12)
    # reference row: T² m / (m-1)^2 ~ Beta(p/2, (m-p-1)/2)
    ref_ref = stats.beta.sf(d2 * m / (m - 1) ** 2, p / 2, (m - p - 1) / 2)
    assert np.allclose(t2_pvalue(d2, p, m, phase="reference"), ref_ref, rtol=1e-12)
    # known parameters: chi-square(p)
    assert np.allclose(t2_pvalue(d2, p, phase="known"), stats.chi2.sf(d2, p), rtol=1e-12)
    for phase in ("new", "reference", "known"):
        lim = t2_limit(0.001, p, m, phase=phase)
        assert t2_pvalue(lim, p, m, phase=phase) == pytest.approx(0.001, rel=1e-8)


def test_per_row_p_observed():
    # rows with k observed sensors use the law with p = k (the marginal is estimated from the same m rows)
    d2 = np.array([4.0, 4.0, 4.0])
    k = np.array([1, 2, 3])
    m = 30
    ref = [stats.f.sf(4.0 * m * (m - j) / (j * (m + 1) * (m - 1)), j, m - j) for j in k]
    assert np.allclose(t2_pvalue(d2, k, m, phase="new"), ref, rtol=1e-12)
    assert np.isnan(t2_pvalue([np.nan, 1.0], [0, 0], m)).all()


def test_guards():
    with pytest.raises(InputError, match="more reference rows than sensors"):
        t2_pvalue([1.0], 5, 5, phase="new")
    with pytest.raises(InputError, match="m >= p \\+ 2"):
        t2_limit(0.01, 4, 5, phase="reference")
    with pytest.raises(InputError, match="phase: expected one of"):
        t2_limit(0.01, 4, 50, phase="old")
    with pytest.raises(InputError, match="strictly between 0 and 1"):
        t2_limit(1.5, 4, 50)
    g = whiten.Gaussian(np.zeros(2), np.eye(2), columns=["a", "b"])
    with pytest.raises(InputError, match="use phase='known'"):
        score(g, np.zeros((1, 2)))
    # a baseline fitted on fewer rows than sensors cannot give the F limit
    rng = np.random.default_rng(0)


    b = standin(rng.standard_normal((4, 3)), ["a", "b", "c"])
    b.n = 3
    with pytest.raises(InputError, match="m=3, p=3"):
        score(b, np.zeros((1, 3)))


def test_reference_phase_notes_rows_beyond_the_bound():
    rng = np.random.default_rng(21)
    x = rng.standard_normal((30, 2))
    b = standin(x, ["a", "b"])
    far = np.array([[40.0, -40.0]])
    s = score(b, far, phase="reference")
    # (m-1)^2/m is the largest T² a reference row can take (Tracy, Young & Mason 1992)
    assert s["d2"].iloc[0] > 29 ** 2 / 30
    assert s["p_value"].iloc[0] == 0.0 and s["alarm"].iloc[0]
    assert "largest a reference row can reach" in s["note"].iloc[0]
    assert score(b, x, phase="reference")["note"].eq("").all()
