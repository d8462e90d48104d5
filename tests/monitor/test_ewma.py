"""The multivariate EWMA option of scoring: definition, run-length limits, drift detection.

References: Lowry, Woodall, Champ & Rigdon (1992) for the statistic and the p = 2, 4 limits; Lucas &
Saccucci (1990) for the univariate limits; Brook & Evans (1972) for the Markov-chain ARL written out
below; Prabhu & Runger (1997). Published values are quoted from memory.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import whiten
from whiten.monitor import mewma_arl, mewma_limit, score, score_file


def _gaussian(p, seed=0, scale=None):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(p, p))
    cov = a @ a.T + p * np.eye(p)
    if scale is not None:
        cov = cov * np.outer(scale, scale)
    mean = rng.normal(size=p) * 10
    cols = [f"s{j}" for j in range(p)]
    return whiten.Gaussian(mean, cov, columns=cols), mean, cov, cols


def _brute_mewma(x, mean, cov, lam):
    """The textbook definition in raw units: z_t, S_t = c_t Sigma, T2 = z' S_t^{-1} z by numpy.linalg.solve.

    Rows with a NaN are held (z and t unchanged, NaN statistic), the rule documented in whiten.monitor.ewma.
    Also the drop terms: T2 minus the same quadratic form on the sub-vector without sensor j.
    """
    n, p = x.shape
    z = np.zeros(p)
    t = 0
    t2 = np.full(n, np.nan)
    drop = np.full((n, p), np.nan)
    for i in range(n):
        if np.isnan(x[i]).any():
            continue
        t += 1
        z = lam * (x[i] - mean) + (1 - lam) * z
        s = lam / (2 - lam) * (1 - (1 - lam) ** (2 * t)) * cov
        t2[i] = z @ np.linalg.solve(s, z)
        for j in range(p):
            k = [q for q in range(p) if q != j]
            drop[i, j] = t2[i] - z[k] @ np.linalg.solve(s[np.ix_(k, k)], z[k])
    return t2, drop


@pytest.mark.parametrize("lam", [0.05, 0.3, 1.0])
def test_statistic_matches_the_definition_with_held_rows(lam):
    g, mean, cov, cols = _gaussian(4, seed=3)
    rng = np.random.default_rng(7)
    x = rng.multivariate_normal(mean, cov, size=120)
    x[60:, 1] += np.linspace(0, 5, 60)
    x[[10, 11, 80], [2, 0, 3]] = np.nan
    frame = pd.DataFrame(x, columns=cols)
    before = frame.copy()
    s = score(g, frame, phase="known", ewma=lam, ewma_arl=100)
    pd.testing.assert_frame_equal(frame, before)  # input untouched
    t2, drop = _brute_mewma(x, mean, cov, lam)
    held = np.isnan(x).any(axis=1)
    assert np.array_equal(np.isnan(s["ewma_t2"].to_numpy()), held)
    # forward error of a p = 4 solve on a well-conditioned covariance: a few hundred eps, relative to T2
    ok = ~held
    np.testing.assert_allclose(s["ewma_t2"].to_numpy()[ok], t2[ok], rtol=1e-10)
    got = s[[f"smooth:{c}" for c in cols]].to_numpy()
    np.testing.assert_allclose(got[ok], drop[ok], rtol=1e-8, atol=1e-10 * np.nanmax(t2))
    assert list(s["ewma_rows"]) == list(np.cumsum(~held))
    assert not s["ewma_alarm"][held].any()
    assert s["note"][held].str.contains("ewma: held").all()
    assert (s["ewma_top"][ok] == np.asarray(cols)[np.argmax(drop[ok], axis=1)]).all()
    assert (s["ewma_alarm"] == (s["ewma_t2"] > s["ewma_limit"])).all()


def test_units_do_not_matter():
    # an affine change of every sensor (factors 1e-6 .. 1e6, shifts) leaves the statistic unchanged.
    # Shifts of up to ~1e3 sd: the shifted inputs are rounded to eps * 1e3 sd, so 1e-10 relative holds
    # (a shift of 1e7 sd would itself round the readings to 1e-9 sd, for any method)
    g, mean, cov, cols = _gaussian(3, seed=5)
    scale = np.array([1e-6, 1.0, 1e6])
    shift = scale * np.array([3e3, -2e3, 7e2])
    g2 = whiten.Gaussian(mean * scale + shift, cov * np.outer(scale, scale), columns=cols)
    x = np.random.default_rng(2).multivariate_normal(mean, cov, size=200)
    a = score(g, x, phase="known", ewma=0.1, ewma_arl=200)
    b = score(g2, x * scale + shift, phase="known", ewma=0.1, ewma_arl=200)
    np.testing.assert_allclose(b["ewma_t2"], a["ewma_t2"], rtol=1e-10)
    assert (a["ewma_alarm"] == b["ewma_alarm"]).all()


def test_each_in_control_statistic_is_chi_square():
    # the exact covariance S_t makes every T2_t chi-square(p) (scipy.stats.kstest against chi2(p))
    # (the test above ties the scores to this textbook form; here the form itself is checked)
    p, lam, reps = 3, 0.1, 4000
    rng = np.random.default_rng(11)
    z = np.zeros((reps, p))
    for t in range(1, 41):
        z = lam * rng.standard_normal((reps, p)) + (1 - lam) * z
        if t in (1, 5, 40):
            t2 = np.sum(z * z, axis=1) / (lam / (2 - lam) * (1 - (1 - lam) ** (2 * t)))
            assert stats.kstest(t2, stats.chi2(p).cdf).pvalue > 1e-3


# ---------------------------------------------------------------- run lengths
def _markov_arl(lam, L, n=601):
    """Two-sided univariate EWMA, asymptotic limits +-L sqrt(lam/(2-lam)): ARL from z_0 = 0 by the
    Markov-chain approximation of Brook & Evans (1972), n states across the in-control band."""
    h = L * np.sqrt(lam / (2 - lam))
    w = 2 * h / n
    c = -h + w * (np.arange(n) + 0.5)
    mu = (1 - lam) * c[:, None]
    r = stats.norm.cdf((c[None, :] + w / 2 - mu) / lam) - stats.norm.cdf((c[None, :] - w / 2 - mu) / lam)
    arl = np.linalg.solve(np.eye(n) - r, np.ones(n))
    return arl[n // 2]


@pytest.mark.parametrize("lam, L, published", [(0.1, 2.814, 500.0), (0.05, 2.615, 500.0), (0.1, 2.703, 370.0)])
def test_univariate_reduces_to_the_ewma_chart(lam, L, published):
    chain = _markov_arl(lam, L)
    # the chain has converged: doubling the states moves it by under 0.1 %
    assert abs(_markov_arl(lam, L, 1201) - chain) < 1e-3 * chain
    # Lucas & Saccucci (1990), from memory: L is given to 3 decimals, so the ARL to about 1 %
    assert abs(chain - published) < 0.015 * published
    # our simulator at p = 1 with the asymptotic variance is that chart (|z| / sd > L <=> T2 > L^2)
    arl, se = mewma_arl(1, lam, L * L, variance="asymptotic", horizon=int(3 * published), seed=1)
    assert abs(arl - chain) < 4.0 * se
    assert 0.01 * chain < se < 0.05 * chain  # about arl / sqrt(2000) for a near-geometric run length


@pytest.mark.parametrize("p, h", [(2, 8.66), (4, 12.73)])
def test_published_multivariate_limits(p, h):
    # Lowry et al. (1992), Prabhu & Runger (1997), from memory: ARL about 200 at lambda = 0.1 with the
    # asymptotic covariance; tolerance 3 s.e. plus 3 % for the tables' own rounding and simulation error
    arl, se = mewma_arl(p, 0.1, h, variance="asymptotic", horizon=800, draws=4000, seed=2)
    assert abs(arl - 200.0) < 3.0 * se + 6.0
    # the exact covariance (what scoring uses) makes the first rows as alert as T2: shorter at the same h
    arl_exact, se_exact = mewma_arl(p, 0.1, h, horizon=800, draws=4000, seed=2)
    assert arl_exact < arl - 2.0 * np.hypot(se, se_exact)


def test_limit_holds_its_run_length_and_error_is_honest():
    p, lam, target = 2, 0.1, 200.0
    lims = [mewma_limit(p, lam, target, draws=1000, seed=s) for s in range(6)]
    assert mewma_limit(p, lam, target, draws=1000, seed=0) == lims[0]  # seeded, reproducible
    hs = np.array([lim.h for lim in lims])
    se = np.mean([lim.h_se for lim in lims])
    # the spread over seeds agrees with the stated standard error: chi-square(5) bounds at 0.1 % / 99.9 %
    ratio = hs.std(ddof=1) / se
    assert np.sqrt(stats.chi2.ppf(0.001, 5) / 5) < ratio < np.sqrt(stats.chi2.ppf(0.999, 5) / 5)
    # an independent simulation (other seed, more paths) at the limit found gives the target ARL
    arl, arl_se = mewma_arl(p, lam, lims[0].h, horizon=600, draws=4000, seed=99)
    assert abs(arl - target) < 4.0 * np.hypot(arl_se, lims[0].arl_se)
    # lambda = 1 is Hotelling's chart with known parameters: h = chi2 quantile at 1 / ARL (scipy.stats)
    shew = mewma_limit(3, 1.0, target, draws=1000)
    assert abs(shew.h - stats.chi2.isf(1 / target, 3)) < 4.0 * shew.h_se


def test_streaming_carries_the_state(tmp_path):
    g, mean, cov, cols = _gaussian(3, seed=1)
    x = np.random.default_rng(4).multivariate_normal(mean, cov, size=300)
    x[100:, 0] += np.linspace(0, 4, 200)
    x[[5, 150], [1, 2]] = np.nan
    src = tmp_path / "rows.csv"
    pd.DataFrame(x, columns=cols).to_csv(src, index=False)
    mem = score(g, pd.read_csv(src), phase="known", ewma=0.2, ewma_arl=300, persist="2/4")
    dig = score_file(g, src, tmp_path / "out.csv", phase="known", ewma=0.2, ewma_arl=300, persist=(2, 4),
                     chunksize=7)
    out = pd.read_csv(tmp_path / "out.csv", keep_default_na=False, na_values=[""])
    for c in ("ewma_t2", "smooth:s0", "persist_count"):
        np.testing.assert_allclose(out[c].to_numpy(dtype=float), mem[c].to_numpy(dtype=float), rtol=1e-12)
    assert (out["ewma_alarm"] == mem["ewma_alarm"]).all() and (out["persist_alarm"] == mem["persist_alarm"]).all()
    assert dig.drift["ewma"]["n_alarm"] == int(mem["ewma_alarm"].sum())
    assert dig.drift["ewma"]["first_alarm_row"] == int(np.flatnonzero(mem["ewma_alarm"])[0])
    assert dig.drift["ewma"]["n_held"] == 2
    assert dig.attrs["ewma_limit"]["h"] == mem.attrs["ewma_limit"]["h"]


def test_slow_drift_is_caught_earlier_than_by_t2_at_the_same_in_control_rate():
    # known Gaussian, 5 sensors; alpha = 0.002 per row (ARL 500 for T2 on independent rows) and the EWMA
    # limit set for ARL 500; a drift of one sensor from row 100 on, slope 0.02 sd per row
    p, alpha, start = 5, 0.002, 100
    g, mean, cov, cols = _gaussian(p, seed=8)
    sd = np.sqrt(np.diag(cov))
    delays_t2, delays_ew = [], []
    for r in range(20):
        rng = np.random.default_rng(100 + r)
        x = rng.multivariate_normal(mean, cov, size=600)
        x[start:, 2] += 0.02 * sd[2] * np.arange(600 - start)
        s = score(g, x, phase="known", alpha=alpha, ewma=0.1, ewma_arl=1 / alpha)
        late = np.arange(600) >= start
        delays_t2.append(np.flatnonzero(s["alarm"].to_numpy() & late)[0] - start)
        delays_ew.append(np.flatnonzero(s["ewma_alarm"].to_numpy() & late)[0] - start)
        assert (s["ewma_top"][s["ewma_alarm"] & late] == "s2").mean() > 0.9
    # paired: the EWMA first alarm is earlier in most runs and much earlier on the median
    assert np.mean(np.array(delays_ew) < np.array(delays_t2)) >= 0.8
    assert np.median(delays_ew) < 0.75 * np.median(delays_t2)


@pytest.mark.parametrize("kw, match", [
    (dict(ewma=0.0), r"ewma: expected a smoothing weight lambda in \(0, 1\]"),
    (dict(ewma=1.5), r"ewma: expected a smoothing weight"),
    (dict(ewma="fast"), r"ewma: expected a smoothing weight"),
    (dict(ewma_arl=200), r"ewma_arl: given without ewma"),
    (dict(ewma=0.1, ewma_arl=1.0), r"ewma_arl: expected an in-control average run length"),
    (dict(persist=(0, 3)), r"persist: need 1 <= K <= M"),
    (dict(persist=(4, 3)), r"persist: need 1 <= K <= M"),
    (dict(persist="3-5"), r"persist: expected K/M"),
])
def test_bad_options(kw, match):
    g, mean, cov, cols = _gaussian(2)
    with pytest.raises(whiten.InputError, match=match):
        score(g, np.zeros((3, 2)), phase="known", **kw)


def test_dask_input_refused_with_drift_options():
    dd = pytest.importorskip("dask.dataframe")
    g, mean, cov, cols = _gaussian(2)
    lazy = dd.from_pandas(pd.DataFrame(np.zeros((6, 2)), columns=cols), npartitions=2)
    with pytest.raises(whiten.InputError, match="compute the dask collection first"):
        score(g, lazy, phase="known", ewma=0.1)
