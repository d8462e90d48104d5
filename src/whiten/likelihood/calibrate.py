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
from collections.abc import Callable
from typing import Any

import numpy as np

from .._numerics import EPS, digits_lost
from .._settings import current
from .._validate import as_float_array
from .._warn import warn
from ..errors import ConditioningWarning, InputError, RankDeficiencyWarning
from ..linalg.qr import pivoted_qr_r, tri_solve
from .loglik import as_covariance
from .problem import Problem, central_jac, check_settings, predict, solve, whitened_jac
from .results import CalibrationFit, JacobianHealth

__all__ = ["calibrate"]


def _stderr_error(r: np.ndarray, jw: np.ndarray, factor: Any, perm) -> float:
    """Relative error of the computed standard errors (max over parameters) for the Jacobian as evaluated.

    Same estimate as ``FitHealth.digits_std_error`` (docs/numerics.rst): the QR's backward error moves
    ``C_kk = (R^-1 R^-T)_kk`` by about ``|dR| |C e_k|_1 / sqrt(C_kk)`` (unit columns). The factor and the
    whitening ``L^-1 J`` are exact for some ``S + dS``, and then ``C_kk`` moves like a Gaussian quadratic
    form with ``z_k = L^-T J_w C e_k`` (the estimate of ``whiten.likelihood.accuracy``, part B).
    """
    from ..linalg.sensitivity import chi2_sums

    k = r.shape[1]
    d = np.sqrt(np.einsum("ij,ij->j", r, r))
    if not np.all(d > 0):
        return math.inf
    u = tri_solve(r / d[None, :], np.eye(k), trans=True)  # inverse-ok: bounds the reported digits only
    c = u.T @ u
    ckk = np.diag(c)
    c_rel = 0.5 * EPS * np.sum(np.abs(c), axis=0) / np.sqrt(ckk)
    if hasattr(factor, "solve_lower") and not (hasattr(factor, "variances") and factor.dim == 0):
        try:
            z = factor.solve_lower((jw[:, perm] / d[None, :]) @ c, trans=True)
            root = math.sqrt(factor.dim)
            c_rel = c_rel + (chi2_sums(factor, z.T, "factor") / root + root * ckk) * EPS / ckk
        except (AttributeError, TypeError, ValueError):
            c_rel = c_rel + EPS / max(factor.health.rcond_scaled, 1e-300)
    else:
        c_rel = c_rel + EPS / max(factor.health.rcond_scaled, 1e-300)
    return float(np.max(0.5 * c_rel)) + 2 * EPS

_LOG_2PI = math.log(2.0 * math.pi)


def calibrate(model: Callable, theta0: Any, y: Any, cov: Any, *, names: Any = None,
              jacobian: Callable | None = None, bounds: Any = None, rescale: bool = False,
              tolerance: float = 1e-12, max_evals: int | None = None,
              optimizer_settings: dict | None = None) -> CalibrationFit:
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
    names : list of str, optional
        Parameter names (default ``theta[0]``, ``theta[1]``, ...).
    jacobian : callable, optional
        ``theta -> (n, K)`` Jacobian of the predictions. Default: central
        finite differences for the reported covariance (the optimizer uses its
        own forward differences while it searches).
    bounds : (lower, upper), optional
        Each a number or K numbers; ``-inf``/``inf`` leave a side open.
    rescale : bool
        Multiply ``theta_cov`` by the reduced chi-square (default False: the
        stated covariance is taken at its word).
    tolerance : float
        Relative stopping tolerance of the search (default 1e-12; used for
        scipy's ``ftol``, ``xtol`` and ``gtol`` alike).
    max_evals : int, optional
        Most model evaluations the search may spend (scipy's ``max_nfev``).
    optimizer_settings : dict, optional
        Handed unchanged to ``scipy.optimize.least_squares``; whiten accepts the
        keys ``"method"`` (``"trf"``, the default, ``"dogbox"`` or ``"lm"``,
        scipy's own codes) and ``"x_scale"`` (a number, K numbers or ``"jac"``)
        and sets every other argument itself. See scipy's documentation for
        what they do.

    Returns
    -------
    CalibrationFit

    Raises
    ------
    InputError
        An unknown ``optimizer_settings`` key, shapes that disagree, a model or Jacobian that returns
        the wrong shape or non-finite values, fewer observations than parameters.
    NotPositiveDefiniteError
        ``cov`` cannot be factored.

    Warns
    -----
    RankDeficiencyWarning
        The whitened Jacobian is rank deficient (names the parameters).
    ConditioningWarning
        Its condition number loses more than ``whiten.current_settings().digits_warn`` digits.

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

    opts = check_settings(jacobian, rescale, tolerance, optimizer_settings)
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
    names = [str(s) for s in names] if names is not None else [f"theta[{i}]" for i in range(k)]
    if len(names) != k:
        raise InputError(f"names: expected {k} parameter names, got {len(names)}")
    lower = np.full(k, -np.inf)
    upper = np.full(k, np.inf)
    if bounds is not None:
        try:
            lo, hi = bounds
            lower = np.broadcast_to(np.asarray(lo, dtype=float), (k,)).copy()
            upper = np.broadcast_to(np.asarray(hi, dtype=float), (k,)).copy()
        except (TypeError, ValueError):
            raise InputError(f"bounds: expected (lower, upper), each a number or {k} numbers") from None
        if np.any(lower >= upper):
            i = int(np.flatnonzero(lower >= upper)[0])
            raise InputError(f"bounds: lower bound of {names[i]} ({lower[i]}) is not below its upper bound "
                             f"({upper[i]})")
        if opts["method"] == "lm":
            raise InputError("bounds: the optimizer method 'lm' does not take bounds; use 'trf' or 'dogbox'")
    x_scale = opts["x_scale"]
    if not isinstance(x_scale, str):
        x_scale = np.broadcast_to(np.asarray(x_scale, dtype=float), (k,)).copy()
    prob = Problem(model, yy.copy(), factor, jacobian, lower, upper, opts["method"], float(tolerance),
                   max_evals, x_scale, 0.0, 1.0)
    predict(model, th0, n)  # fail early, with the message naming theta0
    theta, chi2, res = solve(prob, th0)

    jw = whitened_jac(prob, theta, n, k, None) if prob.jac is not None else central_jac(prob, theta, n)
    r, perm = pivoted_qr_r(jw)
    rd = np.abs(np.diag(r))
    tol_rank = max(n, k) * EPS * (rd[0] if rd.size else 0.0)
    rank = int(np.sum(rd > tol_rank))
    unidentified = tuple(names[perm[i]] for i in range(rank, k))
    sv = np.linalg.svd(r, compute_uv=False)
    cond = float(sv[0] / sv[-1]) if sv[-1] > 0 else math.inf
    digits = digits_lost(cond)
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
    rescaled = bool(rescale)
    if rescaled:
        if dof <= 0:
            raise InputError("rescale: needs more observations than parameters (dof = 0)")
        theta_cov = theta_cov * red
    prob = dataclasses.replace(prob, chi2=chi2, rescale_factor=red if rescaled else 1.0)
    std_error = np.sqrt(np.diag(theta_cov))
    p_value = float(stats.chi2.sf(chi2, dof)) if dof > 0 else math.nan
    loglik = -0.5 * (n * _LOG_2PI + factor.logdet() + chi2)
    se_digits = math.nan   # not stated when rank deficient, nor with rescale=True (not calibrated)
    if rank == k and not rescaled:
        se_err = _stderr_error(r, jw, factor, perm)
        se_digits = float(min(-math.log10(EPS), max(0.0, -math.log10(se_err))))
    health = JacobianHealth(cond, digits, rank, unidentified, factor.health,
                            "analytic" if jacobian is not None else "finite-difference", se_digits)
    residuals = yy - predict(model, theta, n)
    for a in (theta, theta_cov, std_error, residuals):
        a.setflags(write=False)
    return CalibrationFit(theta, theta_cov, std_error, chi2, dof, p_value, red, loglik, rescaled, names, residuals,
                          bool(res.success), str(res.message), int(res.nfev), health, prob)
