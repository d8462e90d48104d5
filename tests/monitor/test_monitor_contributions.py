"""Contributions, missing sensors and inputs of whiten.monitor.score, against numpy/scipy."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from whiten.errors import InputError
from whiten.monitor import score

from .conftest import correlated_cov, fit

EPS = np.finfo(float).eps
P = 6
COLS = ["inlet_t", "outlet_t", "flow", "dp", "power", "vib"]


@pytest.fixture(scope="module")
def setup():
    rng = np.random.default_rng(2024)
    cov = correlated_cov(P, rng)
    mu = np.array([20.0, 35.0, 150.0, 2.5, 40.0, 0.3])
    ref = rng.multivariate_normal(mu, cov, size=300)
    b = fit(ref, COLS)
    new = rng.multivariate_normal(mu, cov * 2.0, size=40)
    s_mean = ref.mean(axis=0)
    s_cov = np.cov(ref, rowvar=False)  # numpy reference estimate
    kappa = np.linalg.cond(s_cov / np.sqrt(np.outer(np.diag(s_cov), np.diag(s_cov))))
    return b, new, s_mean, s_cov, kappa


def _d2(d, cov):
    # numpy.linalg.solve on the (sub-)matrix: the independent reference for d2
    return float(d @ np.linalg.solve(cov, d))


def test_d2_and_chain_sum(setup):
    b, new, mu, cov, kappa = setup
    s = score(b, new)
    tol = 50 * P * kappa * EPS
    ref = np.array([_d2(r - mu, cov) for r in new])
    assert np.allclose(s["d2"], ref, rtol=tol)
    chain = s[[f"chain:{c}" for c in COLS]].to_numpy()
    assert (chain >= 0).all()
    # the conditional terms sum exactly to d2 (Mason, Tracy & Young 1995 decomposition)
    assert np.allclose(chain.sum(axis=1), s["d2"], rtol=tol)


def test_drop_equals_d2_without_sensor(setup):
    b, new, mu, cov, kappa = setup
    s = score(b, new)
    tol = 50 * P * kappa * EPS
    for i in (0, 7, 19):
        d = new[i] - mu
        full = _d2(d, cov)
        for j, c in enumerate(COLS):
            keep = [k for k in range(P) if k != j]
            without = _d2(d[keep], cov[np.ix_(keep, keep)])
            assert s[f"drop:{c}"].iloc[i] == pytest.approx(full - without, rel=tol, abs=tol * full)
        drops = s.loc[i, [f"drop:{c}" for c in COLS]].to_numpy(dtype=float)
        assert s["top_contributor"].iloc[i] == COLS[int(np.argmax(drops))]


def test_chain_order_and_first_term(setup):
    b, new, mu, cov, kappa = setup
    order = ["power", "flow", "vib", "inlet_t", "dp", "outlet_t"]
    s = score(b, new, order=order)
    tol = 50 * P * kappa * EPS
    chain = s[[f"chain:{c}" for c in COLS]].to_numpy()
    assert np.allclose(chain.sum(axis=1), s["d2"], rtol=tol)
    # first sensor in the order: its term is its own squared standardized deviation
    j = COLS.index("power")
    assert np.allclose(s["chain:power"], (new[:, j] - mu[j]) ** 2 / cov[j, j], rtol=tol)
    # second term: squared residual of flow given power, from the textbook regression
    # formula var(flow | power) = s_ff - s_fp^2 / s_pp
    f = COLS.index("flow")
    resid = (new[:, f] - mu[f]) - cov[f, j] / cov[j, j] * (new[:, j] - mu[j])
    assert np.allclose(s["chain:flow"], resid ** 2 / (cov[f, f] - cov[f, j] ** 2 / cov[j, j]), rtol=tol)
    with pytest.raises(InputError, match="order: must list every sensor once"):
        score(b, new, order=order[:-1])


def test_standardized_deviation(setup):
    b, new, mu, cov, kappa = setup
    s = score(b, new)
    dev = s[[f"dev:{c}" for c in COLS]].to_numpy()
    assert np.allclose(dev, (new - mu) / np.sqrt(np.diag(cov)), rtol=1e-10, atol=1e-12)


def test_broken_correlation_seen_by_d2_not_by_dev(setup):
    b, new, mu, cov, kappa = setup
    sd = np.sqrt(np.diag(cov))
    corr = cov / np.outer(sd, sd)
    # two strongly correlated sensors moved 1.5 sd in opposite directions
    i, j = np.unravel_index(np.argmax(np.abs(corr - np.eye(P))), corr.shape)
    row = mu.copy()
    sign = np.sign(corr[i, j])
    row[i] += 1.5 * sd[i]
    row[j] -= sign * 1.5 * sd[j]
    s = score(b, row[None, :])
    assert s["alarm"].iloc[0]
    assert np.abs(s[[f"dev:{c}" for c in COLS]].to_numpy()).max() < 2
    assert s["top_contributor"].iloc[0] in (COLS[i], COLS[j])


def test_missing_sensor_rows(setup):
    b, new, mu, cov, kappa = setup
    x = new[:6].copy()
    x[1, [2]] = np.nan
    x[2, [0, 4]] = np.nan
    x[3, :] = np.nan
    x[4, [0, 4]] = np.nan  # same pattern as row 2: one sub-model for both
    df = pd.DataFrame(x, columns=COLS, index=[f"t{k}" for k in range(6)])
    before = df.copy()
    s = score(b, df)
    pd.testing.assert_frame_equal(df, before)  # input not modified
    assert list(s.index) == list(df.index)  # no row dropped, index kept
    assert list(s["n_observed"]) == [6, 5, 4, 0, 4, 6]
    tol = 50 * P * kappa * EPS
    for i in (1, 2, 4):
        obs = np.flatnonzero(~np.isnan(x[i]))
        d = x[i, obs] - mu[obs]
        sub = cov[np.ix_(obs, obs)]
        # scipy.stats on the sub-vector: the marginal of a Gaussian is the sub-vector's Gaussian
        lp = stats.multivariate_normal(mu[obs], sub).logpdf(x[i, obs])
        _, logdet = np.linalg.slogdet(sub)
        d2_scipy = -2 * lp - obs.size * np.log(2 * np.pi) - logdet
        assert s["d2"].iloc[i] == pytest.approx(d2_scipy, rel=1e-8)
        assert s["d2"].iloc[i] == pytest.approx(_d2(d, sub), rel=tol)
        # p-value with p_observed (Tracy, Young & Mason 1992 law with p -> k)
        k, m = obs.size, b.n
        assert s["p_value"].iloc[i] == pytest.approx(
            stats.f.sf(s["d2"].iloc[i] * m * (m - k) / (k * (m + 1) * (m - 1)), k, m - k), rel=1e-10)
        # drop terms on the observed sub-model; NaN for the missing sensors
        for jj, j in enumerate(obs):
            keep = [q for q in range(obs.size) if q != jj]
            without = _d2(d[keep], sub[np.ix_(keep, keep)])
            assert s[f"drop:{COLS[j]}"].iloc[i] == pytest.approx(_d2(d, sub) - without, rel=tol, abs=tol)
        gone = np.flatnonzero(np.isnan(x[i]))
        for kind in ("drop", "chain", "dev"):
            assert s[[f"{kind}:{COLS[j]}" for j in gone]].iloc[i].isna().all()
        chain = s[[f"chain:{c}" for c in COLS]].iloc[i].to_numpy(dtype=float)
        assert np.nansum(chain) == pytest.approx(s["d2"].iloc[i], rel=tol)
        assert "missing" in s["note"].iloc[i]
    # the all-missing row: NaN distance, no alarm, a note
    assert np.isnan(s["d2"].iloc[3]) and np.isnan(s["p_value"].iloc[3])
    assert not s["alarm"].iloc[3]
    assert s["note"].iloc[3] == "no sensor observed: not scored"
    assert s["top_contributor"].iloc[3] == ""
    # complete rows score as without the partial rows around them
    alone = score(b, df.iloc[[0, 5]])
    assert np.allclose(alone["d2"], s["d2"].iloc[[0, 5]], rtol=1e-14)
    with pytest.raises(InputError, match="row 1.*'flow'"):
        score(b, df, missing="error")


def test_inputs(setup, tmp_path):
    b, new, mu, cov, kappa = setup
    df = pd.DataFrame(new[:5], columns=COLS)
    arr = new[:5].copy()
    base = score(b, df)
    score(b, arr)
    assert np.array_equal(arr, new[:5])  # inputs are never modified
    # columns matched by name: reordered and extra columns are fine
    shuffled = df[COLS[::-1]].assign(stamp=np.arange(5))
    assert np.allclose(score(b, shuffled)["d2"], base["d2"], rtol=1e-14)
    # a 1-D row and an ndarray in model order
    assert score(b, new[0])["d2"].iloc[0] == pytest.approx(base["d2"].iloc[0], rel=1e-14)
    # a CSV path
    path = tmp_path / "rows.csv"
    df.to_csv(path, index=False)
    assert np.allclose(score(b, path)["d2"], base["d2"], rtol=1e-12)
    with pytest.raises(InputError, match=r"does not match the model: missing columns \['vib'\], extra columns \['vibration'\]"):
        score(b, df.rename(columns={"vib": "vibration"}))
    with pytest.raises(InputError, match="expected 6 columns"):
        score(b, new[:, :5])
    bad = df.astype(object)
    bad.loc[3, "dp"] = "n/a?"
    with pytest.raises(InputError, match="'dp'.*row 3"):
        score(b, bad)
    with pytest.raises(InputError, match="missing: expected one of"):
        score(b, df, missing="drop")
    with pytest.raises(InputError, match="baseline: expected"):
        score(object(), df)


def test_chain_order_with_missing_sensors(setup):
    b, new, mu, cov, kappa = setup
    order = ["power", "flow", "vib", "inlet_t", "dp", "outlet_t"]
    x = new[:3].copy()
    x[0, COLS.index("power")] = np.nan  # the first sensor of the order is missing: flow leads
    x[1, COLS.index("dp")] = np.nan
    s = score(b, x, order=order)
    tol = 50 * P * kappa * EPS
    chain = s[[f"chain:{c}" for c in COLS]].to_numpy()
    assert np.allclose(np.nansum(chain, axis=1), s["d2"], rtol=tol)  # still sums to d2 on the marginal
    f = COLS.index("flow")
    # flow is first among the observed sensors of row 0: its term is its own squared deviation
    assert s["chain:flow"].iloc[0] == pytest.approx((x[0, f] - mu[f]) ** 2 / cov[f, f], rel=tol)
    assert np.isnan(s["chain:power"].iloc[0]) and np.isnan(s["chain:dp"].iloc[1])
