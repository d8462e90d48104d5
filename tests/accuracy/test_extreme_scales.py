"""Columns at extreme scales (1e-300 .. 1e+300) are fitted like columns of order one (issue 13, item 4).

References: mpmath at 40-60 digits from the exact double inputs (means, covariances,
correlations, d2, least-squares coefficients); for the estimators without a closed
form at hand (shrinkage, robust, standardized ridge) the scale equivariance of their
definitions: multiplying a column by c multiplies its mean, its row of the
covariance factor and its coefficient by c and leaves d2 and correlations alone.
"""

from __future__ import annotations

import math
import warnings

import mpmath as mp
import numpy as np
import pandas as pd
import pytest

import whiten
from whiten._numerics import DIGITS

SCALES = [1e-300, 1e-200, 1e-160, 1e160, 1e200, 1e300]


def _rows(seed=3, n=120):
    rng = np.random.default_rng(seed)
    return rng.standard_normal((n, 3)) @ np.array([[1.0, 0.6, 0.1], [0.0, 0.8, 0.4], [0.0, 0.0, 0.5]]) + [2, -1, 5]


def _mp_baseline(x, w=None):
    """Mean, covariance (divisor sum(w) - 1) of the exact doubles, in mpmath."""
    n, p = x.shape
    w = np.ones(n) if w is None else w
    W = mp.fsum(mp.mpf(float(v)) for v in w)
    m = [mp.fsum(mp.mpf(float(w[i])) * mp.mpf(float(x[i, j])) for i in range(n)) / W for j in range(p)]
    c = mp.matrix(p, p)
    for j in range(p):
        for k in range(j, p):
            c[j, k] = c[k, j] = mp.fsum(mp.mpf(float(w[i])) * (mp.mpf(float(x[i, j])) - m[j])
                                        * (mp.mpf(float(x[i, k])) - m[k]) for i in range(n)) / (W - 1)
    return m, c


def _mp_d2(m, c, rows):
    """d2 by an mpmath solve with the correlation (mpmath's singularity test is not scale-free)."""
    p = c.rows
    sd = [mp.sqrt(c[j, j]) for j in range(p)]
    cr = mp.matrix([[c[i, j] / (sd[i] * sd[j]) for j in range(p)] for i in range(p)])
    out = []
    for r in rows:
        d = mp.matrix([(mp.mpf(float(v)) - m[j]) / sd[j] for j, v in enumerate(r)])
        out.append((d.T * mp.lu_solve(cr, d))[0])
    return out


def _rel(a, b):
    return float(abs(mp.mpf(float(a)) - b) / abs(b))


def _digits(rel):
    return DIGITS if rel <= 0 else min(DIGITS, -math.log10(rel))


@pytest.mark.parametrize("scale", SCALES)
@pytest.mark.parametrize("method,weighted", [("auto", False), ("gram", False), ("tsqr", False), ("auto", True)])
def test_sample_baseline_at_extreme_scale_matches_mpmath(scale, method, weighted):
    mp.mp.dps = 40
    x = _rows()
    x[:, 1] *= scale  # a decimal scale: the column's doubles are new numbers, not a power-of-two copy
    w = np.linspace(0.5, 3.0, x.shape[0]) if weighted else None
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no overflow RuntimeWarning, no spurious warning
        b = whiten.fit_baseline(x, method=method, weights=w, chunksize=50)
        d2 = b.score(x[:6])["d2"].to_numpy()
    m, c = _mp_baseline(x, w)
    # mean, correlation and d2 against mpmath (40 digits from the exact doubles)
    assert max(_rel(b.mean[j], m[j]) for j in range(3)) < 1e-14
    sd = column_sd(b.factor.lower)
    for j in range(3):
        for k in range(3):
            r_ref = c[j, k] / mp.sqrt(c[j, j] * c[k, k])
            r_got = float(np.dot(b.factor.lower[j] / sd[j], b.factor.lower[k] / sd[k]))
            assert abs(r_got - float(r_ref)) < 1e-14
    ref = _mp_d2(m, c, x[:6])
    actual = min(_digits(_rel(d2[i], ref[i])) for i in range(6))
    assert actual > 14.0
    # the digits claim is not above the actual digits of d2 (the claim is about solves with the factor)
    assert b.health.digits_trusted <= actual + 0.5
    assert abs(b.health.digits_lost - whiten.fit_baseline(_rows(), method=method, weights=w).health.digits_lost) < 0.5


def column_sd(lower):
    c = np.exp2(-np.frexp(np.max(np.abs(lower), axis=1))[1].astype(float))
    return np.sqrt(np.einsum("ij,ij->i", lower * c[:, None], lower * c[:, None])) / c


@pytest.mark.parametrize("scale", [1e-160, 1e160, 1e-300, 1e300])
@pytest.mark.parametrize("estimator", ["shrinkage", "robust"])
def test_other_estimators_are_scale_equivariant_at_extreme_scales(scale, estimator):
    # reference: scale equivariance of the estimator's definition (shrinkage of the correlation towards
    # the identity; MCD). A power-of-two multiple keeps the doubles exact, so equivariance is checkable.
    x = _rows(seed=11)
    k = int(round(math.log2(scale)))
    xs = x.copy()
    xs[:, 1] = np.ldexp(xs[:, 1], k)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b0 = whiten.fit_baseline(x, estimator=estimator)
        b1 = whiten.fit_baseline(xs, estimator=estimator)
        d0 = b0.score(x[:8])["d2"].to_numpy()
        d1 = b1.score(xs[:8])["d2"].to_numpy()
        fr = b1.to_frame()
    np.testing.assert_allclose(d1, d0, rtol=1e-13)
    np.testing.assert_allclose(np.ldexp(b1.mean[1], -k), b0.mean[1], rtol=1e-14)
    np.testing.assert_allclose(np.ldexp(b1.factor.lower[1], -k), b0.factor.lower[1], rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(fr["own_share"].to_numpy(), b0.to_frame()["own_share"].to_numpy(), rtol=1e-12)
    assert set(b1.params["equilibrated"]) == {"x1"} and "equilibrated" not in b0.params


def test_chunked_csv_with_extreme_columns_matches_mpmath(tmp_path):
    mp.mp.dps = 40
    x = _rows(seed=5, n=90)
    x[:, 0] *= 1e-160
    x[:, 2] *= 1e160
    frame = pd.DataFrame(x, columns=["tiny", "mid", "huge"])
    path = tmp_path / "ref.csv"
    frame.to_csv(path, index=False, float_format="%.17g")
    back = pd.read_csv(path).to_numpy()  # the doubles the reader sees
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b = whiten.fit_baseline(str(path), chunksize=25)
        d2 = b.score(frame.iloc[:5])["d2"].to_numpy()
    m, c = _mp_baseline(back)
    ref = _mp_d2(m, c, x[:5])
    assert min(_digits(_rel(d2[i], ref[i])) for i in range(5)) > 14.0
    assert b.params["equilibrated"].keys() == {"tiny", "huge"}
    # missing sensors take the sub-model route (Factor.subset), which must not overflow either
    part = frame.iloc[:3].copy()
    part.loc[:, "mid"] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        got = b.score(part, missing="marginalize")["d2"].to_numpy()
    sub = [0, 2]
    cs = mp.matrix([[c[i, j] for j in sub] for i in sub])
    ref2 = _mp_d2([m[j] for j in sub], cs, x[:3][:, sub])
    assert min(_digits(_rel(got[i], ref2[i])) for i in range(3)) > 14.0


def _mp_coef(a, y, w=None, v=None):
    """Generalized least squares coefficients of the exact doubles in mpmath."""
    A, b = mp.matrix(a.tolist()), mp.matrix(y.tolist())
    if v is not None:
        Vi = mp.matrix(v.tolist()) ** -1  # the reference may invert: 60 digits, a well-conditioned AR(1)
        SiA, Sib = Vi * A, Vi * b
    elif w is not None:
        W = mp.diag([mp.mpf(float(t)) for t in w])
        SiA, Sib = W * A, W * b
    else:
        SiA, Sib = A, b
    g, h = A.T * SiA, A.T * Sib
    p = g.rows
    sc = [1 / mp.sqrt(g[j, j]) for j in range(p)]  # equilibrated (mpmath's singularity test is not scale-free)
    gs = mp.matrix([[g[i, j] * sc[i] * sc[j] for j in range(p)] for i in range(p)])
    z = mp.lu_solve(gs, mp.matrix([h[i] * sc[i] for i in range(p)]))
    return [z[j] * sc[j] for j in range(p)]


def _regression(seed=8, n=40):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((n, 3))
    y = 1.5 + x @ [0.7, -2.0, 0.3] + 0.05 * rng.standard_normal(n)
    return x, y


@pytest.mark.parametrize("xscale,yscale", [(1e-200, 1.0), (1e160, 1.0), (1.0, 1e160), (1.0, 1e-200),
                                            (1e-300, 1e-150), (1e200, 1e100)])
@pytest.mark.parametrize("kind", ["ols", "wls", "gls", "blocked"])
def test_regression_with_extreme_columns_matches_mpmath(xscale, yscale, kind):
    mp.mp.dps = 60
    x, y = _regression()
    n = x.shape[0]
    x[:, 1] *= xscale
    y = y * yscale
    opts: dict = {}
    w = v = None
    if kind == "wls":
        w = opts["weights"] = np.linspace(0.2, 5.0, n)
    elif kind == "gls":
        t = np.arange(n)
        v = opts["error_cov"] = 0.6 ** np.abs(t[:, None] - t[None, :])
    elif kind == "blocked":
        opts["method"] = "blocked"
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # neither "collinear" nor an overflow RuntimeWarning
        fit = whiten.fit_linear(x, y, **opts)
    assert fit.health.rank == 4 and not fit.health.set_aside
    a = np.column_stack([np.ones(n), x])
    ref = _mp_coef(a, y, w, v)
    # error in the equilibrated coordinates (coefficient times its column's norm), max-norm relative
    s = [float(mp.sqrt(mp.fsum(mp.mpf(float(t)) ** 2 for t in a[:, k]))) for k in range(4)]
    z = [ref[k] * s[k] for k in range(4)]
    zn = max(abs(t) for t in z)
    err = max(abs(mp.mpf(float(fit.coef[k])) * s[k] - z[k]) for k in range(4)) / zn
    actual = _digits(float(err))
    assert actual > 12.0
    assert fit.health.digits_solved <= actual + 0.5
    # the unscaled twin makes the same statements (the claims do not depend on units)
    x0, y0 = _regression()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit0 = whiten.fit_linear(x0, y0, **opts)
    assert abs(fit.health.digits_trusted - fit0.health.digits_trusted) < 0.5
    assert math.isfinite(fit.residual_sd) and math.isfinite(fit.loglik)
    assert fit.residual_sd == pytest.approx(fit0.residual_sd * yscale, rel=1e-6)


@pytest.mark.parametrize("scale", [1e-200, 1e160])
def test_standardized_ridge_is_equivariant_at_extreme_scales(scale):
    # reference: with standardize=True the ridge estimate's definition is unit-free (the coefficient of a
    # column multiplied by 2**k is divided by 2**k exactly), and mpmath's ridge of the unit data
    x, y = _regression(seed=4)
    k = int(round(math.log2(scale)))
    xs = x.copy()
    xs[:, 2] = np.ldexp(xs[:, 2], k)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        f0 = whiten.fit_linear(x, y, ridge=0.3, standardize=True)
        f1 = whiten.fit_linear(xs, y, ridge=0.3, standardize=True)
        f2 = whiten.fit_linear(x, np.ldexp(y, k), ridge=0.3, standardize=True)
    got = np.array(f1.coef)
    got[3] = np.ldexp(got[3], k)
    np.testing.assert_allclose(got, f0.coef, rtol=1e-13)
    np.testing.assert_allclose(np.ldexp(np.array(f2.coef), -k), f0.coef, rtol=1e-13)
    assert f2.loglik == pytest.approx(f0.loglik - x.shape[0] * k * math.log(2), rel=1e-12)


# -------------------------------------------------------------- scale-free "constant" and "collinear"

@pytest.mark.parametrize("scale", [1e-300, 1e-200, 1e-100, 1.0, 1e100, 1e200, 1e300])
def test_constant_and_dependent_columns_are_named_at_every_scale(scale):
    # truth by construction: a column with spread is not constant; a column holding one value is; a
    # column that is an exact power-of-two multiple of another is linearly dependent
    x = _rows(seed=21, n=60)
    x[:, 1] *= scale
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b = whiten.fit_baseline(x)
    assert b.dim == 3
    const = x.copy()
    const[:, 1] = 3.0 * scale
    with pytest.raises(whiten.InputError, match="constant column.*'x1'"):
        whiten.fit_baseline(const)
    dep = np.column_stack([x, np.ldexp(x[:, 1], 7)])
    with pytest.raises(whiten.InputError, match="linearly dependent"):
        whiten.fit_baseline(dep)


@pytest.mark.parametrize("scale", [1e-300, 1e-200, 1e-100, 1.0, 1e100, 1e200, 1e300])
def test_regression_collinear_only_when_dependent_at_every_scale(scale):
    x, y = _regression(seed=2)
    x[:, 0] *= scale
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fit = whiten.fit_linear(x, y)
    assert fit.health.rank == 4
    dep = np.column_stack([x, x[:, 0] * 0.5 + np.ldexp(x[:, 0], -3)])  # exactly 0.625 * x0
    with pytest.warns(whiten.RankDeficiencyWarning, match="'x3'"):
        fd = whiten.fit_linear(dep, y)
    assert fd.health.rank == 4 and "x3" in fd.health.set_aside


def test_model_file_with_extreme_columns_round_trips(tmp_path):
    # reference: the in-memory model (checked against mpmath above); the file must give the same d2
    x = _rows(seed=9)
    x[:, 0] *= 1e160
    x[:, 2] *= 1e-160
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b = whiten.fit_baseline(x)
        b.save(tmp_path / "m.json")
        back = whiten.load_baseline(tmp_path / "m.json")
        d0 = b.score(x[:5])["d2"].to_numpy()
        d1 = back.score(x[:5])["d2"].to_numpy()
    np.testing.assert_allclose(d1, d0, rtol=1e-14)
    assert abs(back.health.digits_lost - b.health.digits_lost) < 0.3
