"""Shrinkage of the sample correlation towards the identity (units never matter).

The estimate is ``D ((1 - delta) C + delta I) D`` where ``S = X_c^T X_c / n``
is the maximum-likelihood covariance of the centred rows, ``D = diag(S)^(1/2)``
and ``C = D^-1 S D^-1`` the sample correlation: the covariance is shrunk towards
its own diagonal, the target "D" of Schafer & Strimmer (2005), "A shrinkage
approach to large-scale covariance matrix estimation", Stat. Appl. Genet. Mol.
Biol. 4(1), art. 32. Rescaling or shifting a column moves ``D`` and leaves
``C`` and the intensity unchanged, so distances do not depend on the units.

The intensity ``delta`` is given by one of two published rules, applied to the
standardized rows ``z_i = D^-1 (x_i - mean)`` (whose covariance is ``C``, with
``tr(C) / p = 1``):

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

The factor of the estimate is ``D Q`` where ``Q^T`` is the R of a QR of the
stacked ``[sqrt((1 - delta) / n) R D^-1; sqrt(delta) I]`` (``R^T R`` is the
scatter matrix, so ``R D^-1`` is the factor of the standardized scatter): no
Gram matrix of the data is factored, no inverse is formed (``D^-1`` is a
division by the column norms of ``R``) and ``n < p`` is fine.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

import numpy as np

from ..errors import InputError
from ..linalg.factor import Factor
from ..linalg.health import health_of
from .sample import factor_from_r
from .streaming import Block, _upper_r

__all__ = ["SHRINKAGE_METHODS", "centred_fourth_moment", "column_scales", "shrinkage_intensity", "shrunk_factor",
           "shrunk_from_rows"]

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


def column_scales(r: np.ndarray, n: int) -> np.ndarray:
    """``D``: the ML standard deviations ``sqrt(diag(R^T R) / n)`` (column norms of R)."""
    return np.sqrt(np.einsum("ij,ij->j", r, r) / n)


def shrunk_factor(r: np.ndarray, n: int, intensity: float, scales: np.ndarray, names: Sequence[str]) -> Factor:
    """Lower factor of ``D ((1 - delta) C + delta I) D`` (``C`` from ``R / D``) by one QR of a stacked matrix."""
    p = r.shape[1]
    if not np.all(scales > 0):
        raise InputError("a column is constant; nothing to estimate")
    # with n <= p the correlation estimate's smallest eigenvalue is the intensity: below ~1e-12
    # it is singular to working precision (rounding leaves ~1e-16 in place of 0)
    if intensity <= 1e-12 and n <= p:
        raise InputError(
            f"the shrinkage intensity is 0 (to rounding, {intensity:.1e}) for these {n} rows "
            f"(their spread about the mean is exactly "
            f"explained by the sample covariance, as happens with 2 rows), so the estimate is the singular "
            f"sample covariance of n <= p = {p}. Use shrinkage='oas' or more rows")
    rs = r / scales
    stacked = np.vstack([math.sqrt((1.0 - intensity) / n) * rs, math.sqrt(intensity) * np.eye(p)])
    rr = _upper_r(np.asfortranarray(stacked))
    fc = factor_from_r(rr, 1.0, names, method="shrinkage")
    lower = scales[:, None] * fc.lower
    return Factor(lower, health_of(lower, 0.0, 0.0, "shrinkage"), names)


def shrunk_from_rows(x: np.ndarray, rule: str, names: Sequence[str]) -> tuple[np.ndarray, Factor, float]:
    """Mean, factor and intensity of the shrinkage estimate of in-memory rows (the same steps as
    :func:`whiten.fit_baseline`; used by the simulated limits)."""
    n = x.shape[0]
    mean = x.mean(axis=0)
    xc = x - mean
    r = _upper_r(np.asfortranarray(xc))
    sc = column_scales(r, n)
    norm4 = None
    if rule == "ledoit-wolf":
        q = np.einsum("ij,ij->i", xc / sc, xc / sc)
        norm4 = float(q @ q)
    delta, _ = shrinkage_intensity(r / sc, n, rule, norm4)
    return mean, shrunk_factor(r, n, delta, sc, names), delta


def centred_fourth_moment(blocks: Iterable[Block], shift: np.ndarray, mean: np.ndarray,
                          scales: np.ndarray | None = None) -> float:
    """``sum_i ||(x_i - shift - mean) / scales||^4`` over the rows of the blocks (Ledoit-Wolf's second pass).

    One pass, one block in memory at a time; ``shift + mean`` is the sample mean
    (the accumulator's pilot shift and the mean of the shifted rows, subtracted
    in that order as the accumulator does).
    """
    total = 0.0
    for blk in blocks:
        if blk.values.shape[0]:
            z = blk.values - shift - mean
            if scales is not None:
                z /= scales
            q = np.einsum("ij,ij->i", z, z)
            total += float(q @ q)
    return total
