"""calibrate() against statsmodels GLS, and its profile intervals and failure modes."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

import whiten
from whiten.errors import InputError, RankDeficiencyWarning


def _ar1(n, rho, sigma):
    i = np.arange(n)
    return sigma**2 * rho ** np.abs(i[:, None] - i[None, :]) / (1 - rho**2)


@pytest.fixture
def linear_case():
    # invented: a load cell's reading against three reference masses' design
    rng = np.random.default_rng(31)
    n = 40
    mass = np.linspace(0.5, 20.0, n)
    temp = 20 + 3 * np.sin(np.linspace(0, 5, n))
    x = np.column_stack([np.ones(n), mass, temp - 20])
    beta = np.array([0.12, 1.98, -0.03])
    s = _ar1(n, 0.6, 0.02)
    y = x @ beta + np.linalg.cholesky(s) @ rng.standard_normal(n)
    return x, y, s


def test_linear_calibrate_against_statsmodels_gls(linear_case):
    sm = pytest.importorskip("statsmodels.api")
    x, y, s = linear_case
    fit = whiten.calibrate(lambda th: x @ th, np.zeros(3), y, s, jacobian=lambda th: x, names=["offset", "gain", "tc"])
    gls = sm.GLS(y, x, sigma=s).fit()  # statsmodels GLS reference
    # condition of the whitened design L^{-1} X (numpy), not of its Gram: QR keeps kappa unsquared
    kappa = np.linalg.cond(np.linalg.solve(np.linalg.cholesky(s), x))
    tol = 1e3 * kappa * np.finfo(float).eps
    np.testing.assert_allclose(fit.theta, gls.params, rtol=tol, atol=tol * np.abs(gls.params).max())
    # statsmodels scales bse by sqrt(ssr / df_resid); dividing that out leaves the
    # known-covariance standard errors
    np.testing.assert_allclose(fit.std_error, gls.bse / np.sqrt(gls.scale), rtol=1e-8)
    assert fit.chi2 == pytest.approx(gls.ssr, rel=1e-9)  # GLS ssr is the whitened sum of squares
    assert fit.dof == int(gls.df_resid)
    assert fit.reduced_chi2 == pytest.approx(gls.scale, rel=1e-9)
    assert fit.p_value == pytest.approx(stats.chi2.sf(gls.ssr, gls.df_resid), rel=1e-8)  # scipy.stats
    # GLS llf is the Gaussian log-likelihood with the error variance profiled out
    # (sigma^2 estimated); ours is for the stated covariance: equal when scale = 1.
    # Check ours against scipy.stats.multivariate_normal at the solution instead.
    ref_ll = stats.multivariate_normal(x @ fit.theta, s).logpdf(y)
    assert fit.loglik == pytest.approx(ref_ll, rel=1e-10)
    assert fit.health.rank == 3 and fit.health.jacobian == "analytic"
    assert fit.health.cond == pytest.approx(kappa, rel=1e-8)  # numpy cond of the whitened design
    frame = fit.to_frame()
    assert list(frame.index) == ["offset", "gain", "tc"]


def test_rescaled_covariance_equals_statsmodels_bse(linear_case):
    sm = pytest.importorskip("statsmodels.api")
    x, y, s = linear_case
    fit = whiten.calibrate(lambda th: x @ th, np.zeros(3), y, whiten.cholesky(s), rescale=True)
    gls = sm.GLS(y, x, sigma=s).fit()  # statsmodels GLS: bse already scaled by ssr/df
    # finite-difference Jacobian (central, error ~ eps^(2/3) relative): looser than analytic
    np.testing.assert_allclose(fit.std_error, gls.bse, rtol=1e-7)
    np.testing.assert_allclose(fit.theta_cov, gls.cov_params(), rtol=1e-7, atol=1e-16)
    assert fit.rescaled and fit.health.jacobian == "finite-difference"


@pytest.mark.parametrize("rescale", [False, True])
def test_profile_interval_linear_is_wald(linear_case, rescale):
    # For a model linear in theta with Gaussian errors the profile chi-square is
    # exactly quadratic, so the profile interval is theta +/- z * se (e.g. Seber &
    # Wild, Nonlinear Regression, 1989, sec. 5.4; from memory). With the
    # covariance rescaled, both the threshold and se carry the reduced chi-square.
    x, y, s = linear_case
    fit = whiten.calibrate(lambda th: x @ th, np.zeros(3), y, s, jacobian=lambda th: x, names=["offset", "gain", "tc"],
                           rescale=rescale)
    iv = whiten.profile_interval(fit, "gain", coverage=0.9)
    z = stats.norm.ppf(0.95)
    assert iv.lower == pytest.approx(fit.theta[1] - z * fit.std_error[1], rel=1e-7)
    assert iv.upper == pytest.approx(fit.theta[1] + z * fit.std_error[1], rel=1e-7)
    assert iv.threshold == pytest.approx(stats.chi2.ppf(0.9, 1) * (fit.reduced_chi2 if rescale else 1.0))


def test_nonlinear_calibration_recovers_truth_and_profile_ends_rise_by_threshold():
    # invented: exponential settling of a pressure gauge, AR(1) noise
    rng = np.random.default_rng(8)
    t = np.linspace(0, 10, 60)
    s = _ar1(60, 0.5, 0.01)

    def model(th):
        return th[0] * (1 - np.exp(-t / th[1]))

    y = model([1.5, 2.0]) + np.linalg.cholesky(s) @ rng.standard_normal(60)
    fit = whiten.calibrate(model, [1.0, 1.0], y, s, bounds=([0, 0.01], [10, 50]))
    assert fit.converged
    # simulation check: truth within 4 standard errors
    assert np.all(np.abs(fit.theta - [1.5, 2.0]) < 4 * fit.std_error)
    iv = whiten.profile_interval(fit, 1)
    assert iv.lower < fit.theta[1] < iv.upper
    # the profile chi-square at each end rises by exactly the threshold
    for v in (iv.lower, iv.upper):
        sub = whiten.calibrate(lambda a: model([a[0], v]), [fit.theta[0]], y, s)
        assert sub.chi2 - fit.chi2 == pytest.approx(stats.chi2.ppf(0.95, 1), rel=1e-5)


def test_rank_deficient_names_parameters():
    t = np.linspace(0, 1, 10)
    x = np.column_stack([t, 2 * t])
    with pytest.warns(RankDeficiencyWarning, match=r"rank 1 < 2.*theta\[[01]\]"):
        fit = whiten.calibrate(lambda th: x @ th, [0.0, 0.0], t, np.eye(10), jacobian=lambda th: x)
    assert fit.health.rank == 1 and len(fit.health.unidentified) == 1
    assert np.all(np.isnan(fit.std_error))


def test_calibrate_input_errors():
    t = np.linspace(0, 1, 5)
    with pytest.raises(TypeError, match="loss"):
        whiten.calibrate(lambda th: th[0] * t, [1.0], t, np.eye(5), loss="huber")  # type: ignore[call-arg]
    with pytest.raises(InputError, match=r"optimizer_settings: unknown key\(s\) \['loss'\].*scipy.optimize"):
        whiten.calibrate(lambda th: th[0] * t, [1.0], t, np.eye(5), optimizer_settings={"loss": "huber"})
    fit = whiten.calibrate(lambda th: th[0] * t, [0.5], 2 * t, np.eye(5), optimizer_settings={"method": "dogbox"})
    assert fit.theta[0] == pytest.approx(2.0)
    with pytest.raises(InputError, match=r"returned shape \(4,\); expected \(5,\)"):
        whiten.calibrate(lambda th: th[0] * t[:4], [1.0], t, np.eye(5))
    with pytest.raises(InputError, match="cov is 4 x 4 but y has 5"):
        whiten.calibrate(lambda th: th[0] * t, [1.0], t, np.eye(4))
    with pytest.raises(InputError, match="returned nan at position 3"):
        whiten.calibrate(lambda th: np.where(t > 0.5, np.nan, th[0] * t), [1.0], t, np.eye(5))
    with pytest.raises(InputError, match="lower bound of a"):
        whiten.calibrate(lambda th: th[0] * t, [1.0], t, np.eye(5), bounds=([2.0], [1.0]), names=["a"])
    with pytest.raises(InputError, match="unknown parameter 'b'"):
        fit = whiten.calibrate(lambda th: th[0] * t, [1.0], t + 0.01 * np.sin(9 * t), np.eye(5), names=["a"])
        whiten.profile_interval(fit, "b")
    with pytest.raises(InputError, match="coverage"):
        whiten.profile_interval(fit, 0, coverage=1.5)


def test_structured_covariance_in_calibrate_matches_dense():
    # the same fit through a low-rank-plus-diagonal covariance and its dense form
    rng = np.random.default_rng(2)
    t = np.linspace(0, 1, 30)
    u = 0.05 * np.ones((30, 1))
    d = np.full(30, 1e-3)
    y = 0.5 + 1.2 * t + rng.standard_normal(30) * 0.03
    f = lambda th: th[0] + th[1] * t  # noqa: E731
    a = whiten.calibrate(f, [0.0, 0.0], y, whiten.low_rank_plus_diagonal(u, d))
    b = whiten.calibrate(f, [0.0, 0.0], y, np.diag(d) + u @ u.T)
    np.testing.assert_allclose(a.theta, b.theta, rtol=1e-8)
    np.testing.assert_allclose(a.theta_cov, b.theta_cov, rtol=1e-6)
    assert a.loglik == pytest.approx(b.loglik, rel=1e-10)
    assert math.isfinite(a.p_value)


def test_ill_conditioned_jacobian_warns_with_numbers():
    from whiten.errors import ConditioningWarning

    # two parameters the data can barely tell apart: columns t and t + 1e-11 t^2
    t = np.linspace(0.1, 1.0, 12)
    x = np.column_stack([t, t + 1e-11 * t**2])
    with pytest.warns(ConditioningWarning, match=r"condition \d\.\d+e\+1\d, about 1\d\.\d digits lost"):
        fit = whiten.calibrate(lambda th: x @ th, [0.0, 0.0], 2 * t, np.eye(12), jacobian=lambda th: x)
    # numpy's condition number of the (already white) design is the reference
    assert fit.health.cond == pytest.approx(np.linalg.cond(x), rel=1e-3)
    assert fit.health.rank == 2 and fit.health.digits_lost_2norm > 10


def test_model_exception_becomes_input_error():
    t = np.linspace(0, 1, 5)

    def model(th):
        return t / 0 if th[0] > 100 else th[0] * t + 1 // int(th[0] - th[0])

    with pytest.raises(InputError, match="ZeroDivisionError"):
        whiten.calibrate(model, [1.0], t, np.eye(5))
