"""The calibration problem: settings, whitened residuals and Jacobians, and one optimizer run.

Shared by :func:`~whiten.likelihood.calibrate.calibrate` and
:func:`~whiten.likelihood.profile.profile_interval` (which re-runs the
optimizer with one parameter fixed).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from typing import Any

import numpy as np

from .._numerics import EPS
from ..errors import InputError
from ..linalg.factor import Factor

__all__ = ["Problem", "OPTIMIZER_KEYS", "check_settings", "predict", "white", "whitened_jac", "central_jac", "solve"]

#: the keys of ``calibrate(optimizer_settings=...)``: handed to scipy.optimize.least_squares unchanged
OPTIMIZER_KEYS = {
    "method": "trf",        # least_squares method: "trf", "dogbox" or "lm"
    "x_scale": 1.0,         # least_squares x_scale (e.g. "jac")
}


@dataclasses.dataclass(frozen=True)
class Problem:
    """Everything a (re-)fit needs: model, data, covariance factor, bounds and optimizer settings."""

    model: Callable
    y: np.ndarray
    factor: Any
    jac: Callable | None
    lower: np.ndarray
    upper: np.ndarray
    method: str
    tol: float
    max_evals: int | None
    x_scale: Any
    chi2: float
    rescale_factor: float


def check_settings(jacobian, rescale, tolerance, optimizer_settings) -> dict:
    """The optimizer settings with defaults filled in; bad calibrate keywords raise InputError."""
    given = {} if optimizer_settings is None else optimizer_settings
    if not isinstance(given, dict):
        raise InputError(f"optimizer_settings: expected a dict such as {{'method': 'dogbox'}}, got {given!r}")
    unknown = sorted(set(given) - set(OPTIMIZER_KEYS))
    if unknown:
        raise InputError(f"optimizer_settings: unknown key(s) {unknown}; whiten passes only "
                         f"{sorted(OPTIMIZER_KEYS)} to scipy.optimize.least_squares (it sets the rest itself)")
    opts = dict(OPTIMIZER_KEYS)
    opts.update(given)
    if opts["method"] not in ("trf", "dogbox", "lm"):
        raise InputError(f"optimizer_settings['method']: expected 'trf', 'dogbox' or 'lm', got {opts['method']!r}")
    if not isinstance(rescale, bool):
        raise InputError(f"rescale: expected True or False, got {rescale!r}")
    if not (isinstance(tolerance, (int, float)) and 0 < tolerance < 1):
        raise InputError(f"tolerance: expected a number between 0 and 1, got {tolerance!r}")
    if jacobian is not None and not callable(jacobian):
        raise InputError("jacobian: expected a callable theta -> (n, K) Jacobian of the predictions, or None")
    return opts


def predict(model: Callable, theta: np.ndarray, n: int) -> np.ndarray:
    """``model(theta)``, checked for shape (n,) and finiteness (the message names theta)."""
    try:
        out = np.asarray(model(theta.copy()), dtype=np.float64)
    except (TypeError, ValueError, ArithmeticError) as exc:
        raise InputError(f"model(theta) failed at theta={theta.tolist()}: {type(exc).__name__}: {exc}") from None
    if out.shape != (n,):
        raise InputError(f"model(theta) returned shape {out.shape}; expected ({n},) to match y")
    if not np.isfinite(out).all():
        k = int(np.flatnonzero(~np.isfinite(out))[0])
        raise InputError(f"model(theta) returned {out[k]} at position {k} for theta={theta.tolist()}; "
                         "keep the model finite (use bounds= to stay in its domain)")
    return out


def white(factor: Any, v: np.ndarray) -> np.ndarray:
    """W v for one vector: for a Factor one triangular solve ``L^{-1} v`` (cheaper than the row path)."""
    if isinstance(factor, Factor):
        return factor.solve_lower(v)
    return factor.whiten(v)


def whitened_jac(prob: Problem, theta: np.ndarray, n: int, k: int, fallback: np.ndarray | None) -> np.ndarray:
    """The user's Jacobian at theta, checked and whitened (``fallback`` when none was given)."""
    if prob.jac is None:
        # callers pass fallback=None only for problems that carry their own Jacobian
        assert fallback is not None
        return fallback
    j = np.asarray(prob.jac(theta.copy()), dtype=np.float64)
    if j.ndim == 1 and k == 1:
        j = j[:, None]
    if j.shape != (n, k):
        raise InputError(f"jacobian(theta) returned shape {j.shape}; expected ({n}, {k})")
    if not np.isfinite(j).all():
        raise InputError(f"jacobian(theta) returned non-finite values at theta={theta.tolist()}")
    # residual z = W (model - y): its Jacobian is W J, whitening J's columns
    return prob.factor.whiten(j.T).T


def central_jac(prob: Problem, theta: np.ndarray, n: int) -> np.ndarray:
    """Whitened Jacobian by central differences (error O(h^2), h ~ eps^(1/3)).

    The optimizer's own forward-difference Jacobian is good to about half the
    digits (sqrt(eps)); theta_cov is reported, so it gets the better one. Near
    a bound the step turns one-sided, inside the bounds.
    """
    k = theta.shape[0]
    out = np.empty((n, k))
    for i in range(k):
        h = EPS ** (1.0 / 3.0) * max(1.0, abs(theta[i]))
        up, dn = theta.copy(), theta.copy()
        up[i] = min(theta[i] + h, prob.upper[i])
        dn[i] = max(theta[i] - h, prob.lower[i])
        out[:, i] = (predict(prob.model, up, n) - predict(prob.model, dn, n)) / (up[i] - dn[i])
    return prob.factor.whiten(out.T).T


def solve(prob: Problem, theta0: np.ndarray, fixed: dict | None = None):
    """Run least_squares on the free parameters; returns (theta, chi2, result)."""
    from scipy.optimize import least_squares

    n = prob.y.shape[0]
    k_all = theta0.shape[0]
    fixed = fixed or {}
    free = np.array([i for i in range(k_all) if i not in fixed], dtype=np.intp)
    base = theta0.copy()
    for i, v in fixed.items():
        base[i] = v

    def full(t):
        th = base.copy()
        th[free] = t
        return th

    def fun(t):
        return white(prob.factor, predict(prob.model, full(t), n) - prob.y)

    # least_squares takes either a finite-difference scheme's name or a callable
    jac: str | Callable[[np.ndarray], np.ndarray] = "2-point"
    if prob.jac is not None:
        def user_jac(t):
            return whitened_jac(prob, full(t), n, k_all, None)[:, free]

        jac = user_jac

    kw = dict(jac=jac, method=prob.method, ftol=prob.tol, xtol=prob.tol, gtol=prob.tol,
              x_scale=prob.x_scale if not isinstance(prob.x_scale, np.ndarray) else prob.x_scale[free])
    if prob.method != "lm":
        kw["bounds"] = (prob.lower[free], prob.upper[free])
    if prob.max_evals is not None:
        kw["max_nfev"] = int(prob.max_evals)
    start = np.clip(base[free], prob.lower[free], prob.upper[free])
    res = least_squares(fun, start, **kw)
    return full(res.x), float(res.fun @ res.fun), res
