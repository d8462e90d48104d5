"""fit_linear, VIF and influence cross-checked against statsmodels on near-collinear data.

Reference: statsmodels (OLS(...).fit(method="qr"), WLS, GLS, variance_inflation_factor,
OLSInfluence). Tolerances are c * kappa * eps with kappa the condition number of the
unit-length-column design computed by numpy.linalg.cond (both programs are backward
stable, so they may differ by about kappa * eps relative, kappa^2 * eps for the parts
that statsmodels gets through normal-equation-like products).
"""

import warnings

import numpy as np
import pandas as pd
import pytest

sm = pytest.importorskip("statsmodels.api")
from statsmodels.stats.outliers_influence import OLSInfluence, variance_inflation_factor  # noqa: E402

import whiten  # noqa: E402

EPS = np.finfo(float).eps


def near_collinear(seed, n=80, spread=1e-3):
    """Sensor-like columns: two redundant readings of one temperature, a flow, a load."""
    rng = np.random.default_rng(seed)
    temp = 20 + 5 * rng.standard_normal(n)
    x = pd.DataFrame({
        "temp_a": temp + spread * rng.standard_normal(n),
        "temp_b": temp + spread * rng.standard_normal(n),
        "flow": 100 + 10 * rng.standard_normal(n),
        "load": rng.uniform(0, 1, n),
    })
    y = 0.3 * x["temp_a"] + 0.5 * x["temp_b"] - 0.02 * x["flow"] + 2 * x["load"] + rng.standard_normal(n)
    return x, y.to_numpy()


def kappa(a):
    a = np.asarray(a, float)
    return np.linalg.cond(a / np.linalg.norm(a, axis=0))


@pytest.mark.parametrize("seed", [0, 1])
def test_ols_matches_statsmodels_qr(seed):
    x, y = near_collinear(seed)
    a = sm.add_constant(x.to_numpy())
    ref = sm.OLS(y, a).fit(method="qr")
    fit = whiten.fit_linear(x, y)
    k = kappa(a)
    tol = 100 * k * EPS
    assert fit.names == ("(intercept)", "temp_a", "temp_b", "flow", "load")
    np.testing.assert_allclose(fit.coef, ref.params, rtol=tol)          # statsmodels OLS params
    # statsmodels (method="qr") gets bse from inv(R^T R), which squares kappa (seen in its
    # source; our own errors are checked against mpmath in test_stderr_against_mpmath)
    tol2 = 10 * k ** 2 * EPS
    np.testing.assert_allclose(fit.std_error, ref.bse, rtol=tol2)          # statsmodels OLS bse
    np.testing.assert_allclose(fit.r_squared, ref.rsquared, rtol=1e-12)  # statsmodels rsquared
    np.testing.assert_allclose(fit.adj_r_squared, ref.rsquared_adj, rtol=1e-12)
    np.testing.assert_allclose(fit.f_statistic, ref.fvalue, rtol=1e-9)  # statsmodels fvalue
    np.testing.assert_allclose([fit.loglik, fit.aic, fit.bic], [ref.llf, ref.aic, ref.bic], rtol=1e-12)
    np.testing.assert_allclose(fit.p_value, ref.pvalues, rtol=1e-6, atol=1e-300)
    # interval ends near zero: compare relative to the interval's half-width
    np.testing.assert_allclose(fit.coef_interval(0.9), ref.conf_int(alpha=0.1), rtol=0,
                               atol=tol2 * 2 * float(np.max(fit.std_error)))
    assert fit.dof == ref.df_resid
    # prediction intervals: statsmodels get_prediction summary_frame (mean_ci / obs_ci)
    new = x.iloc[:5] + 0.5
    pr = ref.get_prediction(sm.add_constant(new.to_numpy(), has_constant="add")).summary_frame(alpha=0.05)
    ours_c = fit.predict(new, band="mean")
    ours_p = fit.predict(new, band="new_row")
    np.testing.assert_allclose(ours_c["fitted"], pr["mean"], rtol=tol)
    np.testing.assert_allclose(ours_c["lower"], pr["mean_ci_lower"], rtol=tol2)
    np.testing.assert_allclose(ours_p["upper"], pr["obs_ci_upper"], rtol=tol2)


def test_stderr_against_mpmath():
    """Standard errors against sqrt(diag((A^T A)^-1)) in 50-digit mpmath arithmetic."""
    mpmath = pytest.importorskip("mpmath")
    x, y = near_collinear(0)
    a = sm.add_constant(x.to_numpy())
    fit = whiten.fit_linear(x, y)
    with mpmath.workdps(50):
        m = mpmath.matrix(a.tolist())
        g = (m.T * m) ** -1  # reference only, in 50 digits
        exact = np.array([float(mpmath.sqrt(g[i, i])) for i in range(a.shape[1])])
    np.testing.assert_allclose(fit.std_error / fit.residual_sd, exact, rtol=100 * kappa(a) * EPS)


def test_wls_and_gls_match_statsmodels():
    x, y = near_collinear(2, n=60)
    a = sm.add_constant(x.to_numpy())
    tol = 100 * kappa(a) * EPS
    w = np.random.default_rng(5).uniform(0.3, 3.0, len(y))
    ref = sm.WLS(y, a, weights=w).fit()
    fit = whiten.fit_linear(x, y, weights=w)
    np.testing.assert_allclose(fit.coef, ref.params, rtol=tol)     # statsmodels WLS params
    np.testing.assert_allclose(fit.std_error, ref.bse, rtol=10 * kappa(a) ** 2 * EPS)  # statsmodels WLS bse
    np.testing.assert_allclose(fit.r_squared, ref.rsquared, rtol=1e-12)
    np.testing.assert_allclose(fit.loglik, ref.llf, rtol=1e-12)
    # AR(1)-like error covariance of a slowly drifting sensor, invented for this test
    n = len(y)
    cov = 0.7 ** np.abs(np.subtract.outer(np.arange(n), np.arange(n)))
    ref = sm.GLS(y, a, sigma=cov).fit()
    fit = whiten.fit_linear(x, y, error_cov=cov)
    np.testing.assert_allclose(fit.coef, ref.params, rtol=tol)     # statsmodels GLS params
    np.testing.assert_allclose(fit.std_error, ref.bse, rtol=10 * kappa(a) ** 2 * EPS)  # statsmodels GLS bse
    np.testing.assert_allclose(fit.r_squared, ref.rsquared, rtol=1e-12)
    np.testing.assert_allclose(fit.loglik, ref.llf, rtol=1e-12)
    assert fit.weighted == "gls"


def test_vif_matches_statsmodels():
    x, y = near_collinear(3)
    a = sm.add_constant(x.to_numpy())
    ref = [variance_inflation_factor(a, j) for j in range(1, a.shape[1])]   # statsmodels VIF
    fit = whiten.fit_linear(x, y)
    # statsmodels builds VIF from an auxiliary regression's R^2, 1/(1-R^2): its error is
    # ~ VIF * kappa * eps relative
    np.testing.assert_allclose(fit.vif, ref, rtol=100 * max(ref) * kappa(a) * EPS)
    assert fit.vif[0] > 1e5 and fit.vif[3] < 1.5


def test_influence_matches_statsmodels():
    x, y = near_collinear(4, n=50, spread=1e-2)
    a = sm.add_constant(x.to_numpy())
    ref = OLSInfluence(sm.OLS(y, a).fit())
    inf = whiten.fit_linear(x, y).influence()
    tol = 100 * kappa(a) ** 2 * EPS
    np.testing.assert_allclose(inf.leverage, ref.hat_matrix_diag, rtol=tol)            # OLSInfluence hat
    np.testing.assert_allclose(inf.cook_distance, ref.cooks_distance[0], rtol=tol)     # Cook's distance
    np.testing.assert_allclose(inf.scaled_residual, ref.resid_studentized_internal, rtol=tol)
    np.testing.assert_allclose(inf.deleted_residual, ref.resid_studentized_external, rtol=tol)
    np.testing.assert_allclose(inf.coef_shift, ref.dfbetas, rtol=tol, atol=tol)
    frame = inf.to_frame()
    assert "coef_shift:temp_a" in frame.columns and len(frame) == 50


def test_dfbetas_equals_brute_force_refit():
    """Textbook definition (Belsley, Kuh & Welsch, 1980, eq. 2.7, from memory): refit without row i."""
    x, y = near_collinear(6, n=25, spread=1e-1)
    fit = whiten.fit_linear(x, y)
    inf = fit.influence()
    a = sm.add_constant(x.to_numpy())
    for i in (0, 7, 24):
        keep = np.arange(len(y)) != i
        sub = np.linalg.lstsq(a[keep], y[keep], rcond=None)[0]   # numpy lstsq refit
        s_i = np.sqrt(np.sum((y[keep] - a[keep] @ sub) ** 2) / (len(y) - 1 - a.shape[1]))
        se_rel = fit.std_error / fit.residual_sd
        np.testing.assert_allclose(inf.coef_shift[i], (fit.coef - sub) / (s_i * se_rel), rtol=1e-8, atol=1e-10)


def test_blocked_path_matches_statsmodels():
    rng = np.random.default_rng(8)
    n = 4000
    x = rng.standard_normal((n, 5))
    x[:, 4] = x[:, 3] + 1e-2 * rng.standard_normal(n)
    y = x @ [1, -2, 0.5, 3, 1] + rng.standard_normal(n)
    a = sm.add_constant(x)
    ref = sm.OLS(y, a).fit(method="qr")
    with whiten.settings(block_rows=300):
        fit = whiten.fit_linear(x, y, method="blocked", refine=True)
        inf = fit.influence()
    assert fit.health.method == "blocked-cholqr2" and fit.health.refinement_steps >= 1
    tol = 100 * kappa(a) * EPS
    np.testing.assert_allclose(fit.coef, ref.params, rtol=tol)   # statsmodels OLS params
    np.testing.assert_allclose(fit.std_error, ref.bse, rtol=10 * kappa(a) ** 2 * EPS)  # statsmodels OLS bse
    np.testing.assert_allclose(inf.leverage, OLSInfluence(ref).hat_matrix_diag, rtol=1e3 * tol)


def test_blocked_paths_hand_over_when_ill_conditioned():
    """cond ~1e7: CholeskyQR2 declines (Gram rcond < 1e-12), Householder TSQR runs; with refinement
    asked for, the fit moves to the dense Householder route and says so. Reference: numpy lstsq
    on the unit-length design (an SVD solver), tolerance c * kappa * eps * (1 + kappa * tan theta)."""
    rng = np.random.default_rng(9)
    n = 3000
    x = rng.standard_normal((n, 3))
    x[:, 2] = x[:, 1] + 1e-7 * rng.standard_normal(n)
    y = x @ [1.0, 2.0, 3.0] + 0.01 * rng.standard_normal(n)
    a = np.column_stack([np.ones(n), x])
    norms = np.linalg.norm(a, axis=0)
    ref = np.linalg.lstsq(a / norms, y, rcond=None)[0] / norms       # numpy lstsq
    k = kappa(a)
    # digits lost here are ~8 (componentwise sensitivity), below digits_warn: no warning is due
    with whiten.settings(block_rows=500), warnings.catch_warnings():
        warnings.simplefilter("error", whiten.ConditioningWarning)
        quick = whiten.fit_linear(x, y, method="blocked", refine=False)
        careful = whiten.fit_linear(x, y, method="blocked", refine=True)
    assert 4 < quick.health.digits_trusted < 12
    assert quick.health.method == "blocked-tsqr" and quick.health.refinement_steps == 0
    assert careful.health.method == "blocked-tsqr->householder"
    assert any("redone by Householder" in note for note in careful.health.notes)
    tan_t = np.linalg.norm(y - a @ ref) / np.linalg.norm(a @ ref)
    tol = 100 * k * EPS * (1 + k * tan_t)
    np.testing.assert_allclose(quick.coef, ref, rtol=tol)
    np.testing.assert_allclose(careful.coef, ref, rtol=tol)


def test_weighted_influence_equals_leave_one_out_refits():
    """WLS influence in the whitened model. References: leverage = squared row norms of the Q of
    numpy.linalg.qr(sqrt(w) A); Cook's distance by its definition (Cook, 1977, from memory):
    (b - b_(i))^T A^T W A (b - b_(i)) / (p s^2) with b_(i) from statsmodels WLS refits without row i.
    (statsmodels' OLSInfluence does not whiten WLS results, so it is not the reference here.)"""
    rng = np.random.default_rng(10)
    n = 30
    x = rng.standard_normal((n, 2))
    y = x @ [1.0, 2.0] + rng.standard_normal(n)
    w = rng.uniform(0.5, 2.0, n)
    a = sm.add_constant(x)
    aw = a * np.sqrt(w)[:, None]
    q, _ = np.linalg.qr(aw)
    ref = sm.WLS(y, a, weights=w).fit()
    cooks = []
    for i in range(n):
        keep = np.arange(n) != i
        d = ref.params - sm.WLS(y[keep], a[keep], weights=w[keep]).fit().params
        cooks.append(d @ (aw.T @ aw) @ d / (3 * ref.scale))
    inf = whiten.fit_linear(x, y, weights=w).influence()
    np.testing.assert_allclose(inf.leverage, np.sum(q ** 2, axis=1), rtol=1e-12)
    np.testing.assert_allclose(inf.cook_distance, cooks, rtol=1e-9)
