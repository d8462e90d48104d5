"""Regression and likelihood reports, and ``--report`` on the three commands.

Every number checked here is read back out of the HTML and compared with the
CSV/JSON output of the same run (which the commands write independently of
the report), and, where the job's result is itself checked, with an outside
reference (statsmodels, scipy.stats, hashlib).
"""

from __future__ import annotations

import hashlib
import json
import math
import warnings

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.errors import InputError
from whiten.report import calibration_report, likelihood_report, likelihood_rows, regression_report

from .conftest import SENSORS, filler_covariance
from .page import ReportPage, check_self_contained, decode_png

_EPS = float(np.finfo(float).eps)


# ---------------------------------------------------------------------------- invented data
def extruder_table(n: int = 60, seed: int = 11) -> pd.DataFrame:
    """Die pressure of a plastics extruder against melt temperature, screw speed and a near-copy sensor."""
    rng = np.random.default_rng(seed)
    melt = rng.normal(230.0, 4.0, n)
    screw = rng.normal(85.0, 6.0, n)
    melt_b = melt + rng.normal(0.0, 0.05, n)                # a second thermocouple a few mm away
    pressure = 140.0 - 0.9 * melt + 0.6 * screw + rng.normal(0.0, 1.5, n)
    return pd.DataFrame({"melt_temp": melt, "screw_rpm": screw, "melt_temp_b": melt_b, "die_pressure": pressure})


def _fit(df: pd.DataFrame):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", whiten.NumericalWarning)
        return whiten.fit_linear(df[["melt_temp", "screw_rpm", "melt_temp_b"]], df["die_pressure"])


def _scale_case():
    """A bench scale read at seven reference weights; errors share a slow drift (covariance s2 I + t2 11')."""
    masses = np.array([0.0, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0])
    n = masses.size
    cov = 0.003 ** 2 * np.eye(n) + 0.0015 ** 2 * np.ones((n, n))
    rng = np.random.default_rng(17)
    y = 0.02 + 1.0004 * masses + rng.multivariate_normal(np.zeros(n), cov)
    return masses, y, cov


def _calibrate(masses, y, cov):
    return whiten.calibrate(lambda th: th[0] + th[1] * masses, [0.0, 1.0], y, cov, names=["offset", "gain"])


def _loglik_case(seed: int = 5):
    rng = np.random.default_rng(seed)
    cov = filler_covariance()
    mean = np.array([4.2, 6.5, 12.0, 1.1])
    x = rng.multivariate_normal(mean, cov, size=40)
    x[7, 3] = np.nan
    return mean, cov, x


# ---------------------------------------------------------------------------- used by the browser tests
def job_reports() -> dict:
    fit = _fit(extruder_table())
    mean, cov, x = _loglik_case()
    g = whiten.Gaussian(mean, cov, columns=SENSORS)
    ev = g.evaluate(x, missing="marginalize")
    return {"regression": regression_report(fit, response="die_pressure").to_html(),
            "likelihood": likelihood_report(ev, g).to_html(),
            "calibration": calibration_report(_calibrate(*_scale_case())).to_html()}


# ---------------------------------------------------------------------------- regression
def test_regression_report_numbers_equal_the_fit_and_statsmodels():
    import statsmodels.api as sm

    df = extruder_table()
    fit = _fit(df)
    page = check_self_contained(regression_report(fit, response="die_pressure").to_html())
    assert page.external == [] and page.fetching_tags == []
    t = page.tables["coefficients"]
    assert t["row_heads"] == list(fit.names)
    est = np.array([float(v) for _, v in page.column("coefficients", "estimate")])
    lo = np.array([float(v) for _, v in page.column("coefficients", "from")])
    hi = np.array([float(v) for _, v in page.column("coefficients", "to")])
    ci = fit.coef_interval(0.95)
    assert np.array_equal(est, fit.coef) and np.array_equal(lo, ci[:, 0]) and np.array_equal(hi, ci[:, 1])
    # outside reference: statsmodels OLS (QR-based pinv route); agreement to c * kappa * eps in the
    # coefficients, with kappa the scaled condition number the report itself shows
    X = sm.add_constant(df[["melt_temp", "screw_rpm", "melt_temp_b"]])
    ref = sm.OLS(df["die_pressure"], X).fit()
    kappa = float(page.tiles["condition"]["value"])
    assert kappa == fit.health.condition
    scale = np.abs(ref.params.to_numpy()) + np.abs(ref.bse.to_numpy())
    assert np.all(np.abs(est - ref.params.to_numpy()) <= 100 * kappa * _EPS * scale)
    ci_ref = ref.conf_int(0.05).to_numpy()
    assert np.allclose(lo, ci_ref[:, 0], rtol=0, atol=1e-6 * scale.max())
    # the shown text keeps 6 significant digits of each estimate
    for (text, _), want in zip(page.column("coefficients", "estimate"), fit.coef):
        assert math.isclose(float(text), want, rel_tol=5e-6)
    assert float(page.tiles["r-squared"]["value"]) == fit.r_squared
    assert page.tiles["r-squared"]["text"] == f"{100 * fit.r_squared:.4g}%"
    assert math.isclose(float(page.tiles["r-squared"]["value"]), ref.rsquared, rel_tol=1e-9)
    assert int(page.tiles["rows"]["value"]) == len(df)
    # the near-copy thermocouple is named in the collinearity findings
    html = regression_report(fit, charts=False).to_html()
    assert "melt_temp_b" in html and "Belsley" in html


def test_regression_report_names_set_aside_columns():
    df = extruder_table()
    df["melt_temp_c"] = 2.0 * df["melt_temp"]                 # an exact copy in other units
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", whiten.NumericalWarning)
        fit = whiten.fit_linear(df[["melt_temp", "screw_rpm", "melt_temp_c"]], df["die_pressure"])
    page = check_self_contained(regression_report(fit, charts=False).to_html())
    assert page.tiles["set-aside"]["value"] == "1" and page.tiles["set-aside"]["note"] == "melt_temp_c"
    notes = page.column("coefficients", "note")
    assert notes[-1][0].startswith("set aside")


def test_regression_report_refuses_other_objects():
    with pytest.raises(InputError, match="whiten.fit_linear"):
        regression_report(object())


def test_ridge_report_draws_the_paths():
    df = extruder_table()
    fit = whiten.fit_linear(df[["melt_temp", "screw_rpm"]], df["die_pressure"], ridge="gcv")
    html = regression_report(fit).to_html()
    page = check_self_contained(html)
    assert len(page.images) == 2 and all(decode_png(p).shape[1] > 100 for p in page.png_images())
    assert f"Ridge penalty {fit.ridge.penalty:.4g}" in html and "gcv" in html


# ---------------------------------------------------------------------------- likelihood
def test_likelihood_report_total_matches_scipy():
    from scipy import stats

    mean, cov, x = _loglik_case()
    g = whiten.Gaussian(mean, cov, columns=SENSORS)
    ev = g.evaluate(x, missing="marginalize")
    page = check_self_contained(likelihood_report(ev, g).to_html())
    # outside reference: scipy.stats.multivariate_normal on complete rows, its marginal on the partial one
    ref = 0.0
    for row in x:
        ok = ~np.isnan(row)
        ref += stats.multivariate_normal(mean[ok], cov[np.ix_(ok, ok)]).logpdf(row[ok])
    total = float(page.tiles["total"]["value"])
    assert math.isclose(total, ref, rel_tol=1e-12)
    assert math.isclose(float(page.tiles["total"]["text"]), ref, rel_tol=1e-9)   # 10 digits shown
    assert page.tiles["rows"]["value"] == "40"
    d2 = np.nansum(ev.d2)
    dof = int(np.sum(ev.n_observed))
    assert math.isclose(float(page.tiles["dispersion"]["value"]), d2 / dof, rel_tol=1e-14)
    per_row = [float(v) for _, v in page.column("per-row", "loglik")]
    assert np.array_equal(per_row, ev.logpdf)


def test_likelihood_rows_from_a_summary_and_its_p_values():
    from scipy import stats

    mean, cov, x = _loglik_case()
    res = whiten.gaussian_loglik(x[:5], cov, mean=mean, return_details=True)
    rows = likelihood_rows(res, labels=list("abcde"))
    assert list(rows.index) == list("abcde") and (rows["dof"] == 4).all()
    assert np.allclose(rows["p_value"], stats.chi2.sf(rows["d2"], 4), rtol=1e-12)   # scipy.stats reference
    with pytest.raises(InputError, match="labels"):
        likelihood_rows(res, labels=["a"])
    with pytest.raises(InputError, match="gaussian_loglik"):
        likelihood_rows({"loglik": 1.0})


def test_calibration_report_matches_the_fit_and_statsmodels_gls():
    import statsmodels.api as sm
    from scipy import stats

    masses, y, cov = _scale_case()
    fit = _calibrate(masses, y, cov)
    page = check_self_contained(calibration_report(fit).to_html())
    assert page.external == [] and len(page.images) == 1
    assert page.tables["parameters"]["row_heads"] == ["offset", "gain"]
    est = np.array([float(v) for _, v in page.column("parameters", "estimate")])
    se = np.array([float(v) for _, v in page.column("parameters", "std error")])
    lo = np.array([float(v) for _, v in page.column("parameters", "from")])
    assert np.array_equal(est, fit.theta) and np.array_equal(se, fit.std_error)
    # intervals with the normal quantile for a stated covariance (scipy.stats reference)
    assert np.allclose(lo, fit.theta - stats.norm.ppf(0.975) * fit.std_error, rtol=1e-15, atol=0)
    # outside reference: statsmodels GLS with the same sigma; unscaled parameter covariance
    ref = sm.GLS(y, sm.add_constant(masses), sigma=cov).fit()
    assert np.allclose(est, ref.params, rtol=1e-8, atol=1e-10)
    assert np.allclose(se, np.sqrt(np.diag(ref.normalized_cov_params)), rtol=1e-6)
    assert float(page.tiles["chi2"]["value"]) == fit.chi2
    assert math.isclose(float(page.tiles["p-value"]["value"]), stats.chi2.sf(fit.chi2, fit.dof), rel_tol=1e-12)
    assert page.tiles["converged"]["text"] == "yes"
    with pytest.raises(InputError, match="whiten.calibrate"):
        calibration_report(object())
    with pytest.raises(InputError, match="coverage"):
        calibration_report(fit, coverage=1.5)


# ---------------------------------------------------------------------------- --report on the commands
def _digest(path) -> str:
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


def test_regress_report_equals_its_json(tmp_path, capsys):
    data = tmp_path / "extruder.csv"
    extruder_table().to_csv(data, index=False)
    out, rep = tmp_path / "fit.json", tmp_path / "fit.html"
    argv = ["regress", str(data), "--response", "die_pressure", "-o", str(out), "--report", str(rep)]
    assert main(argv) == 0
    fit = json.loads(out.read_text())["fit"]
    page = check_self_contained(rep.read_text(encoding="utf-8"))
    assert page.external == []
    est = [float(v) for _, v in page.column("coefficients", "estimate")]
    assert est == fit["coef"]
    assert [float(v) for _, v in page.column("coefficients", "from")] == fit["coef_interval"]["lower"]
    assert float(page.tiles["r-squared"]["value"]) == fit["r_squared"]
    assert int(page.tiles["rows"]["value"]) == fit["n_rows"]
    assert float(page.tiles["digits"]["value"]) == fit["health"]["digits_trusted"]
    files = page.tables["files"]
    assert files["rows"][0][3][0] == _digest(data)                       # hashlib reference
    assert int(files["rows"][0][1][1]) == len(pd.read_csv(data))          # pandas row count
    html = rep.read_text(encoding="utf-8")
    assert "whiten regress" in html and "--report" in html
    # refuses to overwrite without --force: one line on stderr, exit 1
    out.unlink()
    capsys.readouterr()
    assert main(argv) == 1
    assert "already exists" in capsys.readouterr().err
    assert main(argv + ["--force"]) == 0


def test_score_report_equals_its_csv(tmp_path, filler_batch):
    rng = np.random.default_rng(3)
    ref = pd.DataFrame(rng.multivariate_normal(np.zeros(4), filler_covariance(), size=500), columns=SENSORS)
    model = tmp_path / "filler.json"
    whiten.fit_baseline(ref).save(model)
    data = tmp_path / "week49.csv"
    (filler_batch - np.array([4.2, 6.5, 12.0, 1.1])).to_csv(data)
    out, rep = tmp_path / "scores.csv", tmp_path / "scores.html"
    assert main(["score", str(data), "--baseline", str(model), "-o", str(out), "--index-column", "stamp",
                 "--fdr", "0.05", "--report", str(rep)]) == 0
    scores = pd.read_csv(out, index_col=0)
    page = check_self_contained(rep.read_text(encoding="utf-8"))
    assert page.external == [] and len(page.images) == 2
    assert int(page.tiles["alarms"]["value"]) == int(scores["alarm"].sum()) >= 1
    assert int(page.tiles["fdr-flags"]["value"]) == int(scores["alarm_fdr"].sum())
    worst = scores[scores["p_value"].notna()].sort_values(["p_value", "d2"], ascending=[True, False]).head(5)
    assert page.tables["worst-rows"]["row_heads"] == list(worst.index)
    assert [float(v) for _, v in page.column("worst-rows", "d2")] == list(worst["d2"])
    roles = page.tables["files"]["row_heads"]
    assert roles == ["input", "model"]
    assert page.tables["files"]["rows"][1][3][0] == _digest(model)
    assert "whiten.baseline/4" in page.tables["files"]["rows"][1][0][0]
    assert "F(4, 496)" in rep.read_text(encoding="utf-8")                 # phase 'new' with m = 500, p = 4


def test_loglik_report_equals_its_csv(tmp_path):
    mean, cov, x = _loglik_case()
    data, mfile, cfile = tmp_path / "rows.csv", tmp_path / "mean.csv", tmp_path / "cov.csv"
    pd.DataFrame(x, columns=SENSORS).to_csv(data, index=False)
    pd.DataFrame([mean], columns=SENSORS).to_csv(mfile, index=False)
    pd.DataFrame(cov, columns=SENSORS).to_csv(cfile, index=False)
    out, rep = tmp_path / "ll.csv", tmp_path / "ll.html"
    assert main(["loglik", str(data), "--mean", str(mfile), "--cov", str(cfile), "-o", str(out),
                 "--report", str(rep)]) == 0
    csv = pd.read_csv(out)
    page = check_self_contained(rep.read_text(encoding="utf-8"))
    assert page.external == []
    assert float(page.tiles["total"]["value"]) == pytest.approx(csv["loglik"].sum(), rel=1e-15)
    assert [float(v) for _, v in page.column("per-row", "loglik")] == list(csv["loglik"])
    assert [int(v) for _, v in page.column("per-row", "dof")] == list(csv["n_observed"])
    assert page.tables["files"]["row_heads"] == ["input", "input", "input"]
