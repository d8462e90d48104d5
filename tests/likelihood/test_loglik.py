"""gaussian_loglik: dense, structured, stacked; log space; details; errors; gradients."""

from __future__ import annotations

import doctest
import importlib
import math
import tracemalloc

import numpy as np
import pytest
from scipy import stats

import whiten
from whiten.errors import InputError, NotPositiveDefiniteError

EPS = np.finfo(float).eps


def _spd(n, cond, seed):
    rng = np.random.default_rng(seed)
    q, _ = np.linalg.qr(rng.standard_normal((n, n)))
    m = (q * np.geomspace(1.0, 1.0 / cond, n)) @ q.T
    return 0.5 * (m + m.T)


def test_dense_against_scipy_multivariate_normal():
    s = _spd(12, 1e4, seed=11)
    rng = np.random.default_rng(1)
    r = rng.standard_normal((6, 12))
    mu = np.linspace(-1, 1, 12)
    ref = stats.multivariate_normal(mu, s).logpdf(r)  # scipy.stats reference
    tol = 20 * 12 * 1e4 * EPS
    np.testing.assert_allclose(whiten.gaussian_loglik(r, s, mean=mu), ref, rtol=tol)
    one = whiten.gaussian_loglik(r[0], whiten.cholesky(s), mean=mu)
    assert isinstance(one, float)
    assert one == pytest.approx(ref[0], rel=tol)


def test_details_chi2_dof_p_value():
    s = _spd(5, 10.0, seed=3)
    r = np.array([0.3, -1.2, 0.8, 2.0, -0.1])
    det = whiten.gaussian_loglik(r, s, return_details=True)
    chi2_ref = float(r @ np.linalg.solve(s, r))  # numpy reference
    assert det.chi2 == pytest.approx(chi2_ref, rel=1e-12)
    assert det.dof == 5
    assert det.p_value == pytest.approx(stats.chi2.sf(chi2_ref, 5), rel=1e-10)  # scipy.stats
    assert det.log_p_value == pytest.approx(math.log(det.p_value), rel=1e-10)
    assert det.health.method == "cholesky"
    frame = whiten.gaussian_loglik(np.vstack([r, r]), s, return_details=True).to_frame()
    assert list(frame.columns[:3]) == ["loglik", "chi2", "dof"] and len(frame) == 2


def test_log_space_p2000_tiny_variances():
    # det(S) = 1e-40^2000 underflows to 0 and exp(-chi2/2) would too; the
    # log-likelihood is finite. Reference: the diagonal formula by hand
    # (sum of log-variances and squared standardized residuals, common practice).
    p = 2000
    rng = np.random.default_rng(7)
    var = 1e-40 * rng.uniform(0.5, 2.0, p)
    r = rng.standard_normal(p) * np.sqrt(var)
    assert np.prod(var) == 0.0  # the naive determinant underflows
    ref = -0.5 * (p * math.log(2 * math.pi) + np.sum(np.log(var)) + np.sum(r**2 / var))
    c = np.diag(var)
    got_dense = whiten.gaussian_loglik(r, c)
    got_diag = whiten.gaussian_loglik(r, whiten.diagonal(var))
    assert np.isfinite(got_dense)
    assert got_dense == pytest.approx(ref, rel=1e-12)
    assert got_diag == pytest.approx(ref, rel=1e-12)


def test_dataframe_columns_matched_by_name():
    import pandas as pd

    s = np.array([[2.0, 0.3], [0.3, 1.0]])
    f = whiten.cholesky(pd.DataFrame(s, columns=["a", "b"], index=["a", "b"]))
    df = pd.DataFrame({"b": [1.0, 0.0], "a": [0.5, 2.0]}, index=["x", "y"])
    got = whiten.gaussian_loglik(df, f)
    ref = stats.multivariate_normal([0, 0], s).logpdf(df[["a", "b"]].to_numpy())  # scipy.stats
    assert list(got.index) == ["x", "y"]
    np.testing.assert_allclose(got.to_numpy(), ref, rtol=1e-12)


# ------------------------------------------------------------------ batches
def test_stacked_covariances_broadcast_against_scipy():
    rng = np.random.default_rng(4)
    covs = np.stack([_spd(4, 10.0 ** (k % 3 + 1), seed=k) for k in range(6)]).reshape(2, 3, 4, 4)
    r = rng.standard_normal((2, 3, 4))
    got = whiten.gaussian_loglik(r, covs)
    assert got.shape == (2, 3)
    for i in range(2):
        for j in range(3):
            ref = stats.multivariate_normal(np.zeros(4), covs[i, j]).logpdf(r[i, j])  # scipy.stats
            assert got[i, j] == pytest.approx(ref, rel=1e-10)
    # one residual against every covariance, and rows against one stack entry
    got2 = whiten.gaussian_loglik(r[0, 0], covs)
    assert got2.shape == (2, 3)
    assert got2[1, 2] == pytest.approx(stats.multivariate_normal(np.zeros(4), covs[1, 2]).logpdf(r[0, 0]), rel=1e-10)
    det = whiten.gaussian_loglik(r, covs, mean=np.ones(4), return_details=True)
    assert det.chi2.shape == (2, 3) and det.health is None
    ref_chi2 = (r[1, 1] - 1) @ np.linalg.solve(covs[1, 1], r[1, 1] - 1)  # numpy reference
    assert det.chi2[1, 1] == pytest.approx(ref_chi2, rel=1e-10)


def test_stacked_shape_errors_are_clear():
    covs = np.stack([np.eye(3)] * 4)
    with pytest.raises(InputError, match=r"does not broadcast.*resid \(5, 3\), cov \(4, 3, 3\)"):
        whiten.gaussian_loglik(np.zeros((5, 3)), covs)
    with pytest.raises(InputError, match="last axis must have length 3"):
        whiten.gaussian_loglik(np.zeros((4, 2)), covs)
    with pytest.raises(InputError, match=r"shape \(\.\.\., n, n\)"):
        whiten.gaussian_loglik(np.zeros((4, 3)), np.zeros((4, 3, 2)))
    bad = covs.copy()
    bad[2, 1, 1] = -1.0
    with pytest.raises(NotPositiveDefiniteError, match=r"cov\[\(2,\)\].*diagonal entry 1"):
        whiten.gaussian_loglik(np.zeros((4, 3)), bad)
    asym = covs.copy()
    asym[3, 0, 1] = 0.5
    with pytest.raises(InputError, match=r"cov\[\(3,\)\]: is not symmetric"):
        whiten.gaussian_loglik(np.zeros((4, 3)), asym)


def test_single_cov_shape_errors():
    with pytest.raises(InputError, match="last axis has length 2 but cov is 3 x 3"):
        whiten.gaussian_loglik(np.zeros(2), np.eye(3))
    with pytest.raises(InputError, match="whiten.diagonal"):
        whiten.gaussian_loglik(np.zeros(3), np.ones(3))
    with pytest.raises(InputError, match="entry 1 is nan"):
        whiten.gaussian_loglik(np.array([0.0, np.nan, 1.0]), np.eye(3))
    with pytest.raises(InputError, match=r"mean: expected shape \(3,\)"):
        whiten.gaussian_loglik(np.zeros(3), np.eye(3), mean=np.zeros(2))


def test_one_factor_reused_for_many_residuals_is_not_refactored(monkeypatch):
    f = whiten.cholesky(_spd(6, 10.0, seed=8))
    import whiten.likelihood.loglik as mod

    def boom(*a, **k):  # the cached factor must be used as it is
        raise AssertionError("refactored")

    monkeypatch.setattr(mod, "cholesky", boom)
    r = np.random.default_rng(0).standard_normal((3, 6))
    vals = [whiten.gaussian_loglik(row, f) for row in r]
    np.testing.assert_allclose(vals, whiten.gaussian_loglik(r, f), rtol=1e-14)


# ---------------------------------------------------- low rank at n = 200000
def test_low_rank_n200000_bounded_memory():
    n, k = 200_000, 10
    rng = np.random.default_rng(12)
    u = rng.standard_normal((n, k)) * 0.1
    d = rng.uniform(0.5, 1.5, n)
    r = rng.standard_normal(n)
    tracemalloc.start()
    try:
        s = whiten.low_rank_plus_diagonal(u, d)
        det = whiten.gaussian_loglik(r, s, return_details=True)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    # a dense n x n matrix would be 320 GB; the structured path holds O(n k)
    assert peak < 200e6, peak
    # reference: Woodbury identity and determinant lemma written out with numpy
    # on the same inputs (Woodbury 1950; Harville, Matrix Algebra From a
    # Statistician's Perspective, 1997, thm 18.1.1)
    v = u / np.sqrt(d)[:, None]
    c = np.eye(k) + v.T @ v
    y = r / np.sqrt(d)
    t = v.T @ y
    chi2 = y @ y - t @ np.linalg.solve(c, t)
    logdet = np.sum(np.log(d)) + np.linalg.slogdet(c)[1]
    assert det.chi2 == pytest.approx(chi2, rel=1e-10)
    assert det.logdet == pytest.approx(logdet, rel=1e-12)


# --------------------------------------------------------------- gradients
def test_grad_mean_against_finite_differences():
    rng = np.random.default_rng(21)
    t = np.linspace(0, 3, 15)
    s = whiten.low_rank_plus_diagonal(0.3 * np.ones((15, 1)), np.full(15, 0.05))
    y = 2.0 * np.exp(-t / 1.3) + 0.1 * rng.standard_normal(15)

    def pred(th):
        return th[0] * np.exp(-t / th[1])

    def jac(th):
        e = np.exp(-t / th[1])
        return np.column_stack([e, th[0] * e * t / th[1] ** 2])

    th = np.array([1.8, 1.1])
    g = whiten.loglik_grad_mean(y - pred(th), s, jac(th))
    # central differences of the log-likelihood (common practice); step h, error O(h^2)
    h = 1e-6
    fd = np.array([(whiten.gaussian_loglik(y - pred(th + h * e), s) - whiten.gaussian_loglik(y - pred(th - h * e), s))
                   / (2 * h) for e in np.eye(2)])
    np.testing.assert_allclose(g, fd, rtol=1e-6)


def test_grad_cov_against_finite_differences():
    # S(theta) = a * K(ell) + b * I with K a squared-exponential kernel (invented setting)
    x = np.linspace(0, 1, 8)
    dx2 = (x[:, None] - x[None, :]) ** 2

    def cov(th):
        a, ell, b = th
        return a * np.exp(-0.5 * dx2 / ell**2) + b * np.eye(8)

    def dcov(th):
        a, ell, b = th
        k = np.exp(-0.5 * dx2 / ell**2)
        return np.stack([k, a * k * dx2 / ell**3, np.eye(8)])

    rng = np.random.default_rng(3)
    rows = rng.standard_normal((4, 8))
    th = np.array([1.3, 0.4, 0.2])
    g = whiten.loglik_grad_cov(rows, whiten.cholesky(cov(th)), dcov(th))
    h = 1e-6
    fd = np.array([(np.sum(whiten.gaussian_loglik(rows, cov(th + h * e)))
                    - np.sum(whiten.gaussian_loglik(rows, cov(th - h * e)))) / (2 * h) for e in np.eye(3)])
    np.testing.assert_allclose(g, fd, rtol=1e-6)  # central differences (common practice)
    single = whiten.loglik_grad_cov(rows[0], cov(th), dcov(th)[2])
    assert isinstance(single, float)
    with pytest.raises(InputError, match=r"dcov: expected shape \(8, 8\)"):
        whiten.loglik_grad_cov(rows, cov(th), np.zeros((2, 7, 7)))
    with pytest.raises(InputError, match=r"jac: expected shape \(8, K\)"):
        whiten.loglik_grad_mean(rows[0], cov(th), np.zeros((7, 2)))


@pytest.mark.parametrize("module", ["whiten.linalg.structured.diagonal", "whiten.linalg.structured.lowrank",
                                    "whiten.linalg.structured.blockdiag", "whiten.linalg.structured.kronecker",
                                    "whiten.likelihood.loglik",
                                    "whiten.likelihood.gradients", "whiten.likelihood.calibrate"])
def test_docstring_examples(module):
    res = doctest.testmod(importlib.import_module(module), optionflags=doctest.NORMALIZE_WHITESPACE)
    assert res.attempted > 0 and res.failed == 0


def test_log_space_p2000_dense_scaled_down():
    # A correlated p=2000 covariance scaled by s^2 = 1e-60: det underflows to 0
    # in float64. Change of variables (textbook: the density of s*X is
    # f(x/s)/s^p) gives loglik(s r; s^2 S) = loglik(r; S) - p log s exactly.
    p = 2000
    rng = np.random.default_rng(13)
    a = rng.standard_normal((p, 40))
    s_mat = a @ a.T / 40 + np.eye(p)
    r = rng.standard_normal(p)
    sc = 1e-30
    base = whiten.gaussian_loglik(r, s_mat)
    small = whiten.gaussian_loglik(sc * r, (sc * sc) * s_mat)
    assert np.linalg.det(sc * sc * s_mat[:200, :200]) == 0.0  # even a 200x200 corner underflows
    assert np.isfinite(small)
    # both sides are ~1e5 in size; the Cholesky of either is backward stable
    assert small == pytest.approx(base - p * math.log(sc), rel=1e-12)


def test_inputs_not_modified_by_loglik_and_calibrate():
    s = _spd(6, 100.0, seed=2)
    r = np.random.default_rng(1).standard_normal((3, 6))
    s0, r0 = s.copy(), r.copy()
    whiten.gaussian_loglik(r, s, mean=np.ones(6), return_details=True)
    whiten.gaussian_loglik(r, np.stack([s, s, s]))
    whiten.loglik_grad_cov(r, s, np.stack([s, s]))
    t = np.linspace(0, 1, 6)
    y = 1 + t
    y0 = y.copy()
    whiten.calibrate(lambda th: th[0] + th[1] * t, np.zeros(2), y, s)
    np.testing.assert_array_equal(s, s0)
    np.testing.assert_array_equal(r, r0)
    np.testing.assert_array_equal(y, y0)
