"""Profile-likelihood intervals for one parameter of a calibration (Venzon & Moolgavkar, 1988)."""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from .problem import Problem, predict, solve, white
from .results import CalibrationFit, ProfileInterval

__all__ = ["profile_interval"]


def profile_interval(fit: CalibrationFit, param: int | str, *, coverage: float = 0.95,
                     max_steps: int = 40) -> ProfileInterval:
    """Profile-likelihood interval for one parameter of a :func:`calibrate` result.

    The interval holds the values v for which, re-fitting every other
    parameter with this one fixed at v, the chi-square rises by at most
    ``chi2.ppf(coverage, 1)`` (times the reduced chi-square when the fit was
    calibrated with ``rescale=True``) above its minimum (Venzon & Moolgavkar, 1988).

    Parameters
    ----------
    fit : CalibrationFit
        Holds the model, data and covariance factor it was computed from.
    param : int or str
        Position or name of the parameter.
    coverage : float
        Coverage probability, 0 < coverage < 1.
    max_steps : int
        Doublings of the search step on each side before giving up (the end
        is then reported as infinite).

    Returns
    -------
    ProfileInterval

    Raises
    ------
    InputError
        Unknown parameter, coverage outside (0, 1), or a fit without its problem.

    Notes
    -----
    On each side the value is moved in steps of ``std_error`` (doubling) until
    the profile rises above the threshold, then the crossing is found by
    Brent's method; each evaluation is one constrained ``least_squares`` fit
    warm-started from the previous one. For a model linear in its parameters
    the interval equals ``theta +/- z * std_error``; for a nonlinear model it is
    asymmetric where the model curves.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> t = np.linspace(0.0, 1.0, 8); y = 1.0 + 2.0 * t + 0.1 * np.sin(7 * t)
    >>> fit = whiten.calibrate(lambda th: th[0] + th[1] * t, [0.0, 0.0], y, np.eye(8) * 0.01)
    >>> iv = whiten.profile_interval(fit, 1)
    >>> bool(iv.lower < fit.theta[1] < iv.upper)
    True
    """
    from scipy import stats
    from scipy.optimize import brentq

    if not isinstance(fit, CalibrationFit) or fit._problem is None:
        raise InputError("fit: expected the result of whiten.calibrate(...)")
    if not (isinstance(coverage, (int, float)) and 0 < coverage < 1):
        raise InputError(f"coverage: expected a number between 0 and 1, got {coverage!r}")
    k = fit.theta.shape[0]
    if isinstance(param, str):
        if param not in fit.names:
            raise InputError(f"param: unknown parameter {param!r}; choose from {fit.names}")
        j = fit.names.index(param)
    else:
        j = int(param)
        if not -k <= j < k:
            raise InputError(f"param: index {j} out of range for {k} parameters")
        j %= k
    prob: Problem = fit._problem
    thr = float(stats.chi2.ppf(coverage, 1)) * prob.rescale_factor
    n = prob.y.shape[0]
    state = {"theta": fit.theta.copy(), "fits": 0}

    def rise(v: float) -> float:
        if k == 1:
            th = np.array([v])
            z = white(prob.factor, predict(prob.model, th, n) - prob.y)
            c = float(z @ z)
        else:
            th, c, _ = solve(prob, state["theta"], fixed={j: v})
            state["theta"] = th
        state["fits"] += 1
        return c - prob.chi2 - thr

    est = float(fit.theta[j])
    se_j = float(fit.std_error[j])
    step = se_j if np.isfinite(se_j) and se_j > 0 else (abs(est) * 0.1 or 0.1)
    ends = []
    for sign, bound in ((-1.0, prob.lower[j]), (1.0, prob.upper[j])):
        state["theta"] = fit.theta.copy()
        inner, h = est, 1.0
        end = sign * math.inf
        for _ in range(max_steps):
            v = est + sign * step * h
            hit_bound = (sign < 0 and v <= bound) or (sign > 0 and v >= bound)
            if hit_bound:
                v = float(bound)
            if rise(v) > 0:
                lo, hi = (v, inner) if sign < 0 else (inner, v)
                end = brentq(rise, lo, hi, xtol=1e-12 * max(1.0, abs(est)) + 1e-14 * step, rtol=1e-12)
                break
            if hit_bound:
                break
            inner, h = v, h * 2.0
        ends.append(float(end))
    return ProfileInterval(fit.names[j], est, ends[0], ends[1], float(coverage), thr, int(state["fits"]))
