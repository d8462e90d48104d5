"""Simulated limits: what they hold and what they state (issue 19, item 2), and a weak screen is named (item 3).

References: the exact new-row law of the sample estimator (Tracy, Young & Mason 1992; scipy.stats F) for the
simulation's own check; for the other estimators an independent simulation here (fresh seeds and invented true
covariances, baselines fitted and scored with ``fit_baseline`` itself). Per-baseline rates of small baselines are
heavy-tailed, so the mean rate is estimated with control variates of exactly known mean alpha (exact-law rates of
the sample estimator and of each sensor alone, on the same reference and fresh rows; Lavenberg & Welch 1981), and
the harness is itself checked on an exact law it does not contain. Shrinkage and robust limits are checked against
the measured band they state (``whiten.monitor.calibrated.accuracy_note``), not against alpha: the bootstrap from
the fitted correlation does not hold alpha for them (a strict xfail keeps that visible).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import stats

import whiten
from whiten.monitor.calibrated import simulate_law
from whiten.monitor.limits import rows_within, t2_limit

P = 4
ALPHA = 0.01


def test_simulation_reproduces_the_exact_sample_law():
    """Unit weights: the simulated law must be the F law; 4 Monte Carlo s.e. (the s.e. it states)."""
    m = 12
    law = simulate_law("sample", np.eye(P), m, settings={"weights": np.ones(m)}, draws=200)
    for a in (0.1, 0.01, 0.001):
        exact = float(stats.f.sf(law.isf(a) / (P * (m + 1) * (m - 1) / (m * (m - P))), P, m - P))
        assert abs(exact - a) < 4 * law.se_at(a) + 1e-12, (a, exact, law.se_at(a))
    assert simulate_law("shrinkage", np.eye(P), 6, draws=20).quantiles == \
        simulate_law("shrinkage", np.eye(P), 6, draws=20).quantiles  # seeded: reproducible


def _truth(kind: str, p: int, rng) -> np.ndarray:
    """A lower factor of an invented true covariance: identity, AR(1) 0.5, AR(1) 0.9 or random, random units."""
    if kind == "random":
        low = np.eye(p) + 0.3 * rng.normal(size=(p, p))
    else:
        rho = {"identity": 0.0, "moderate": 0.5, "strong": 0.9}[kind]
        low = np.linalg.cholesky(rho ** np.abs(np.subtract.outer(np.arange(p), np.arange(p))))
    return low * rng.uniform(0.01, 100.0, size=p)[:, None]


def _exact_rates(x: np.ndarray, y: np.ndarray, alpha: float) -> list[float]:
    """Control variates of known mean alpha: per-sensor univariate exact rates (the F(1, m-1) law) averaged over
    sensors, and the p-variate sample estimator's exact F rate when m > p + 1 (Tracy, Young & Mason 1992)."""
    m, p = x.shape
    mu, sd = x.mean(axis=0), x.std(axis=0, ddof=1)
    out = [float(((((y - mu) / sd) ** 2) > t2_limit(alpha, 1, m)).mean())]
    if m > p + 1:
        d2 = whiten.Gaussian(mu, np.cov(x.T)).factor.quad(y, shift=mu)
        out.append(float((d2 > t2_limit(alpha, p, m)).mean()))
    return out


def _rate_ratio(rates, controls, alpha: float) -> tuple[float, float]:
    """Mean rate / alpha and its standard error, with the controls' known mean used as control variates
    (Lavenberg & Welch 1981; the coefficient fitted by least squares on the same baselines).

    The per-baseline rate of a small baseline is heavy-tailed (most alarm far less than alpha, a few far more),
    so the plain batch-means error of a dozen baselines is itself too small most of the time: the sample
    estimator with its exact F law failed the earlier 4-s.e. check (12 baselines, m = 5, 8, 80 at p = 4) in 30%
    of 200 seeds, always on the deaf side. The exact-law controls move with the same baselines and cancel most
    of that spread."""
    r = np.asarray(rates)
    c = np.asarray(controls) - alpha
    design = np.column_stack([np.ones(r.size), c])
    beta = np.linalg.lstsq(design, r, rcond=None)[0]
    adj = r - c @ beta[1:]
    return float(adj.mean() / alpha), float(adj.std(ddof=1) / math.sqrt(r.size) / alpha)


def _measure(estimator: str, kw: dict, kind: str, p: int, m: int, n_base: int, seed: int,
             alphas: tuple = (ALPHA,), fresh: int = 4000) -> dict:
    """Per alpha: rate ratio, its s.e. and the stated Monte Carlo error (ratio) of the default limit, over fresh
    baselines fitted by ``fit_baseline`` and scored once (a row alarms at alpha when its p-value is below it)."""
    rng = np.random.default_rng(seed)
    rates: dict = {a: [] for a in alphas}
    controls: dict = {a: [] for a in alphas}
    ses: dict = {a: [] for a in alphas}
    for _ in range(n_base):
        low = _truth(kind, p, rng)
        x = rng.normal(size=(m, p)) @ low.T
        opts = dict(kw)
        if opts.get("weights") == "w":
            opts["weights"] = rng.integers(1, 4, size=m).astype(float)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            b = whiten.fit_baseline(x, estimator=estimator, seed=int(rng.integers(2**31)), **opts)
            y = rng.normal(size=(fresh, p)) @ low.T
            s = b.score(y, alpha=alphas[0])
        assert s.attrs["limit_law"] == "simulated"
        for a in alphas:
            rates[a].append(float((s.d2 > b.limit_law.isf(a)).mean()))
            controls[a].append(_exact_rates(x, y, a))
            ses[a].append(b.limit_law.se_at(a))
    out = {}
    for a in alphas:
        ratio, se = _rate_ratio(rates[a], controls[a], a)
        out[a] = (ratio, se, math.sqrt(np.mean(np.square(ses[a])) / n_base) / a)
    return out


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_the_harness_holds_an_exact_law_at_small_m(seed):
    """The check itself, on a target that is not one of its controls: the sample estimator of the first p - 1
    sensors, whose exact F(p-1, m-p+1) rate has mean alpha (p = 4, m = 8 and 12). Below m = 2p no check of a
    few hundred baselines is sound: at m = 6 this one failed for 2 of 3 seeds (ratios 0.24 to 1.9 with 4 s.e.
    not covering 1), so no rate is claimed there; at m = 2p it failed for 1 of 30 other seeds (0.52, 4.8 s.e.)."""
    rng = np.random.default_rng(seed)
    for m in (8, 12):
        rates, controls = [], []
        for _ in range(150):
            low = _truth("random", P, rng)
            x = rng.normal(size=(m, P)) @ low.T
            y = rng.normal(size=(2000, P)) @ low.T
            sub = whiten.Gaussian(x[:, :-1].mean(axis=0), np.cov(x[:, :-1].T))
            d2 = sub.factor.quad(y[:, :-1], shift=sub.mean)
            rates.append(float((d2 > t2_limit(ALPHA, P - 1, m)).mean()))
            controls.append(_exact_rates(x, y, ALPHA))
        ratio, se = _rate_ratio(rates, controls, ALPHA)
        assert abs(ratio - 1.0) < 4 * se and se < 0.35, (m, ratio, se)


@pytest.mark.slow
@pytest.mark.parametrize("rule", ["ledoit-wolf", "oas"])
def test_shrinkage_limits_stay_in_their_stated_band(rule):
    """The honest statement (``accuracy_note``): over identity, moderate and strong correlation the actual rate of a
    shrinkage limit stays in the band stated for its size (4 s.e.), at alpha 1% and 0.1%."""
    from whiten.monitor.calibrated import MEASURED_RATIO

    # two of the four cases measured (each has its own seed; ("strong", 4, 8, 12) and ("identity", 5, 10, 13) passed
    # too, at about 5 minutes more of the suite)
    for kind, p, m, seed in (("moderate", 4, 8, 11), ("strong", 4, 60, 14)):
        lo, hi = next((lo, hi) for below, _, lo, hi in MEASURED_RATIO if m < below * p)
        res = _measure("shrinkage", {"shrinkage": rule}, kind, p, m, 25, seed, alphas=(0.01, 0.001))
        for alpha, (ratio, se, lim) in res.items():
            tol = 4 * math.hypot(se, lim)
            assert lo - tol < ratio < hi + tol, (kind, p, m, alpha, ratio, se, lim, lo, hi)


@pytest.mark.slow
@pytest.mark.xfail(strict=True, reason="known defect: the bootstrap world is the shrunk fit, less correlated than the "
                   "truth, so strongly correlated sensors get a deaf limit (about 0.75 of alpha at m = 10 p)")
def test_shrinkage_limit_holds_its_rate_for_strongly_correlated_sensors():
    ratio, se, lim = _measure("shrinkage", {}, "strong", 5, 50, 30, 21)[ALPHA]
    assert abs(ratio - 1.0) < 4 * math.hypot(se, lim), (ratio, se, lim)


def test_small_shrinkage_and_robust_baselines_say_their_limit_is_approximate():
    x = np.random.default_rng(8).normal(size=(30, 4))
    for est in ("shrinkage", "robust"):
        with pytest.warns(whiten.LimitAccuracyWarning, match=r"approximate at m = 30 < 10 p: actual false-alarm"):
            b = whiten.fit_baseline(x, estimator=est)
        assert "approximate at m = 30" in b.limit_law.describe(0.01)
    with warnings.catch_warnings():
        warnings.simplefilter("error", whiten.LimitAccuracyWarning)
        big = whiten.fit_baseline(np.random.default_rng(9).normal(size=(60, 4)), estimator="shrinkage")
        whiten.fit_baseline(x, weights=np.ones(30) + (np.arange(30) % 2))
        whiten.fit_baseline(x)
    assert "0.65 to 1.1 times alpha" in big.limit_law.describe(0.01)


def test_phase_new_works_for_shrinkage_with_fewer_rows_than_sensors():
    x = np.random.default_rng(2).normal(size=(3, 6))
    with pytest.warns(whiten.WeakScreenWarning):
        b = whiten.fit_baseline(x, estimator="shrinkage")
    with pytest.warns(whiten.WeakScreenWarning):
        s = b.score(x[:2], phase="new")
    assert np.isfinite(s.limit).all() and "simulated" in s.attrs["limit_basis"]


def test_weak_screen_names_the_rows_it_needs():
    """The issue's case: 9 rows for 8 sensors; the rows needed checked against the F law itself."""
    x = np.random.default_rng(5).normal(size=(9, 8))
    with pytest.warns(whiten.WeakScreenWarning, match=r"alarm limit 4\.2\d*e\+07 .* chi-square\(8\) limit 26\.12"):
        b = whiten.fit_baseline(x)
    with pytest.warns(whiten.WeakScreenWarning, match=r"about (\d+) reference rows"):
        s = b.score(x, alpha=0.01)
    ws = s.attrs["weak_screen"]
    need = ws["rows_needed"]
    chi = stats.chi2.isf(0.01, 8)  # scipy.stats
    assert ws["chi2_limit"] == pytest.approx(chi, rel=1e-12) and ws["limit"] == pytest.approx(s.limit[0])
    assert t2_limit(0.01, 8, need) <= 1.1 * chi < t2_limit(0.01, 8, need - 1)
    assert need == rows_within(0.01, 8)
    with warnings.catch_warnings():
        warnings.simplefilter("error", whiten.WeakScreenWarning)
        ok = whiten.fit_baseline(np.random.default_rng(6).normal(size=(400, 8))).score(x, alpha=0.01)
    assert ok.attrs["weak_screen"] is None
