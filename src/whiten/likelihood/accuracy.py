"""The two digits statements of a Gaussian log-likelihood (definitions in ``docs/numerics.rst``).

For ``loglik = -(n log 2 pi + log det S + chi2) / 2`` with ``chi2 = r^T S^{-1} r``:

* **sensitivity to the data** (``trusted_*``): first-order worst change when
  every input (each residual, each entry of the covariance's own inputs)
  changes by one unit in its last digit. With ``v = S^{-1} r``:
  ``d log det S = tr(S^{-1} dS)`` and ``d chi2 = 2 v^T dr - v^T dS v``, so the
  bounds are ``eps sum |S^{-1}| o G`` and ``eps (2|v|^T|r| + |v|^T G |v|)``
  (``G`` from :mod:`whiten.linalg.sensitivity`; Skeel-style componentwise
  condition, Skeel 1979).
* **accuracy of the computation** (``solved_*``): the Cholesky factor is the
  exact factor of ``S + dS`` with ``|dS|`` of order ``eps |L||L|^T`` (Demmel,
  1989), the triangular solve is backward stable (Higham, 2002, §8), and the
  sums of logs and squares round once per term. The estimate takes one unit
  roundoff per entry of those backward errors, adds the rounding of the sums,
  and adds the first-order effect of any jitter.

Digits are ``-log10(error / |value|)`` capped at the 15.65 of a double.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
import weakref
from typing import Any

import numpy as np

from .._numerics import DIGITS, EPS
from .._records import fields_to_dict
from ..linalg.factor import Factor
from ..linalg.sensitivity import chi2_sums, logdet_sums

__all__ = ["LikelihoodDigits", "likelihood_digits", "digits_of"]

_LOG_2PI = math.log(2.0 * math.pi)
_SUMS: Any = weakref.WeakKeyDictionary()
#: safety factor of the computation estimate over one roundoff per backward-error entry
_C_SOLVED = 1.0


@dataclasses.dataclass(frozen=True)
class LikelihoodDigits:
    """Digits of the log-determinant, the quadratic form and the log-likelihood (both statements).

    Scalars for one residual vector, arrays of the batch shape otherwise
    (the log-determinant's are always scalars for one covariance).

    Attributes
    ----------
    trusted_logdet, trusted_chi2, trusted_loglik : float or ndarray
        Sensitivity to the data: significant digits that survive a change of
        one unit in the last digit of every input (residuals and the
        covariance's inputs), to first order.
    solved_logdet, solved_chi2, solved_loglik : float or ndarray
        Accuracy of the computation: significant digits computed right for the
        data exactly as given (factorization, solve, sums, jitter included).
    logdet_exact : bool
        Whether the log-det sensitivity sum was evaluated exactly (n <= 1500 per
        dense block) or bounded by ``n / rcond_scaled``.
    """

    trusted_logdet: Any
    trusted_chi2: Any
    trusted_loglik: Any
    solved_logdet: Any
    solved_chi2: Any
    solved_loglik: Any
    logdet_exact: bool = True

    def to_dict(self) -> dict:
        return fields_to_dict(self)


def digits_of(err: Any, value: Any) -> Any:
    """``-log10(err / |value|)`` clipped to ``[0, 15.65]`` (15.65 when ``err`` is 0)."""
    e = np.asarray(err, dtype=float)
    v = np.abs(np.asarray(value, dtype=float))
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.where(e > 0, np.log10(v) - np.log10(np.where(e > 0, e, 1.0)), DIGITS)
        d = np.where(np.isnan(d), 0.0, d)
    out = np.clip(d, 0.0, DIGITS)
    return float(out) if out.ndim == 0 else out


def _sums(cov) -> tuple[float, float]:
    try:
        hit = _SUMS.get(cov)
    except TypeError:
        hit = None
    if hit is None:
        hit = logdet_sums(cov)
        try:
            _SUMS[cov] = hit
        except TypeError:
            pass
    return hit


def _exact(cov) -> bool:
    from ..linalg.sensitivity import EXACT_MAX

    dims = []
    if isinstance(cov, Factor):
        dims = [cov.dim]
    elif hasattr(cov, "factors"):
        dims = [f.dim for f in cov.factors]
    elif hasattr(cov, "blocks"):
        dims = [b.dim for b in cov.blocks]
    return all(d <= EXACT_MAX for d in dims)


def likelihood_digits(cov, rows: np.ndarray, chi2: Any, logdet: float, one: bool,
                      batch: tuple = ()) -> LikelihoodDigits:
    """Both statements for residual rows ``(N, n)`` (already shifted) under one covariance object."""
    n = cov.dim
    v = np.atleast_2d(cov.solve(rows.T).T) if rows.shape[0] else rows
    chi2 = np.asarray(chi2, dtype=float).reshape(-1)
    q_data = chi2_sums(cov, v, "data")
    q_fact = chi2_sums(cov, v, "factor")
    vr = np.einsum("ij,ij->i", np.abs(v), np.abs(rows))
    sens_chi2 = 2.0 * vr + q_data
    t_data, t_fact = _sums(cov)
    jit = float(getattr(cov, "jitter", 0.0) or 0.0)
    # computation: backward error of the factor (|L||L|^T per entry), of the solve (|L||z| ~ |v|^T|S||v|
    # scale) and of the sum of squares (n terms)
    root = math.sqrt(n)
    comp_chi2 = _C_SOLVED * (q_fact / root + root * chi2) * EPS
    logs = _log_pivots(cov)
    comp_logdet = _C_SOLVED * (t_fact / root + logs) * EPS
    if jit > 0:
        comp_chi2 = comp_chi2 + jit * np.einsum("ij,ij->i", v, v)
        comp_logdet = comp_logdet + jit * float(np.sum(_inv_diag(cov)))
    err_ld_data = EPS * t_data
    err_chi2_data = EPS * sens_chi2
    ll = -0.5 * (n * _LOG_2PI + logdet + chi2)
    err_ll_data = 0.5 * (err_ld_data + err_chi2_data) + EPS * abs(n * _LOG_2PI)
    err_ll_comp = 0.5 * (comp_logdet + comp_chi2) + 2 * EPS * (abs(n * _LOG_2PI) + abs(logdet) + chi2)
    out = [digits_of(err_ld_data, logdet), digits_of(err_chi2_data, chi2), digits_of(err_ll_data, ll),
           digits_of(comp_logdet, logdet), digits_of(comp_chi2, chi2), digits_of(err_ll_comp, ll)]
    if one:
        out = [float(np.asarray(x).reshape(-1)[0]) for x in out]
    else:
        out = [x if np.ndim(x) == 0 else np.asarray(x).reshape(batch) for x in out]
    return LikelihoodDigits(out[0], out[1], out[2], out[3], out[4], out[5], _exact(cov))


def stack_digits(a: np.ndarray, r: np.ndarray, chi2: np.ndarray, logdet: np.ndarray, batch: tuple,
                 max_matrices: int = 256) -> LikelihoodDigits | None:
    """Both statements for a stack of covariances ``a`` (..., n, n): each matrix factored once more, with
    its condition estimates (None beyond ``max_matrices`` matrices)."""
    from ..linalg.cholesky import cholesky

    nmat = int(np.prod(a.shape[:-2], dtype=int))
    if nmat > max_matrices:
        return None
    n = a.shape[-1]
    ab = np.broadcast_to(a, batch + (n, n))
    rb = np.broadcast_to(r, batch + (n,))
    cb = np.broadcast_to(chi2, batch)
    lb = np.broadcast_to(logdet, batch)
    fields = [np.empty(batch) for _ in range(6)]
    cache: dict = {}
    for idx in np.ndindex(batch):
        key = tuple(min(i, s - 1) for i, s in zip(idx[len(idx) - (a.ndim - 2):], a.shape[:-2]))
        if key not in cache:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                cache[key] = cholesky(np.asarray(ab[idx]))
        d = likelihood_digits(cache[key], rb[idx][None, :], np.array([cb[idx]]), float(lb[idx]), True)
        for k, name in enumerate(_NAMES):
            fields[k][idx] = getattr(d, name)
    f0, f1, f2, f3, f4, f5 = fields
    return LikelihoodDigits(f0, f1, f2, f3, f4, f5, n <= 1500)


_NAMES = ("trusted_logdet", "trusted_chi2", "trusted_loglik", "solved_logdet", "solved_chi2", "solved_loglik")


def _log_pivots(cov) -> float:
    """Sum of |log| of the pivots (each log rounds once, relative to its size)."""
    if isinstance(cov, Factor):
        return 2.0 * float(np.sum(np.abs(np.log(np.diag(cov.lower) ** 2))))
    return 2.0 * float(abs(cov.logdet())) + cov.dim


def _inv_diag(cov) -> np.ndarray:
    if isinstance(cov, Factor):
        return cov.inv_diag()
    return np.zeros(1)
