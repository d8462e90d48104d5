"""Shrinkage of the sample covariance towards a scaled identity.

Two published choices of the intensity, both from the maximum-likelihood
sample covariance ``S = X_c^T X_c / n`` of the centred rows:

* Ledoit & Wolf (2004), "A well-conditioned estimator for large-dimensional
  covariance matrices", J. Multivariate Analysis 88, 365-411: with the
  normalized Frobenius norm ``||A||^2 = tr(A A^T) / p``, ``m = tr(S) / p``,
  ``d^2 = ||S - m I||^2``, ``bbar^2 = n^-2 sum_i ||x_i x_i^T - S||^2``,
  ``b^2 = min(bbar^2, d^2)``; the estimate is ``(b^2/d^2) m I + (1 - b^2/d^2) S``.
* Chen, Wiesel, Eldar & Hero (2010), "Shrinkage algorithms for MMSE covariance
  estimation", IEEE Trans. Signal Processing 58, 5016-5029, the oracle
  approximating shrinkage: ``rho = min(((1 - 2/p) tr(S^2) + tr(S)^2) /
  ((n + 1 - 2/p) (tr(S^2) - tr(S)^2 / p)), 1)``; the estimate is
  ``(1 - rho) S + rho m I``.

The factor of the estimate comes from a QR of the stacked
``[sqrt((1 - delta) / n) R; sqrt(delta m) I]`` (``R^T R`` is the scatter
matrix), so no Gram matrix of the data is factored and ``n < p`` is fine.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

import numpy as np

from ..errors import InputError
from ..linalg.factor import Factor
from .sample import factor_from_r
from .streaming import Block, _upper_r

__all__ = ["SHRINKAGE_METHODS", "centred_fourth_moment", "shrinkage_intensity", "shrunk_factor"]

SHRINKAGE_METHODS = ("ledoit-wolf", "oas")


def _traces(r: np.ndarray, n: int) -> tuple[float, float]:
    """``tr(S)`` and ``tr(S^2)`` for ``S = R^T R / n`` (via the small k x k ``R R^T``)."""
    tr_s = float(np.sum(r * r)) / n
    g = r @ r.T
    tr_s2 = float(np.sum(g * g)) / (n * n)
    return tr_s, tr_s2


def shrinkage_intensity(r: np.ndarray, n: int, method: str, sum_norm4: float | None = None) -> tuple[float, float]:
    """Intensity in [0, 1] and target scale ``m = tr(S)/p``.

    Parameters
    ----------
    r : ndarray, shape (k, p)
        Upper-triangular factor of the scatter matrix of the centred rows.
    n : int
        Number of rows.
    method : {"ledoit-wolf", "oas"}
    sum_norm4 : float
        ``sum_i ||x_i - mean||^4`` (needed by Ledoit-Wolf only).
    """
    if method not in SHRINKAGE_METHODS:
        raise InputError(f"shrinkage: expected one of {SHRINKAGE_METHODS}, got {method!r}")
    p = r.shape[1]
    tr_s, tr_s2 = _traces(r, n)
    m = tr_s / p
    if method == "ledoit-wolf":
        if sum_norm4 is None:
            raise InputError("ledoit-wolf shrinkage needs the fourth-moment sum of the centred rows")
        d2 = (tr_s2 - tr_s * tr_s / p) / p
        bbar2 = (sum_norm4 - n * tr_s2) / (n * n * p)
        if d2 <= 0:  # S is already a multiple of the identity
            return 0.0, m
        b2 = min(max(bbar2, 0.0), d2)
        return b2 / d2, m
    den = (n + 1.0 - 2.0 / p) * (tr_s2 - tr_s * tr_s / p)
    num = (1.0 - 2.0 / p) * tr_s2 + tr_s * tr_s
    if den <= 0:
        return 1.0, m
    return min(num / den, 1.0), m


def shrunk_factor(r: np.ndarray, n: int, intensity: float, m: float, names: Sequence[str]) -> Factor:
    """Lower factor of ``(1 - delta) R^T R / n + delta m I`` by one QR of a stacked matrix."""
    p = r.shape[1]
    if not m > 0:
        raise InputError("every column is constant; nothing to estimate")
    # with n <= p the estimate's smallest eigenvalue is intensity * m: below ~1e-12 of the
    # target scale it is singular to working precision (rounding leaves ~1e-16 in place of 0)
    if intensity <= 1e-12 and n <= p:
        raise InputError(
            f"the shrinkage intensity is 0 (to rounding, {intensity:.1e}) for these {n} rows "
            f"(their spread about the mean is exactly "
            f"explained by the sample covariance, as happens with 2 rows), so the estimate is the singular "
            f"sample covariance of n <= p = {p}. Use shrinkage='oas' or more rows")
    stacked = np.vstack([math.sqrt((1.0 - intensity) / n) * r, math.sqrt(intensity * m) * np.eye(p)])
    rr = _upper_r(np.asfortranarray(stacked))
    return factor_from_r(rr, 1.0, names, method="shrinkage")


def centred_fourth_moment(blocks: Iterable[Block], shift: np.ndarray, mean: np.ndarray) -> float:
    """``sum_i ||x_i - shift - mean||^4`` over the rows of the blocks (Ledoit-Wolf's second pass).

    One pass, one block in memory at a time; ``shift + mean`` is the sample mean
    (the accumulator's pilot shift and the mean of the shifted rows, subtracted
    in that order as the accumulator does).
    """
    total = 0.0
    for blk in blocks:
        if blk.values.shape[0]:
            z = blk.values - shift - mean
            q = np.einsum("ij,ij->i", z, z)
            total += float(q @ q)
    return total
