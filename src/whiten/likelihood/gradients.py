"""Exact gradients of the Gaussian log-likelihood, by solves with the covariance factor.

Hand these to ``scipy.optimize`` (``jac=``) instead of finite differences.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validate import as_float_array
from ..errors import InputError
from .loglik import as_covariance

__all__ = ["loglik_grad_mean", "loglik_grad_cov"]


def _resid_rows(resid: Any, n: int) -> np.ndarray:
    r, _, _ = as_float_array(resid, name="resid", ndim=(1, 2))
    if r.shape[-1] != n:
        raise InputError(f"resid: last axis has length {r.shape[-1]} but cov is {n} x {n}")
    return r.reshape(-1, n)


def loglik_grad_mean(resid: Any, cov: Any, jac: Any) -> np.ndarray:
    """Gradient of the log-likelihood with respect to parameters of the predictions.

    With residuals ``r = y - f(theta)`` and ``J = df/dtheta``,
    ``d loglik / dtheta = J^T S^{-1} r`` (for rows sharing one prediction, the
    sum over rows: ``J^T S^{-1} sum_i r_i``).

    Parameters
    ----------
    resid : array_like, shape (n,) or (N, n)
        Observed minus predicted.
    cov : array_like (n, n), Factor or structured covariance
        Pass a Factor to avoid refactoring on every call.
    jac : array_like, shape (n, K)
        Jacobian of the *predictions* (not of the residuals); a 1-D array is K = 1.

    Returns
    -------
    grad : ndarray, shape (K,)

    Raises
    ------
    InputError
        Shapes disagree or values are not finite.

    Notes
    -----
    One solve ``S w = sum_i r_i`` with the factor (O(n^2) for a Factor, O(nk)
    for a low-rank-plus-diagonal), then ``J^T w``: O(nK).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> g = whiten.loglik_grad_mean([1.0, 0.0], np.diag([2.0, 1.0]), np.eye(2))
    >>> bool(np.allclose(g, [0.5, 0.0]))
    True
    """
    f = as_covariance(cov)
    n = f.dim
    rows = _resid_rows(resid, n)
    j, _, _ = as_float_array(jac, name="jac", ndim=(1, 2))
    if j.ndim == 1:
        j = j[:, None]
    if j.shape[0] != n:
        raise InputError(f"jac: expected shape ({n}, K) (one row per measurement), got {np.shape(jac)}")
    w = f.solve(rows.sum(axis=0))
    return j.T @ w


def loglik_grad_cov(resid: Any, cov: Any, dcov: Any) -> np.ndarray | float:
    """Gradient of the log-likelihood with respect to parameters of the covariance.

    ``d loglik / dtheta_k = -N/2 tr(S^{-1} dS_k) + 1/2 sum_i r_i^T S^{-1} dS_k S^{-1} r_i``
    over the N residual rows.

    Parameters
    ----------
    resid : array_like, shape (n,) or (N, n)
    cov : array_like (n, n), Factor or structured covariance
        The covariance S at the current parameters.
    dcov : array_like, shape (n, n) or (K, n, n)
        ``dS / dtheta_k`` (symmetric), one matrix per parameter.

    Returns
    -------
    grad : float (for a single (n, n) dcov) or ndarray, shape (K,)

    Raises
    ------
    InputError
        Shapes disagree or values are not finite.

    Notes
    -----
    Both terms come from solves with the factor, never from an inverse:
    ``tr(S^{-1} dS_k)`` is the trace of the solution X of ``S X = dS_k`` (all K
    right-hand sides in one call), and ``w_i = S^{-1} r_i`` gives the second term
    as ``w_i^T dS_k w_i``. Cost: O(K n^3) for a Factor (the n-column solve),
    O(K n^2) more for the quadratic terms. See e.g. Rasmussen & Williams (2006),
    *Gaussian Processes for Machine Learning*, eq. 5.9, for the formula.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> # S = s * I in 3-D, r = 0: d/ds loglik = -3 / (2 s)
    >>> g = whiten.loglik_grad_cov(np.zeros(3), 2.0 * np.eye(3), np.eye(3))
    >>> bool(np.isclose(g, -0.75))
    True
    """
    f = as_covariance(cov)
    n = f.dim
    rows = _resid_rows(resid, n)
    d, _, _ = as_float_array(dcov, name="dcov", ndim=(2, 3))
    single = d.ndim == 2
    if single:
        d = d[None]
    if d.shape[1:] != (n, n):
        raise InputError(f"dcov: expected shape ({n}, {n}) or (K, {n}, {n}), got {d.shape}")
    k = d.shape[0]
    # All K right-hand sides at once: columns of [dS_1 | dS_2 | ...].
    x = f.solve(np.ascontiguousarray(d.transpose(1, 0, 2)).reshape(n, k * n)).reshape(n, k, n)
    traces = np.einsum("iki->k", x)
    w = f.solve(rows.T)  # (n, N)
    quads = np.einsum("an,kab,bn->k", w, d, w, optimize=True)
    g = -0.5 * rows.shape[0] * traces + 0.5 * quads
    return float(g[0]) if single else g
