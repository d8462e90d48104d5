"""Ridge: fixed penalty vs augmented least squares; GCV / LOOCV vs brute-force refits."""

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten import InputError


def kiln(seed=3, n=24):
    """Invented kiln data: two thermocouples reading almost the same zone, a fan speed."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal(n)
    x = pd.DataFrame({"tc_upper": 800 + 30 * (z + 0.05 * rng.standard_normal(n)),
                      "tc_lower": 790 + 30 * (z + 0.05 * rng.standard_normal(n)),
                      "fan_rpm": 1200 + 100 * rng.standard_normal(n)})
    y = 0.02 * x["tc_upper"] + 0.01 * x["tc_lower"] - 0.001 * x["fan_rpm"] + rng.standard_normal(n)
    return x, y.to_numpy()


def augmented_lstsq(x, y, lam, scale=None):
    """Ridge by its definition: least squares on [X_c; sqrt(lam) D] (numpy lstsq), intercept from means."""
    mu = x.mean(axis=0)
    xc = x - mu
    d = np.ones(x.shape[1]) if scale is None else scale
    aug = np.vstack([xc / d, np.sqrt(lam) * np.eye(x.shape[1])])
    b = np.linalg.lstsq(aug, np.concatenate([y - y.mean(), np.zeros(x.shape[1])]), rcond=None)[0] / d
    return np.concatenate([[y.mean() - mu @ b], b])


@pytest.mark.parametrize("lam", [1e-3, 2.5, 400.0])
def test_fixed_penalty_equals_augmented_least_squares(lam):
    x, y = kiln()
    fit = whiten.fit_linear(x, y, ridge=lam)
    np.testing.assert_allclose(fit.coef, augmented_lstsq(x.to_numpy(), y, lam), rtol=1e-9)
    assert fit.ridge.criterion == "fixed" and fit.ridge.penalty == lam
    assert np.isnan(fit.p_value).all()
    # effective degrees of freedom: trace of the ridge hat matrix (Hoerl & Kennard, 1970), via numpy svd
    s = np.linalg.svd(x.to_numpy() - x.to_numpy().mean(0), compute_uv=False)
    assert fit.ridge.effective_dof == pytest.approx(1 + np.sum(s ** 2 / (s ** 2 + lam)), rel=1e-12)


def test_standardized_penalty():
    x, y = kiln()
    xv = x.to_numpy()
    sd = xv.std(axis=0)  # population SD, as documented
    fit = whiten.fit_linear(x, y, ridge=3.0, standardize=True)
    np.testing.assert_allclose(fit.coef, augmented_lstsq(xv, y, 3.0, scale=sd), rtol=1e-9)


def brute_force_loo(xv, y, lam):
    errs = []
    for i in range(len(y)):
        keep = np.arange(len(y)) != i
        b = augmented_lstsq(xv[keep], y[keep], lam)
        errs.append(y[i] - (b[0] + xv[i] @ b[1:]))
    return float(np.mean(np.square(errs)))


def brute_force_gcv(xv, y, lam):
    """GCV by its definition (Golub, Heath & Wahba, 1979): n RSS / (n - trace H)^2, with the trace of
    the smoother H found by refitting on each unit response e_i."""
    n = len(y)
    tr = 0.0
    for i in range(n):
        e = np.zeros(n)
        e[i] = 1.0
        b = augmented_lstsq(xv, e, lam)
        tr += b[0] + xv[i] @ b[1:]
    b = augmented_lstsq(xv, y, lam)
    rss = float(np.sum((y - b[0] - xv @ b[1:]) ** 2))
    return n * rss / (n - tr) ** 2


@pytest.mark.parametrize("criterion", ["gcv", "loocv"])
def test_criteria_equal_brute_force(criterion):
    x, y = kiln()
    xv = x.to_numpy()
    fit = whiten.fit_linear(x, y, ridge=criterion)
    info = fit.ridge
    brute = brute_force_loo if criterion == "loocv" else brute_force_gcv
    for i in (5, 30, 50):
        assert info.scores[i] == pytest.approx(brute(xv, y, info.grid[i]), rel=1e-9)
    best = int(np.argmin(info.scores))
    assert info.penalty == info.grid[best]
    np.testing.assert_allclose(fit.coef, augmented_lstsq(xv, y, info.penalty), rtol=1e-9)
    np.testing.assert_allclose(info.paths[best], fit.coef[1:], rtol=1e-9)


def test_ridge_errors():
    x, y = kiln()
    with pytest.raises(InputError, match="ridge: expected a penalty >= 0 or one of"):
        whiten.fit_linear(x, y, ridge="aic")
    with pytest.raises(InputError, match="finite number >= 0"):
        whiten.fit_linear(x, y, ridge=-1.0)
    with pytest.raises(InputError, match="ridge_grid: give at least two"):
        whiten.fit_linear(x, y, ridge="gcv", ridge_grid=[1.0])
    with pytest.raises(InputError, match="standardize=True applies to ridge fits only"):
        whiten.fit_linear(x, y, standardize=True)
    with pytest.warns(whiten.NumericalWarning, match="end of the grid"):
        whiten.fit_linear(x, y, ridge="gcv", ridge_grid=[1e6, 1e7])


def test_weighted_ridge_equals_augmented_least_squares():
    """With weights, the definition min sum w_i (y_i - b0 - x_i b)^2 + lam ||b||^2 is one least-squares
    problem on [sqrt(w) [1, X]; [0, sqrt(lam) I]] (solved here by numpy lstsq, no centring trick)."""
    x, y = kiln(seed=8, n=30)
    xv = x.to_numpy()
    w = np.random.default_rng(1).uniform(0.2, 5.0, len(y))
    lam = 7.0
    top = np.sqrt(w)[:, None] * np.column_stack([np.ones(len(y)), xv])
    bottom = np.column_stack([np.zeros((3, 1)), np.sqrt(lam) * np.eye(3)])
    ref = np.linalg.lstsq(np.vstack([top, bottom]), np.concatenate([np.sqrt(w) * y, np.zeros(3)]), rcond=None)[0]
    fit = whiten.fit_linear(x, y, weights=w, ridge=lam)
    np.testing.assert_allclose(fit.coef, ref, rtol=1e-9)
    assert fit.weighted == "wls"
