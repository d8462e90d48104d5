"""Gaussian log-likelihood of residuals, through a factor, in log space.

``gaussian_loglik(resid, cov)`` accepts one covariance (a matrix, a
:class:`~whiten.Factor` or a structured covariance) for any number of residual
rows, or a stack of covariances ``(..., n, n)`` with residuals ``(..., n)``
that broadcast against it.

Caching a factor
----------------
A matrix passed as ``cov`` is factored on every call. When the covariance does
not change between calls (the usual case inside an optimizer that moves only
the mean), factor it once and pass the factor::

    f = whiten.cholesky(sigma)            # or whiten.low_rank_plus_diagonal(U, d), ...
    for theta in candidates:
        ll = whiten.gaussian_loglik(y - model(theta), f)   # O(n^2) per call, no refactoring

Factors and structured covariances are immutable, so sharing one between
threads or calls is safe.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from .._records import fields_to_dict
from .._settings import current
from .._validate import as_float_array, as_rows
from ..errors import InputError, NotPositiveDefiniteError
from ..linalg.cholesky import cholesky
from ..linalg.factor import Factor, FactorHealth
from ..linalg.structured import StructuredCovariance
from ..linalg.triangular import stack_solve_lower
from .accuracy import LikelihoodDigits, likelihood_digits, stack_digits

__all__ = ["gaussian_loglik", "LikelihoodSummary", "as_covariance"]

_LOG_2PI = math.log(2.0 * math.pi)


@dataclasses.dataclass(frozen=True)
class LikelihoodSummary:
    """What :func:`gaussian_loglik` reports with ``return_details=True``.

    Scalars for one residual vector; arrays of the batch shape otherwise.

    Attributes
    ----------
    loglik : float or ndarray
        ``-(n log 2 pi + log det S + chi2) / 2``.
    chi2 : float or ndarray
        The quadratic form ``r^T S^{-1} r`` (squared Mahalanobis length).
    dof : int
        Degrees of freedom of chi2 under the model: the dimension n.
    p_value : float or ndarray
        ``P(X >= chi2)`` for X chi-square with ``dof`` degrees of freedom
        (``scipy.stats.chi2.sf``); may underflow to 0 for very large chi2.
    log_p_value : float or ndarray
        Its natural logarithm (``scipy.stats.chi2.logsf``), which does not underflow.
    logdet : float or ndarray
        ``log det S``.
    health : FactorHealth or None
        Of the covariance factor; None for a stack of covariances (each matrix
        factored by ``numpy.linalg.cholesky`` without a condition estimate).
    digits : LikelihoodDigits or None
        The two digits statements of ``logdet``, ``chi2`` and ``loglik``:
        ``trusted_*`` (sensitivity to the data: digits that survive a change of
        one unit in the last digit of every input) and ``solved_*`` (accuracy of
        the computation for the data as given). None for a stack of more than
        256 covariances.
    """

    loglik: Any
    chi2: Any
    dof: int
    p_value: Any
    log_p_value: Any
    logdet: Any
    health: FactorHealth | None = None
    digits: LikelihoodDigits | None = None

    def to_dict(self) -> dict:
        return fields_to_dict(self)

    def to_frame(self):
        """One row per residual vector: loglik, chi2, dof, p_value, log_p_value, logdet."""
        import pandas as pd

        cols = ["loglik", "chi2", "p_value", "log_p_value", "logdet"]
        data = {c: np.ravel(np.asarray(getattr(self, c), dtype=float)) for c in cols}
        size = max(len(v) for v in data.values())
        data = {c: np.broadcast_to(v, (size,)) for c, v in data.items()}
        frame = pd.DataFrame(data)
        frame.insert(2, "dof", self.dof)
        return frame


def as_covariance(cov: Any):
    """A Factor or structured covariance for ``cov`` (matrices are factored with :func:`whiten.cholesky`)."""
    if isinstance(cov, (Factor, StructuredCovariance)):
        return cov
    return cholesky(cov)


def _finish(chi2, logdet, n, health, one, details=True, digits=None):
    from scipy import stats

    chi2 = np.asarray(chi2, dtype=float)
    logdet = np.asarray(logdet, dtype=float)
    ll = -0.5 * (n * _LOG_2PI + logdet + chi2)
    if not details:  # the p-values cost more than the quadratic form for one short vector
        return (float(ll.reshape(-1)[0]) if one else ll), None
    p = stats.chi2.sf(chi2, n)
    lp = stats.chi2.logsf(chi2, n)
    if one:
        ll, chi2, p, lp, logdet = (float(np.asarray(v).reshape(-1)[0]) for v in (ll, chi2, p, lp, logdet))
    else:
        logdet = np.broadcast_to(logdet, chi2.shape).copy()
    return ll, LikelihoodSummary(ll, chi2, int(n), p, lp, logdet, health, digits)


def _first_failing(a: np.ndarray) -> tuple[tuple[int, ...], int | None]:
    """Index of the first matrix in a stack that does not factor (error path only)."""
    for idx in np.ndindex(a.shape[:-2]):
        try:
            np.linalg.cholesky(a[idx])
        except np.linalg.LinAlgError:
            d = np.diag(a[idx])
            neg = np.flatnonzero(d <= 0)
            return idx, (int(neg[0]) if neg.size else None)
    return (), None  # pragma: no cover - only reached when the stack factored


def _batched(resid: Any, cov: np.ndarray, mean: Any, return_details: bool):
    a = cov
    n = a.shape[-1]
    if a.shape[-2] != n or n == 0:
        raise InputError(f"cov: a stack of covariances must have shape (..., n, n) with n >= 1, got {a.shape}")
    if not np.isfinite(a).all():
        idx = tuple(int(i) for i in np.argwhere(~np.isfinite(a))[0])
        raise InputError(f"cov: entry {idx} is {a[idx]}; covariances must be finite")
    r = np.asarray(resid, dtype=np.float64)
    if r.ndim == 0 or r.shape[-1] != n:
        raise InputError(
            f"resid: last axis must have length {n} to match cov of shape {a.shape}, got shape {r.shape}")
    if mean is not None:
        m = np.asarray(mean, dtype=np.float64)
        if m.ndim == 0 or m.shape[-1] != n:
            raise InputError(f"mean: last axis must have length {n}, got shape {m.shape}")
        r = r - m
    if not np.isfinite(r).all():
        idx = tuple(int(i) for i in np.argwhere(~np.isfinite(r))[0])
        raise InputError(f"resid: entry {idx} is {r[idx]}; residuals must be finite")
    try:
        batch = np.broadcast_shapes(r.shape[:-1], a.shape[:-2])
    except ValueError:
        raise InputError(
            f"resid batch shape {r.shape[:-1]} does not broadcast against cov batch shape {a.shape[:-2]} "
            f"(resid {r.shape}, cov {a.shape}); give resid shape (..., {n}) matching cov (..., {n}, {n})"
        ) from None
    scale = np.max(np.abs(a), axis=(-2, -1))
    asym = np.max(np.abs(a - np.swapaxes(a, -1, -2)), axis=(-2, -1))
    bad = asym > current().symmetry_rtol * np.where(scale > 0, scale, 1.0)
    if bad.any():
        idx = tuple(int(i) for i in np.argwhere(bad)[0])
        raise InputError(f"cov[{idx}]: is not symmetric (largest asymmetry {asym[idx]:.3g}); "
                         "symmetrize with (a + a.swapaxes(-1, -2)) / 2 if the difference is rounding")
    try:
        lower = np.linalg.cholesky(a)
    except np.linalg.LinAlgError:
        idx, neg = _first_failing(a)
        extra = f" (diagonal entry {neg} is not positive)" if neg is not None else ""
        raise NotPositiveDefiniteError(
            f"cov[{idx}]: is not positive definite{extra}; factor it with whiten.cholesky(cov[{idx}]) "
            "to see why, or repair it before stacking", pivot=neg) from None
    z = stack_solve_lower(lower, r)
    chi2 = np.einsum("...i,...i->...", z, z)
    logdet = 2.0 * np.sum(np.log(np.diagonal(lower, axis1=-2, axis2=-1)), axis=-1)
    chi2 = np.broadcast_to(chi2, batch)
    logdet = np.broadcast_to(logdet, batch)
    digits = stack_digits(a, r, chi2, logdet, batch) if return_details else None
    ll, details = _finish(chi2, logdet, n, None, one=False, details=return_details, digits=digits)
    return details if return_details else ll


def gaussian_loglik(resid: Any, cov: Any, *, mean: Any = None, return_details: bool = False):
    """Log-likelihood of Gaussian residuals, ``log N(resid; mean, cov)``.

    Parameters
    ----------
    resid : array_like or DataFrame, shape (n,), (N, n) or (..., n)
        Residuals (observed minus predicted). A DataFrame's columns are matched
        to the covariance's columns when it has them.
    cov : array_like (n, n), Factor, structured covariance, or array_like (..., n, n)
        A 2-D matrix is factored with :func:`whiten.cholesky` (disclosed jitter
        as usual); a Factor or structured covariance (:func:`whiten.diagonal`,
        :func:`whiten.low_rank_plus_diagonal`, :func:`whiten.block_diagonal`,
        :func:`whiten.kronecker`) is used as it is. An array with more than two
        axes is a stack of covariances; its batch shape broadcasts against
        ``resid.shape[:-1]``.
    mean : array_like, shape (n,), optional
        Subtracted from ``resid`` first (so raw observations can be passed).
        With a stack of covariances it may have shape (..., n) and broadcasts.
    return_details : bool
        Return a :class:`LikelihoodSummary` instead of the log-likelihood.

    Returns
    -------
    float, ndarray, pandas.Series or LikelihoodSummary
        A float for one residual vector; an array of the batch shape otherwise
        (a Series with the DataFrame's index for DataFrame input).

    Raises
    ------
    InputError
        Shapes that do not match or broadcast (the message gives both shapes),
        non-finite values, a non-symmetric matrix.
    NotPositiveDefiniteError
        The covariance (or, for a stack, the named matrix in it) cannot be factored.

    Notes
    -----
    ``loglik = -(n log 2 pi + log det S + r^T S^{-1} r) / 2`` with
    ``log det S = 2 sum log diag L`` and ``r^T S^{-1} r = ||L^{-1} r||^2``: no
    determinant, inverse or exponential is formed, so n in the thousands and
    variances of 1e-30 stay finite. Cost for one covariance: n^3/3 to factor
    (skipped for a Factor), then n^2 per residual row. For a stack, one
    ``numpy.linalg.cholesky`` and one broadcast triangular solve over the whole
    stack (no Python loop per matrix).

    To reuse a factor across calls (the covariance fixed, the residuals
    changing, as inside an optimizer), build it once and pass it; nothing is
    refactored::

        f = whiten.cholesky(sigma)        # or a structured covariance
        lls = [whiten.gaussian_loglik(y - model(th), f) for th in thetas]

    Examples
    --------
    >>> import numpy as np, whiten
    >>> from scipy import stats
    >>> s = np.array([[2.0, 0.3], [0.3, 1.0]]); r = np.array([0.5, -1.0])
    >>> bool(np.isclose(whiten.gaussian_loglik(r, s), stats.multivariate_normal(np.zeros(2), s).logpdf(r)))
    True
    """
    if not isinstance(return_details, bool):
        raise InputError(f"return_details: expected True or False, got {return_details!r}")
    if not isinstance(cov, (Factor, StructuredCovariance)) and not hasattr(cov, "columns"):
        arr = np.asarray(cov)
        if arr.dtype.kind not in "biuf":
            raise InputError(f"cov: expected a numeric matrix, a Factor or a structured covariance, got "
                             f"{type(cov).__name__}")
        if arr.ndim > 2:
            return _batched(resid, np.asarray(arr, dtype=np.float64), mean, return_details)
        if arr.ndim < 2:
            raise InputError(f"cov: expected an (n, n) matrix, got shape {arr.shape}; "
                             "for independent errors use whiten.diagonal(variances)")
    f = as_covariance(cov)
    n = f.dim
    index = None
    if hasattr(resid, "columns"):
        rows, _, index = as_rows(resid, n, names=f.columns, name="resid")
        one, batch = False, (rows.shape[0],)
    else:
        r, _, _ = as_float_array(resid, name="resid", ndim=tuple(range(1, 33)))
        if r.shape[-1] != n:
            raise InputError(f"resid: last axis has length {r.shape[-1]} but cov is {n} x {n} "
                             f"(resid shape {r.shape}); pass residuals of shape (n,) or (N, n)")
        one = r.ndim == 1
        batch = r.shape[:-1]
        rows = r.reshape(-1, n)
    shift = None
    if mean is not None:
        m, _, _ = as_float_array(mean, name="mean", ndim=(1,))
        if m.shape != (n,):
            raise InputError(f"mean: expected shape ({n},), got {m.shape}")
        shift = m
    if one and isinstance(f, Factor):
        # one vector (the optimizer's inner loop): a single triangular solve
        # (dtrsv-sized) costs a third of the blocked many-row path
        z = f.solve_lower(rows[0] if shift is None else rows[0] - shift)
        chi2 = np.asarray(float(z @ z))
    else:
        chi2 = np.asarray(f.quad(rows, shift=shift)).reshape(batch)
    # the health (and its unscaled condition estimate) is made only for the details
    digits = None
    if return_details:
        shifted = rows if shift is None else rows - shift
        digits = likelihood_digits(f, shifted, chi2, f.logdet(), one, batch)
    ll, details = _finish(chi2, f.logdet(), n, f.health if return_details else None, one,
                          details=return_details, digits=digits)
    if return_details:
        return details
    if index is not None:
        import pandas as pd

        return pd.Series(ll, index=index, name="loglik")
    return ll
