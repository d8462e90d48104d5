"""Calibration: Gaussian (generalized) nonlinear least squares with a known error covariance.

The residuals ``y - model(theta)`` are whitened with the covariance factor,
``z = W (y - model(theta))`` with ``W^T W = S^{-1}``, and
``scipy.optimize.least_squares`` minimizes ``||z||^2 = chi2``. The parameter
covariance comes from the QR factorization of the whitened Jacobian at the
solution (never from the normal equations, which would square its condition
number).
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any, Callable

import numpy as np

from .._settings import current
from .._validate import as_float_array
from .._warn import warn
from .._records import fields_to_dict
from ..errors import ConditioningWarning, InputError, RankDeficiencyWarning
from ..linalg.factor import Factor, FactorHealth
from ..linalg.qr import pivoted_qr_r, tri_solve
from .loglik import as_covariance

__all__ = ["calibrate", "CalibrationFit", "JacobianHealth", "profile_interval", "ProfileInterval"]

_LOG_2PI = math.log(2.0 * math.pi)
_EPS = float(np.finfo(np.float64).eps)

_OPTIONS = {
    "jac": None,            # callable theta -> (n, K) Jacobian of the predictions; None: finite differences
    "bounds": None,         # (lower, upper) arrays or scalars, as scipy.optimize.least_squares
    "rescale": False,       # multiply theta_cov by the reduced chi-square
    "names": None,          # parameter names
    "method": "trf",        # least_squares method: "trf", "dogbox" or "lm"
    "tol": 1e-12,           # ftol = xtol = gtol
    "max_evals": None,      # least_squares max_nfev
    "x_scale": 1.0,         # least_squares x_scale (e.g. "jac")
}


@dataclasses.dataclass(frozen=True)
class JacobianHealth:
    """Numerical health of a calibration.

    Attributes
    ----------
    cond : float
        2-norm condition number of the whitened Jacobian at the solution
        (ratio of the extreme singular values of its R factor).
    digits_lost : float
        ``log10(cond)``: decimal digits the parameter covariance may lose.
    rank : int
        Numerical rank of the whitened Jacobian (pivoted QR, tolerance
        ``max(n, K) * eps * |R_00|``).
    unidentified : tuple of str
        Parameters the pivoted QR put beyond the rank (not determined by the data).
    covariance : FactorHealth
        Health of the error covariance factor.
    jacobian : str
        ``"analytic"`` or ``"finite-difference"`` (central differences at the
        solution for ``theta_cov``).
    """

    cond: float
    digits_lost: float
    rank: int
    unidentified: tuple
    covariance: FactorHealth
    jacobian: str

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["covariance"] = self.covariance.to_dict()
        d["unidentified"] = list(self.unidentified)
        return d


@dataclasses.dataclass(frozen=True)
class CalibrationFit:
    """Result of :func:`calibrate`.

    Attributes
    ----------
    theta : ndarray, shape (K,)
    theta_cov : ndarray, shape (K, K)
        ``(J_w^T J_w)^{-1}`` for the stated error covariance (times
        ``reduced_chi2`` when ``rescaled``), built as ``R^{-1} R^{-T}`` from the
        QR of the whitened Jacobian ``J_w``. A reported quantity.
    stderr : ndarray, shape (K,)
        Square roots of the diagonal of ``theta_cov``.
    chi2 : float
        Whitened sum of squares ``||W (y - model(theta))||^2`` at the solution.
    dof : int
        n - K.
    p_value : float
        ``P(X >= chi2)``, X chi-square with ``dof`` degrees of freedom.
    reduced_chi2 : float
        chi2 / dof (NaN when dof = 0). Near 1 when the stated covariance fits.
    loglik : float
        Gaussian log-likelihood at the solution.
    rescaled : bool
        Whether ``theta_cov`` was multiplied by ``reduced_chi2``.
    names : list of str
    residuals : ndarray, shape (n,)
        ``y - model(theta)`` (not whitened).
    converged : bool
    message : str
    n_evals : int
        Model evaluations by the optimizer.
    health : JacobianHealth
    """

    theta: np.ndarray
    theta_cov: np.ndarray
    stderr: np.ndarray
    chi2: float
    dof: int
    p_value: float
    reduced_chi2: float
    loglik: float
    rescaled: bool
    names: list
    residuals: np.ndarray
    converged: bool
    message: str
    n_evals: int
    health: JacobianHealth
    _problem: Any = dataclasses.field(default=None, repr=False, compare=False)

    def to_dict(self) -> dict:
        return fields_to_dict(self)

    def to_frame(self):
        """One row per parameter: estimate, std_error, rel_std_error."""
        import pandas as pd

        with np.errstate(divide="ignore", invalid="ignore"):
            rel = self.stderr / np.abs(self.theta)
        return pd.DataFrame({"estimate": self.theta, "std_error": self.stderr, "rel_std_error": rel},
                            index=pd.Index(self.names, name="parameter"))


@dataclasses.dataclass(frozen=True)
class ProfileInterval:
    """Profile-likelihood interval for one parameter (see :func:`profile_interval`).

    Attributes
    ----------
    name : str
    estimate : float
    lower, upper : float
        Ends of the interval; ``-inf``/``inf`` when the profile did not rise
        above the threshold within the search (or a bound was reached first).
    level : float
    threshold : float
        Rise of the profile chi-square that defines the interval.
    n_fits : int
        Constrained fits run.
    """

    name: str
    estimate: float
    lower: float
    upper: float
    level: float
    threshold: float
    n_fits: int

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)


@dataclasses.dataclass(frozen=True)
class _Problem:
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


def _check_options(options: dict) -> dict:
    unknown = sorted(set(options) - set(_OPTIONS))
    if unknown:
        raise InputError(f"calibrate: unknown option(s) {unknown}; choose from {sorted(_OPTIONS)}")
    opts = dict(_OPTIONS)
    opts.update(options)
    if opts["method"] not in ("trf", "dogbox", "lm"):
        raise InputError(f"method: expected 'trf', 'dogbox' or 'lm', got {opts['method']!r}")
    if not isinstance(opts["rescale"], bool):
        raise InputError(f"rescale: expected True or False, got {opts['rescale']!r}")
    if not (isinstance(opts["tol"], (int, float)) and 0 < opts["tol"] < 1):
        raise InputError(f"tol: expected a number between 0 and 1, got {opts['tol']!r}")
    if opts["jac"] is not None and not callable(opts["jac"]):
        raise InputError("jac: expected a callable theta -> (n, K) Jacobian of the predictions, or None")
    return opts


def _predict(model: Callable, theta: np.ndarray, n: int) -> np.ndarray:
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


def _white(factor: Any, v: np.ndarray) -> np.ndarray:
    """W v for one vector: for a Factor one triangular solve ``L^{-1} v`` (cheaper than the row path)."""
    if isinstance(factor, Factor):
        return factor.solve_lower(v)
    return factor.whiten(v)


def _whitened_jac(prob: _Problem, theta: np.ndarray, n: int, k: int, fallback: np.ndarray) -> np.ndarray:
    if prob.jac is None:
        return fallback
    j = np.asarray(prob.jac(theta.copy()), dtype=np.float64)
    if j.ndim == 1 and k == 1:
        j = j[:, None]
    if j.shape != (n, k):
        raise InputError(f"jac(theta) returned shape {j.shape}; expected ({n}, {k})")
    if not np.isfinite(j).all():
        raise InputError(f"jac(theta) returned non-finite values at theta={theta.tolist()}")
    # residual z = W (model - y): its Jacobian is W J, whitening J's columns
    return prob.factor.whiten(j.T).T


def _central_jac(prob: _Problem, theta: np.ndarray, n: int) -> np.ndarray:
    """Whitened Jacobian by central differences (error O(h^2), h ~ eps^(1/3)).

    The optimizer's own forward-difference Jacobian is good to about half the
    digits (sqrt(eps)); theta_cov is reported, so it gets the better one. Near
    a bound the step turns one-sided, inside the bounds.
    """
    k = theta.shape[0]
    out = np.empty((n, k))
    for i in range(k):
        h = _EPS ** (1.0 / 3.0) * max(1.0, abs(theta[i]))
        up, dn = theta.copy(), theta.copy()
        up[i] = min(theta[i] + h, prob.upper[i])
        dn[i] = max(theta[i] - h, prob.lower[i])
        out[:, i] = (_predict(prob.model, up, n) - _predict(prob.model, dn, n)) / (up[i] - dn[i])
    return prob.factor.whiten(out.T).T


def _solve(prob: _Problem, theta0: np.ndarray, fixed: dict | None = None):
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
        return _white(prob.factor, _predict(prob.model, full(t), n) - prob.y)

    jac = "2-point"
    if prob.jac is not None:
        def jac(t):
            return _whitened_jac(prob, full(t), n, k_all, None)[:, free]

    kw = dict(jac=jac, method=prob.method, ftol=prob.tol, xtol=prob.tol, gtol=prob.tol,
              x_scale=prob.x_scale if not isinstance(prob.x_scale, np.ndarray) else prob.x_scale[free])
    if prob.method != "lm":
        kw["bounds"] = (prob.lower[free], prob.upper[free])
    if prob.max_evals is not None:
        kw["max_nfev"] = int(prob.max_evals)
    start = np.clip(base[free], prob.lower[free], prob.upper[free])
    res = least_squares(fun, start, **kw)
    return full(res.x), float(res.fun @ res.fun), res


def calibrate(model: Callable, theta0: Any, y: Any, cov: Any, **options) -> CalibrationFit:
    """Fit ``y ≈ model(theta)`` for errors ``N(0, cov)``: Gaussian (generalized) nonlinear least squares.

    Parameters
    ----------
    model : callable
        ``model(theta) -> predictions`` of shape (n,).
    theta0 : array_like, shape (K,)
        Starting values.
    y : array_like, shape (n,)
        Observations.
    cov : array_like (n, n), Factor or structured covariance
        Covariance of the measurement errors (a matrix is factored once with
        :func:`whiten.cholesky`).
    **options
        ``jac`` (callable ``theta -> (n, K)`` Jacobian of the predictions;
        default finite differences), ``bounds`` ((lower, upper)), ``rescale``
        (bool, default False: multiply ``theta_cov`` by the reduced chi-square
        when the stated uncertainties look too small), ``names`` (parameter
        names), ``method`` ("trf", "dogbox", "lm"), ``tol`` (default 1e-12),
        ``max_evals``, ``x_scale``.

    Returns
    -------
    CalibrationFit

    Raises
    ------
    InputError
        Unknown option, shapes that disagree, a model or Jacobian that returns
        the wrong shape or non-finite values, fewer observations than parameters.
    NotPositiveDefiniteError
        ``cov`` cannot be factored.

    Warns
    -----
    RankDeficiencyWarning
        The whitened Jacobian is rank deficient (names the parameters).
    ConditioningWarning
        Its condition number loses more than ``whiten.get_options().digits_warn`` digits.

    Notes
    -----
    Minimizes ``chi2(theta) = ||W (y - model(theta))||^2`` with
    ``scipy.optimize.least_squares``, W the whitening of the covariance factor
    (Aitken, 1935, for the linear case). At the solution the whitened Jacobian
    is factored by column-pivoted Householder QR, ``J_w P = Q R``, and
    ``theta_cov = P R^{-1} R^{-T} P^T`` comes from a triangular solve with R:
    the condition number is that of ``J_w``, not its square. Cost per iteration:
    one model call and one whitening (n^2 for a dense factor) per residual,
    plus K more for a finite-difference Jacobian.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> t = np.linspace(0.0, 1.0, 8)
    >>> fit = whiten.calibrate(lambda th: th[0] + th[1] * t, [0.0, 0.0], 1.0 + 2.0 * t, np.eye(8) * 0.01)
    >>> bool(np.allclose(fit.theta, [1.0, 2.0]))
    True
    """
    from scipy import stats

    opts = _check_options(options)
    if not callable(model):
        raise InputError("model: expected a callable theta -> predictions")
    th0, _, _ = as_float_array(theta0, name="theta0", ndim=(1,))
    yy, _, _ = as_float_array(y, name="y", ndim=(1,))
    factor = as_covariance(cov)
    n, k = yy.shape[0], th0.shape[0]
    if factor.dim != n:
        raise InputError(f"cov is {factor.dim} x {factor.dim} but y has {n} observations")
    if k == 0:
        raise InputError("theta0: no parameters to calibrate")
    if n < k:
        raise InputError(f"y: {n} observations cannot determine {k} parameters")
    names = [str(s) for s in opts["names"]] if opts["names"] is not None else [f"theta[{i}]" for i in range(k)]
    if len(names) != k:
        raise InputError(f"names: expected {k} parameter names, got {len(names)}")
    lower = np.full(k, -np.inf)
    upper = np.full(k, np.inf)
    if opts["bounds"] is not None:
        try:
            lo, hi = opts["bounds"]
            lower = np.broadcast_to(np.asarray(lo, dtype=float), (k,)).copy()
            upper = np.broadcast_to(np.asarray(hi, dtype=float), (k,)).copy()
        except (TypeError, ValueError):
            raise InputError(f"bounds: expected (lower, upper), each a number or {k} numbers") from None
        if np.any(lower >= upper):
            i = int(np.flatnonzero(lower >= upper)[0])
            raise InputError(f"bounds: lower bound of {names[i]} ({lower[i]}) is not below its upper bound "
                             f"({upper[i]})")
        if opts["method"] == "lm":
            raise InputError("bounds: method 'lm' does not take bounds; use 'trf' or 'dogbox'")
    x_scale = opts["x_scale"]
    if not isinstance(x_scale, str):
        x_scale = np.broadcast_to(np.asarray(x_scale, dtype=float), (k,)).copy()
    prob = _Problem(model, yy.copy(), factor, opts["jac"], lower, upper, opts["method"], float(opts["tol"]),
                    opts["max_evals"], x_scale, 0.0, 1.0)
    _predict(model, th0, n)  # fail early, with the message naming theta0
    theta, chi2, res = _solve(prob, th0)

    jw = _whitened_jac(prob, theta, n, k, None) if prob.jac is not None else _central_jac(prob, theta, n)
    r, perm = pivoted_qr_r(jw)
    rd = np.abs(np.diag(r))
    tol_rank = max(n, k) * _EPS * (rd[0] if rd.size else 0.0)
    rank = int(np.sum(rd > tol_rank))
    unidentified = tuple(names[perm[i]] for i in range(rank, k))
    sv = np.linalg.svd(r, compute_uv=False)
    cond = float(sv[0] / sv[-1]) if sv[-1] > 0 else math.inf
    digits = math.inf if not np.isfinite(cond) else max(0.0, math.log10(cond))
    if rank < k:
        warn(RankDeficiencyWarning,
             f"the whitened Jacobian has rank {rank} < {k} parameters (condition {cond:.3g}); not determined "
             f"by the data: {', '.join(unidentified)}. Fix or remove those parameters, or add measurements "
             "that move them; their standard errors are not meaningful")
    elif digits > current().digits_warn:
        warn(ConditioningWarning,
             f"the whitened Jacobian is ill-conditioned (condition {cond:.3g}, about {digits:.1f} digits lost "
             f"in theta_cov; threshold {current().digits_warn:g}). Rescale or reparametrize the model")
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if rank == k:
            rinv = tri_solve(r, np.eye(k))  # inverse-ok: R^-1 R^-T is the reported parameter covariance, never applied
            cperm = rinv @ rinv.T
        else:
            cperm = np.full((k, k), np.nan)
    theta_cov = np.empty((k, k))
    theta_cov[np.ix_(perm, perm)] = cperm
    dof = n - k
    red = chi2 / dof if dof > 0 else math.nan
    rescaled = bool(opts["rescale"])
    if rescaled:
        if dof <= 0:
            raise InputError("rescale: needs more observations than parameters (dof = 0)")
        theta_cov = theta_cov * red
    prob = dataclasses.replace(prob, chi2=chi2, rescale_factor=red if rescaled else 1.0)
    stderr = np.sqrt(np.diag(theta_cov))
    p_value = float(stats.chi2.sf(chi2, dof)) if dof > 0 else math.nan
    loglik = -0.5 * (n * _LOG_2PI + factor.logdet() + chi2)
    health = JacobianHealth(cond, digits, rank, unidentified, factor.health,
                            "analytic" if opts["jac"] is not None else "finite-difference")
    residuals = yy - _predict(model, theta, n)
    for a in (theta, theta_cov, stderr, residuals):
        a.setflags(write=False)
    return CalibrationFit(theta, theta_cov, stderr, chi2, dof, p_value, red, loglik, rescaled, names, residuals,
                          bool(res.success), str(res.message), int(res.nfev), health, prob)


def profile_interval(fit: CalibrationFit, param: int | str, *, level: float = 0.95,
                     max_steps: int = 40) -> ProfileInterval:
    """Profile-likelihood interval for one parameter of a :func:`calibrate` result.

    The interval holds the values v for which, re-fitting every other
    parameter with this one fixed at v, the chi-square rises by at most
    ``chi2.ppf(level, 1)`` (times the reduced chi-square when the fit was
    ``rescale``d) above its minimum (Venzon & Moolgavkar, 1988).

    Parameters
    ----------
    fit : CalibrationFit
        Holds the model, data and covariance factor it was computed from.
    param : int or str
        Position or name of the parameter.
    level : float
        Confidence level, 0 < level < 1.
    max_steps : int
        Doublings of the search step on each side before giving up (the end
        is then reported as infinite).

    Returns
    -------
    ProfileInterval

    Raises
    ------
    InputError
        Unknown parameter, level outside (0, 1), or a fit without its problem.

    Notes
    -----
    On each side the value is moved in steps of ``stderr`` (doubling) until
    the profile rises above the threshold, then the crossing is found by
    Brent's method; each evaluation is one constrained ``least_squares`` fit
    warm-started from the previous one. For a model linear in its parameters
    the interval equals ``theta +/- z * stderr``; for a nonlinear model it is
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
    if not (isinstance(level, (int, float)) and 0 < level < 1):
        raise InputError(f"level: expected a number between 0 and 1, got {level!r}")
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
    prob: _Problem = fit._problem
    thr = float(stats.chi2.ppf(level, 1)) * prob.rescale_factor
    n = prob.y.shape[0]
    state = {"theta": fit.theta.copy(), "fits": 0}

    def rise(v: float) -> float:
        if k == 1:
            th = np.array([v])
            z = _white(prob.factor, _predict(prob.model, th, n) - prob.y)
            c = float(z @ z)
        else:
            th, c, _ = _solve(prob, state["theta"], fixed={j: v})
            state["theta"] = th
        state["fits"] += 1
        return c - prob.chi2 - thr

    est = float(fit.theta[j])
    step = float(fit.stderr[j]) if np.isfinite(fit.stderr[j]) and fit.stderr[j] > 0 else (abs(est) * 0.1 or 0.1)
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
    return ProfileInterval(fit.names[j], est, ends[0], ends[1], float(level), thr, int(state["fits"]))
