"""Rank deficiency, VIFs, Belsley diagnostics, and failure modes of fit_linear."""

import warnings

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten import InputError, RankDeficiencyWarning

sm = pytest.importorskip("statsmodels.api")


def offset_design():
    """Issue 5's case: six predictors that differ only by constant offsets."""
    t = np.linspace(4e13, 1e14, 10)
    x = pd.DataFrame({f"probe{i}": t + i * 3e13 for i in range(6)})
    return x, np.linspace(1, 0, 10)


def test_offset_predictors_rank_two():
    x, y = offset_design()
    a = sm.add_constant(x.to_numpy())
    # rank 2 and R^2 = 1 confirmed with numpy (matrix_rank of the unit-length design) and statsmodels
    assert np.linalg.matrix_rank(a / np.linalg.norm(a, axis=0)) == 2
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # statsmodels warns that the design is rank deficient
        assert sm.OLS(y, a).fit().rsquared == pytest.approx(1.0, abs=1e-10)
    with pytest.warns(RankDeficiencyWarning, match=r"rank 2 of 7.*'probe1'.*'probe5'") as rec:
        fit = whiten.fit_linear(x, y)
    msg = str(rec[0].message)
    assert "'probe1' = 3e+13*(intercept) + 1*'probe0'" in msg   # names what it depends on
    assert fit.rank == 2
    assert fit.health.set_aside == ("probe1", "probe2", "probe3", "probe4", "probe5")
    assert np.isnan(fit.coef[2:]).all() and np.isfinite(fit.coef[:2]).all()
    assert fit.r_squared == pytest.approx(1.0, abs=1e-12)
    assert np.max(np.abs(fit.residuals)) < 1e-14           # y spans [0, 1]: ~0 residuals
    assert any("linearly dependent" in s for s in fit.collinearity.sentences)
    assert np.isinf(fit.vif).all()


def test_rank_policies():
    x, y = offset_design()
    with pytest.raises(InputError, match=r"rank deficient \(rank 2 of 7.*'probe3' = .*'probe0'"):
        whiten.fit_linear(x, y, rank_policy="raise")
    with pytest.warns(RankDeficiencyWarning, match="left out"):
        fit = whiten.fit_linear(x, y, rank_policy="drop")
    assert fit.names == ("(intercept)", "probe0") and fit.coef.shape == (2,)
    with pytest.raises(InputError, match="rank_policy: choose one of"):
        whiten.fit_linear(x, y, rank_policy="pivot")


def test_minimum_norm_duplicate_splits_evenly():
    """Two copies of one column: the minimum-norm solution shares the effect equally
    (common practice: numpy.linalg.lstsq returns the same split on this design)."""
    rng = np.random.default_rng(2)
    u = rng.standard_normal(20)
    x = pd.DataFrame({"gauge": u, "gauge_copy": u, "other": rng.standard_normal(20)})
    y = 1 + 4 * u + x["other"] + 0.1 * rng.standard_normal(20)
    with pytest.warns(RankDeficiencyWarning, match="'gauge_copy'.*'gauge_copy' = 1\\*'gauge'"):
        fit = whiten.fit_linear(x, y, rank_policy="minimum-norm")
    ref = np.linalg.lstsq(sm.add_constant(x.to_numpy()), y.to_numpy(), rcond=None)[0]   # numpy lstsq
    np.testing.assert_allclose(fit.coef, ref, rtol=1e-10)
    assert fit.rank == 3
    # statsmodels OLS (default method "pinv") reports the standard errors of the same minimum-norm
    # estimator (with a duplicated column the two scalings give the same solution for every y)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        bse = sm.OLS(y.to_numpy(), sm.add_constant(x.to_numpy())).fit().bse
    np.testing.assert_allclose(fit.std_error, bse, rtol=1e-9)
    # unit-length coordinates: the answer does not depend on the predictors' units. The copy
    # recorded in other units (x1000) still takes half the effect (raw minimum norm would give it
    # nearly all: 4000/(1 + 1e6) per unit versus 4/(1 + 1e6) for the original)
    x2 = x.assign(gauge_copy=x["gauge_copy"] * 1000.0)
    with pytest.warns(RankDeficiencyWarning):
        fit2 = whiten.fit_linear(x2, y, rank_policy="minimum-norm")
    np.testing.assert_allclose(fit2.coef * [1, 1, 1000.0, 1], fit.coef, rtol=1e-9)


def test_duplicate_column_names_both():
    rng = np.random.default_rng(4)
    v = rng.standard_normal(15)
    x = pd.DataFrame({"valve": v, "noise": rng.standard_normal(15), "valve_again": v.copy()})
    y = v + rng.standard_normal(15)
    with pytest.warns(RankDeficiencyWarning, match=r"'valve_again' = 1\*'valve'"):
        fit = whiten.fit_linear(x, y)
    assert np.isnan(fit.coef[3]) and np.isfinite(fit.coef[1])   # the later column is set aside
    with pytest.raises(InputError, match="'valve_again' = 1\\*'valve'"):
        whiten.fit_linear(x, y, rank_policy="raise")


# VIF worked values: from a public statistics-library test, as reported in issue 5
def test_vif_worked_values():
    y = np.arange(8.0)
    x1 = np.array([0, 0, 1, 1, 2, 2, 3, 3.0])
    x2 = np.array([0, 0, 0, 0, 1, 1, 1, 1.0])
    np.testing.assert_allclose(whiten.fit_linear(np.column_stack([x1, x2]), y).vif, [5.0, 5.0], rtol=1e-13)
    x1 = np.array([0, 0, 0, 0, 2, 2, 2, 2.0])
    x2 = np.array([0, 2, 0, 2, 0, 2, 0, 2.0])
    np.testing.assert_allclose(whiten.fit_linear(np.column_stack([x1, x2]), y).vif, [1.0, 1.0], rtol=1e-13)
    x1 = np.array([0, 0, 1, 1, 2, 2, 3, 3.0])
    with pytest.warns(RankDeficiencyWarning):
        v = whiten.fit_linear(np.column_stack([x1, x1 + 1]), y).vif
    assert np.isinf(v).all()


def test_vif_nan_without_intercept():
    x = np.column_stack([np.arange(6.0), np.arange(6.0) ** 2])
    assert np.isnan(whiten.fit_linear(x, np.ones(6), intercept=False).vif).all()


def test_belsley_indices_and_proportions():
    """Condition indices are singular-value ratios of the unit-length design (numpy svd), and the
    variance-decomposition proportions of a near-dependent pair exceed 0.5 on the worst direction
    (Belsley, Kuh & Welsch, 1980, ch. 3)."""
    rng = np.random.default_rng(9)
    n = 40
    base = rng.standard_normal(n)
    x = pd.DataFrame({"flow_in": base, "flow_out": base + 1e-3 * rng.standard_normal(n),
                      "pressure": rng.standard_normal(n)})
    y = base + rng.standard_normal(n)
    fit = whiten.fit_linear(x, y)
    a = sm.add_constant(x.to_numpy())
    s = np.linalg.svd(a / np.linalg.norm(a, axis=0), compute_uv=False)   # numpy SVD
    np.testing.assert_allclose(fit.collinearity.condition_indices, s[0] / s, rtol=1e-9)
    np.testing.assert_allclose(fit.condition, s[0] / s[-1], rtol=1e-9)
    np.testing.assert_allclose(fit.condition_raw, np.linalg.cond(a), rtol=1e-9)
    np.testing.assert_allclose(fit.collinearity.proportions.sum(axis=0), 1.0, rtol=1e-12)
    assert ("flow_in", "flow_out") in fit.collinearity.groups
    assert "nearly linearly dependent" in fit.collinearity.sentences[0]
    assert list(fit.collinearity.to_frame().columns[:2]) == ["singular_value", "condition_index"]


def test_bad_inputs_are_named():
    x = pd.DataFrame({"a": [1.0, 2.0, np.nan, 4.0], "b": [1.0, 0.0, 1.0, 3.0]})
    with pytest.raises(InputError, match="row 2.*'a'"):
        whiten.fit_linear(x, [1, 2, 3, 4])
    with pytest.raises(InputError, match="y: has 3 rows but X has 4"):
        whiten.fit_linear(x.fillna(0), [1, 2, 3])
    with pytest.raises(InputError, match="weights: row 1 has weight 0"):
        whiten.fit_linear(x.fillna(0), [1, 2, 3, 4], weights=[1, 0, 1, 1])
    with pytest.raises(InputError, match="3 rows cannot determine 4"):
        whiten.fit_linear(np.ones((3, 3)) + np.eye(3), [1, 2, 3])
    with pytest.raises(InputError, match="weights or error_cov, not both"):
        whiten.fit_linear(x.fillna(0), [1, 2, 3, 4], weights=np.ones(4), error_cov=np.eye(4))
    with pytest.raises(InputError, match=r"error_cov: expected shape \(4, 4\)"):
        whiten.fit_linear(x.fillna(0), [1, 2, 3, 4], error_cov=np.eye(3))
    with pytest.raises(whiten.NotPositiveDefiniteError):
        whiten.fit_linear(x.fillna(0), [1, 2, 3, 4], error_cov=np.diag([1.0, -1.0, 1.0, 1.0]))
    with pytest.raises(InputError, match="band: choose None, 'mean' or 'new_row'"):
        whiten.fit_linear(x.fillna(0), [1, 2, 3, 5]).predict([1.0, 2.0], band="confidence")
    with pytest.raises(InputError, match=r"does not match the model: missing columns \[.b.\]"):
        whiten.fit_linear(x.fillna(0), [1, 2, 3, 5]).predict(pd.DataFrame({"a": [1.0]}))
    with pytest.raises(InputError, match="reserves for the intercept"):
        whiten.fit_linear(pd.DataFrame({"(intercept)": [1.0, 2, 3], "b": [1.0, 0, 2]}), [1, 2, 3])
    with pytest.raises(InputError, match="coverage: must be strictly between 0 and 1"):
        whiten.fit_linear(x.fillna(0), [1, 2, 3, 5]).coef_interval(95)


def test_inputs_not_modified_and_results_frozen():
    rng = np.random.default_rng(1)
    x = rng.standard_normal((30, 3))
    y = rng.standard_normal(30)
    w = rng.uniform(1, 2, 30)
    copies = x.copy(), y.copy(), w.copy()
    fit = whiten.fit_linear(x, y, weights=w)
    np.testing.assert_array_equal(x, copies[0])
    np.testing.assert_array_equal(y, copies[1])
    np.testing.assert_array_equal(w, copies[2])
    with pytest.raises(ValueError):
        fit.coef[0] = 1.0
    d = fit.to_dict()
    import json

    json.dumps(d)  # serialisable
    assert d["names"][0] == "(intercept)" and d["health"]["method"].startswith("householder")


def test_compensated_and_longdouble_residuals_agree_with_exact_arithmetic():
    """Residual kernels against exact rational arithmetic (Python fractions, standard library)."""
    from fractions import Fraction

    from whiten.linalg import compensated as _extended

    rng = np.random.default_rng(0)
    a = rng.standard_normal((7, 4)) * 1e3
    x = rng.standard_normal(4)
    b = a @ x  # nearly cancelling residual: hard for plain double
    exact = [float(Fraction(b[i]) - sum(Fraction(a[i, j]) * Fraction(x[j]) for j in range(4))) for i in range(7)]
    comp = _extended.residual(a, x, b, None, "compensated")
    np.testing.assert_allclose(comp, exact, rtol=1e-12, atol=0)
    ld = _extended.residual(a, x, b, None, "longdouble")
    tol = float(np.finfo(np.longdouble).eps) * 4 * np.abs(a).max() * np.abs(x).max() * 4
    np.testing.assert_allclose(ld, exact, rtol=0, atol=tol)
    g = _extended.gradient(a, comp, "compensated")
    ge = [float(sum(Fraction(a[i, j]) * Fraction(comp[i]) for i in range(7))) for j in range(4)]
    np.testing.assert_allclose(g, ge, rtol=1e-12)


def test_spread_out_near_dependence_found_by_singular_values():
    """Kahan's (1966) triangular matrix: no column is close to the span of the earlier ones
    (unpivoted and even column-pivoted QR miss it), yet the smallest singular value of the
    unit-length design is ~7e-6 of the largest (numpy svd). With rank_tol=1e-4 the rank test
    must fall back to singular values and set aside the latest column whose removal restores
    rank (checked here with numpy's SVD of every candidate)."""
    n, th = 30, 1.2
    k = np.diag(np.sin(th) ** np.arange(n)) @ (np.eye(n) - np.cos(th) * np.triu(np.ones((n, n)), 1))
    a = np.vstack([k, np.zeros((10, n))])
    y = np.random.default_rng(2).standard_normal(n + 10)

    def ratio(m):
        s = np.linalg.svd(m / np.linalg.norm(m, axis=0), compute_uv=False)   # numpy SVD
        return s[-1] / s[0]

    assert ratio(k) < 1e-4
    latest = max(j for j in range(n) if ratio(np.delete(k, j, axis=1)) > 1e-4)
    with pytest.warns(RankDeficiencyWarning, match=f"rank 29 of 30.*'x{latest}' set aside"):
        fit = whiten.fit_linear(a, y, intercept=False, rank_tol=1e-4)
    assert fit.health.set_aside == (f"x{latest}",) and "svd-rank" in fit.health.method


def test_residual_arithmetic_without_wider_longdouble(monkeypatch):
    """Where numpy.longdouble is plain double (Windows, ARM64 macOS), "longdouble" requests fall
    back to compensated arithmetic rather than silently losing the extra digits."""
    from whiten.linalg import compensated as _extended

    monkeypatch.setattr(_extended, "LONGDOUBLE_IS_WIDER", False)
    assert _extended.extended_kind("longdouble") == "compensated"
    rng = np.random.default_rng(3)
    x = rng.standard_normal((4000, 3))
    y = x @ [1.0, 2.0, 3.0] + rng.standard_normal(4000)
    with whiten.settings(block_rows=512):
        fit = whiten.fit_linear(x, y, method="blocked", refine=True)
    assert fit.health.residual_arithmetic == "compensated" and fit.health.refinement_steps >= 1
    ref = np.linalg.lstsq(np.column_stack([np.ones(4000), x]), y, rcond=None)[0]   # numpy lstsq
    np.testing.assert_allclose(fit.coef, ref, rtol=1e-12)


def test_refinement_beats_plain_qr_on_a_hard_polynomial():
    """Degree-8 polynomial on [10, 12] (invented calibration range): scaled condition ~1e9.
    Reference: exact rational least squares with Python fractions (standard library) on the
    normal equations. Refined coefficients must be far closer than the unrefined QR ones."""
    from fractions import Fraction

    t = np.linspace(10.0, 12.0, 15)
    x = np.column_stack([t ** j for j in range(1, 9)])
    y = np.cos(t)
    a = np.column_stack([np.ones_like(t), x])
    fa = [[Fraction(v) for v in row] for row in a]
    fy = [Fraction(v) for v in y]
    p = a.shape[1]
    g = [[sum(fa[i][r] * fa[i][c] for i in range(len(t))) for c in range(p)] for r in range(p)]
    h = [sum(fa[i][r] * fy[i] for i in range(len(t))) for r in range(p)]
    for col in range(p):   # Gauss-Jordan elimination in exact rationals
        piv = g[col][col]
        for r in range(p):
            if r != col:
                f = g[r][col] / piv
                g[r] = [g[r][c] - f * g[col][c] for c in range(p)]
                h[r] = h[r] - f * h[col]
    exact = np.array([float(h[r] / g[r][r]) for r in range(p)])
    with pytest.warns(whiten.ConditioningWarning):
        refined = whiten.fit_linear(x, y)
    with pytest.warns(whiten.ConditioningWarning):
        plain = whiten.fit_linear(x, y, refine=False)
    err = lambda c: float(np.max(np.abs(c - exact) / np.abs(exact)))  # noqa: E731
    assert refined.condition > 1e8
    assert err(refined.coef) < 1e-11
    assert err(refined.coef) < 1e-3 * err(plain.coef)


def test_zero_and_constant_columns_named():
    """A column of zeros and a constant column next to the intercept (an unplugged sensor and a
    fixed set point): both set aside, with what they are, and the rest matches numpy lstsq."""
    t = np.arange(6.0)
    x = pd.DataFrame({"t": t, "unplugged": np.zeros(6), "setpoint": np.full(6, 3.0)})
    y = np.array([1.0, 2.1, 2.9, 4.2, 4.8, 6.1])
    with pytest.warns(RankDeficiencyWarning, match=r"'unplugged' is identically zero; 'setpoint' = 3\*\(intercept\)"):
        fit = whiten.fit_linear(x, y)
    ref = np.linalg.lstsq(np.column_stack([np.ones(6), t]), y, rcond=None)[0]   # numpy lstsq
    np.testing.assert_allclose(fit.coef[:2], ref, rtol=1e-13)
    assert np.isnan(fit.coef[2:]).all()
