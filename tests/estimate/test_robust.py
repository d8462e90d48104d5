"""The robust (FastMCD) estimator against statsmodels' CovDetMCD and Gaussian theory."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import whiten
from whiten.estimate.robust import MCD_SEED, consistency_factor

# small reference sets on purpose: the weak-screen notice is tested in tests/estimate/test_weak_screen_law.py
pytestmark = pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")

CovDetMCD = pytest.importorskip("statsmodels.robust.covariance").CovDetMCD


def _contaminated(n=400, seed=3):
    """Four process sensors; 10% of the rows come from a gross upset (shifted and scattered)."""
    rng = np.random.default_rng(seed)
    a = np.array([[1, 0, 0, 0], [.6, .8, 0, 0], [.2, -.3, .9, 0], [.1, .2, .3, 1.]])
    x = rng.normal(size=(n, 4)) @ a.T * [2, 1, 3, .5] + [10, 20, 30, 40]
    bad = np.sort(rng.choice(n, n // 10, replace=False))
    x[bad] += np.array([8.0, -6.0, 15.0, 4.0]) + rng.normal(size=(bad.size, 4))
    return x, bad


def test_matches_statsmodels_cov_det_mcd_with_ten_percent_outliers():
    x, bad = _contaminated()
    b = whiten.fit_baseline(x, estimator="robust", columns=["a", "b", "c", "d"])
    ref = CovDetMCD(x).fit(None)  # statsmodels 0.15, h = (n + p + 1) // 2, reweighted
    # Both end with the mean and (n_kept - 1)-covariance of the rows that survive a 0.975
    # chi-square cut, times the same truncation factor (Croux & Haesbroeck 1999). When the two
    # keep the same rows (the upset is gross, the clean rows well inside) they agree to
    # rounding, ~kappa * eps; anything looser would hide a different retained set.
    np.testing.assert_allclose(b.mean, ref.mean, rtol=1e-12)
    np.testing.assert_allclose(b.cov, ref.cov, rtol=1e-10, atol=1e-12 * np.abs(ref.cov).max())
    assert set(bad) <= set(b.params["flagged_rows"])  # every planted upset row is flagged
    assert b.params["n_flagged"] == len(b.params["flagged_rows"]) == 400 - b.n
    assert b.params["h"] == (400 + 4 + 1) // 2 and b.params["seed"] == MCD_SEED
    # the plain sample covariance is pulled far away by the upset (numpy.cov, for contrast)
    assert np.abs(np.cov(x, rowvar=False) - ref.cov).max() > 10 * np.abs(b.cov - ref.cov).max() + 1


def test_flagged_labels_and_reproducible():
    x, bad = _contaminated(n=200, seed=8)
    df = pd.DataFrame(x, columns=list("abcd"), index=[f"r{k}" for k in range(200)])
    b1 = whiten.fit_baseline(df, estimator="robust")
    b2 = whiten.fit_baseline(df, estimator="robust")
    assert b1.params["flagged_labels"] == [f"r{k}" for k in b1.params["flagged_rows"]]
    assert np.array_equal(b1.cov, b2.cov)  # fixed internal seed
    b3 = whiten.fit_baseline(df, estimator="robust", seed=5)
    assert set(bad) <= set(b3.params["flagged_rows"])


def test_consistency_on_clean_gaussian_rows():
    rng = np.random.default_rng(17)
    sigma = np.array([[4.0, 1.2, 0.0], [1.2, 1.0, 0.3], [0.0, 0.3, 2.0]])
    x = rng.multivariate_normal([1.0, -2.0, 0.5], sigma, size=1200)
    b = whiten.fit_baseline(x, estimator="robust")
    # textbook: var of a sample variance is 2 sigma^4 / n; MCD is less efficient (factor < 3
    # for the reweighted estimator at p = 3, Croux & Haesbroeck 1999, from memory), so 5 standard
    # errors with that inflation bound the diagonal
    se = np.sqrt(3 * 2 * np.diag(sigma) ** 2 / 1200)
    assert np.all(np.abs(np.diag(b.cov) - np.diag(sigma)) < 5 * se)
    # the raw factor's consistency correction, checked against scipy.stats directly
    q = stats.chi2.ppf(0.5, 3)
    assert consistency_factor(0.5, 3) == pytest.approx(0.5 / stats.chi2.cdf(q, 5), rel=1e-14)
    # about 2.5% of clean rows fall beyond the 0.975 cut (binomial, 5 standard deviations)
    k = b.params["n_flagged"]
    assert abs(k - 0.025 * 1200) < 5 * np.sqrt(1200 * 0.025 * 0.975) + 5


def test_robust_errors():
    rng = np.random.default_rng(1)
    with pytest.raises(whiten.InputError, match="needs more than p \\+ 1"):
        whiten.fit_baseline(rng.normal(size=(4, 3)), estimator="robust")
    with pytest.raises(whiten.InputError, match="support_fraction"):
        whiten.fit_baseline(rng.normal(size=(40, 3)), estimator="robust", support_fraction=0.2)
    x = rng.normal(size=(60, 3))
    x[:50] = x[0]  # most rows identical: an exact fit
    with pytest.raises(whiten.InputError, match="hyperplane|singular"):
        whiten.fit_baseline(x, estimator="robust")
