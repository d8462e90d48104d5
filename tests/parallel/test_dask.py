"""The dask engine gives the in-memory answers, on a real LocalCluster with two worker processes.

Reference: whiten's own in-memory fits, which the other test modules check against numpy, statsmodels
and NIST; here the claim is only that distributing the work changes nothing beyond rounding (1e-10
relative, the figure the scale-out design promises).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten import InputError

da = pytest.importorskip("dask.array")
dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("distributed")

pytestmark = pytest.mark.cluster


@pytest.fixture(scope="module")
def client():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                           dashboard_address=None, silence_logs=50)
        c = distributed.Client(cluster)
    assert len(c.scheduler_info()["workers"]) == 2
    yield c
    c.close()
    cluster.close()


def _rel(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return float(np.max(np.abs(a - b)) / np.max(np.abs(b)))


@pytest.fixture(scope="module")
def plant():
    rng = np.random.default_rng(2026)
    n, p = 24000, 5
    mix = rng.normal(size=(p, p)) + 2 * np.eye(p)
    x = rng.normal(size=(n, p)) @ mix + np.array([350.0, 2.5e5, 12.0, -40.0, 0.5])
    cols = ["temp_k", "press_pa", "flow", "dp", "valve"]
    return pd.DataFrame(x, columns=cols, index=pd.RangeIndex(10_000, 10_000 + n, name="t"))


def test_baseline_from_dask_array_and_frame_equals_in_memory(client, plant):
    ref = whiten.fit_baseline(plant)
    arr = da.from_array(plant.to_numpy(), chunks=(3500, 2))
    for data, kw in ((arr, {"columns": list(plant.columns)}), (dd.from_pandas(plant, npartitions=6), {})):
        b = whiten.fit_baseline(data, **kw)
        assert b.columns == ref.columns and b.n == ref.n
        assert _rel(b.mean, ref.mean) < 1e-12
        assert _rel(b.cov, ref.cov) < 1e-10
        assert b.health.method == ref.health.method == "gram" and b.params["engine"] == "dask"
        assert b.health.n_chunks > 1


def test_units_do_not_matter_on_dask(client, plant):
    # A Mahalanobis distance is invariant to a positive rescaling and a shift of any sensor (affine
    # equivariance of the sample mean and covariance; Anderson, 2003, from memory): a baseline fitted on
    # the dask engine from re-expressed readings scores re-expressed new rows exactly as the in-memory
    # baseline of the original units scores the originals, for both numerical routes.
    # shifts of 100 spreads: a far larger shift would round away digits of the re-expressed readings
    # themselves (a property of the inputs, not of the estimator)
    scale = np.array([1e-6, 1e3, 1e6, 0.01, 1.0])
    shift = np.array([100.0, -100.0, 50.0, 0.0, 100.0]) * scale * plant.std().to_numpy()
    new = plant.iloc[:300] + np.array([0.5, -1.0, 2.0, 0.0, 0.3])
    ref = whiten.monitor.score(whiten.fit_baseline(plant), new)["d2"].to_numpy()
    moved = plant * scale + shift
    for method in ("gram", "tsqr"):
        b = whiten.fit_baseline(dd.from_pandas(moved, npartitions=4), method=method)
        assert b.params["engine"] == "dask"
        got = whiten.monitor.score(b, new * scale + shift)["d2"].to_numpy()
        assert _rel(got, ref) < 1e-10, method


def test_weighted_baseline_on_dask_equals_in_memory_and_numpy_fweights(client, plant):
    # reference: numpy.cov with integer frequency weights (divisor sum(w) - 1), and the in-memory fit
    rng = np.random.default_rng(5)
    df = plant.assign(reps=rng.integers(0, 4, size=len(plant)).astype(float))
    ref = whiten.fit_baseline(df, weights="reps")
    b = whiten.fit_baseline(dd.from_pandas(df, npartitions=5), weights="reps")
    x = plant.to_numpy()
    cov_np = np.cov(x, rowvar=False, fweights=df["reps"].to_numpy().astype(int))
    assert b.columns == list(plant.columns) and b.params["weighted"] and b.params["engine"] == "dask"
    assert _rel(b.cov, cov_np) < 1e-10 and _rel(b.cov, ref.cov) < 1e-10
    assert _rel(b.mean, np.average(x, axis=0, weights=df["reps"])) < 1e-12
    assert b.n == ref.n and b.weight_sum == ref.weight_sum == df["reps"].sum()
    bad = df.copy()
    bad.iloc[9000, -1] = -2.0
    with pytest.raises(InputError, match=r"data \(partition 1\): index 19000: weight column .reps. is -2"):
        whiten.fit_baseline(dd.from_pandas(bad, npartitions=5), weights="reps")
    with pytest.raises(InputError, match="pass the name of a weights column"):
        whiten.fit_baseline(dd.from_pandas(df, npartitions=5), weights=df["reps"].to_numpy())
    with pytest.raises(InputError, match="column 'w' not found"):
        whiten.fit_baseline(dd.from_pandas(df, npartitions=5), weights="w")


def test_ill_conditioned_baseline_takes_the_tsqr_route_on_the_cluster(client):
    # nearly collinear columns on a large offset: the Gram route loses too many digits (see the baseline tests)
    rng = np.random.default_rng(7)
    t = rng.normal(size=(6000, 1))
    x = 1e8 + np.hstack([t, t + 1e-5 * rng.normal(size=(6000, 1)), rng.normal(size=(6000, 1))])
    with pytest.warns(whiten.ConditioningWarning, match="ill-conditioned"):
        ref = whiten.fit_baseline(x)
    with pytest.warns(whiten.ConditioningWarning, match="ill-conditioned"):
        b = whiten.fit_baseline(da.from_array(x, chunks=(1000, 3)))
    assert ref.health.method == b.health.method == "tsqr" and b.health.passes == 2
    assert _rel(b.cov, ref.cov) < 1e-10
    probe = x[:50] + 1e-5
    assert _rel(b.gaussian.mahalanobis(probe), ref.gaussian.mahalanobis(probe)) < 1e-9


def test_missing_values_dropped_or_named_across_workers(client, plant):
    df = plant.copy()
    for r, c in ((5, 1), (7000, 3), (23000, 0)):
        df.iloc[r, c] = np.nan
    with pytest.warns(UserWarning, match="left out 3 incomplete row"):
        b = whiten.fit_baseline(dd.from_pandas(df, npartitions=4))
    with pytest.warns(UserWarning):
        ref = whiten.fit_baseline(df)
    assert b.n == ref.n == len(df) - 3 and _rel(b.cov, ref.cov) < 1e-10
    with pytest.raises(InputError, match=r"row 5, column 'press_pa' is missing"):
        whiten.fit_baseline(da.from_array(df.to_numpy(), chunks=(4000, 5)), columns=list(df.columns),
                            missing="error")


def test_score_maps_over_partitions_and_keeps_index(client, plant):
    b = whiten.fit_baseline(plant.iloc[:20000])
    new = plant.iloc[20000:].copy()
    new.iloc[3, 2] = np.nan
    ref = b.score(new)
    lazy = b.score(dd.from_pandas(new, npartitions=3))
    assert hasattr(lazy, "npartitions")  # a lazy dask DataFrame
    got = lazy.compute()
    assert got.index.equals(ref.index) and list(got.columns) == list(ref.columns)
    num = [c for c in ref.columns if ref[c].dtype.kind == "f"]
    assert np.allclose(got[num].to_numpy(), ref[num].to_numpy(), rtol=1e-10, atol=0, equal_nan=True)
    assert (got.top_contributor == ref.top_contributor).all() and (got.alarm == ref.alarm).all()
    with_fdr = b.score(dd.from_pandas(new, npartitions=3), fdr=0.05)  # needs the whole batch: computed
    ref_fdr = b.score(new, fdr=0.05)
    assert isinstance(with_fdr, pd.DataFrame)
    assert np.allclose(with_fdr.p_bh, ref_fdr.p_bh, rtol=1e-10, equal_nan=True)


def test_linear_fit_on_dask_equals_in_memory(client):
    rng = np.random.default_rng(11)
    n = 30000
    x = rng.normal(size=(n, 4)) * [1.0, 10.0, 0.1, 3.0]
    x[:, 3] += 0.98 * x[:, 1] * 0.3  # correlated predictors
    y = x @ [0.5, -1.5, 20.0, 2.0] + 7.0 + rng.normal(size=n)
    cols = ["a", "b", "c", "d"]
    ref = whiten.fit_linear(pd.DataFrame(x, columns=cols), y)
    xd = dd.from_pandas(pd.DataFrame(x, columns=cols), npartitions=5)
    yd = dd.from_pandas(pd.Series(y, name="y"), npartitions=5)
    for refine in ("auto", True):
        fit = whiten.fit_linear(xd, yd, refine=refine)
        assert fit.names == ref.names
        assert _rel(fit.coef, ref.coef) < 1e-10
        assert np.allclose(fit.std_error, ref.std_error, rtol=1e-10, atol=0)
        assert fit.r_squared == pytest.approx(ref.r_squared, rel=1e-12)
        assert fit.residual_sd == pytest.approx(ref.residual_sd, rel=1e-10)
        assert np.allclose(fit.vif, ref.vif, rtol=1e-9)
        assert fit.health.method == "dask-tsqr"
        # the data statement is the same componentwise bound as in memory (calibrated against mpmath in
        # tests/accuracy/test_calibration.py), not the normwise one
        assert fit.health.error_bound == pytest.approx(ref.health.error_bound, rel=1e-6)
        assert abs(fit.health.digits_trusted - ref.health.digits_trusted) < 0.01
    assert np.allclose(fit.residuals.compute(), ref.residuals, rtol=0, atol=1e-9 * np.abs(y).max())
    assert np.allclose(fit.predict(x[:5]), ref.predict(x[:5]), rtol=1e-10)


def test_weighted_fit_on_dask_equals_in_memory_and_statsmodels(client):
    # reference: the in-memory WLS fit (which tests/regression checks against statsmodels WLS), and
    # statsmodels WLS itself for the coefficients, standard errors and log-likelihood
    import statsmodels.api as sm

    rng = np.random.default_rng(12)
    n = 20000
    x = rng.normal(size=(n, 3)) * [2.0, 0.5, 40.0]
    w = rng.uniform(0.2, 5.0, size=n)
    y = x @ [1.5, -3.0, 0.02] + 4.0 + rng.normal(size=n) / np.sqrt(w)
    cols = ["load", "speed", "ambient"]
    ref = whiten.fit_linear(pd.DataFrame(x, columns=cols), y, weights=w)
    sm_fit = sm.WLS(y, sm.add_constant(x), weights=w).fit()
    xd = dd.from_pandas(pd.DataFrame(x, columns=cols), npartitions=4)
    yd = dd.from_pandas(pd.Series(y, name="y"), npartitions=4)
    wd = dd.from_pandas(pd.Series(w, name="w"), npartitions=4)
    for weights in (wd, da.from_array(w, chunks=3000), w):
        fit = whiten.fit_linear(xd, yd, weights=weights)
        assert _rel(fit.coef, ref.coef) < 1e-10 and _rel(fit.coef, sm_fit.params) < 1e-10
        assert np.allclose(fit.std_error, sm_fit.bse, rtol=1e-9, atol=0)
        assert fit.r_squared == pytest.approx(sm_fit.rsquared, rel=1e-10)
        assert fit.loglik == pytest.approx(sm_fit.llf, rel=1e-12)
        assert fit.weighted == "wls"
        assert fit.health.error_bound == pytest.approx(ref.health.error_bound, rel=1e-6)
    assert np.allclose(fit.residuals.compute(), ref.residuals, rtol=0, atol=1e-9 * np.abs(y).max())
    bad = w.copy()
    bad[15001] = -1.0
    with pytest.raises(InputError, match=r"weights: row 15001 has weight -1"):
        whiten.fit_linear(xd, yd, weights=da.from_array(bad, chunks=5000))


def test_dask_refusals_are_clear(client, plant):
    arr = da.from_array(plant.to_numpy(), chunks=(5000, 5))
    with pytest.raises(InputError, match="not available for dask input"):
        whiten.fit_baseline(arr, estimator="robust")
    with pytest.raises(InputError, match="chunksize: not used with dask input"):
        whiten.fit_baseline(arr, chunksize=10)
    with pytest.raises(InputError, match="ridge: not available with dask input"):
        whiten.fit_linear(arr[:, :2], arr[:, 2], ridge=0.1)
    # temp_k and press_pa are nearly dependent; the componentwise data statement (the same as in memory,
    # calibrated against mpmath) no longer calls that a loss of digits, so the two engines must agree
    fit = whiten.fit_linear(arr[:, :2], arr[:, 2])
    ref = whiten.fit_linear(plant.to_numpy()[:, :2], plant.to_numpy()[:, 2])
    assert fit.health.digits_trusted == pytest.approx(ref.health.digits_trusted, abs=0.01)
    with pytest.raises(InputError, match="needs the rows in memory"):
        fit.influence()
