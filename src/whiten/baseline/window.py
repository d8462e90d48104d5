"""Sliding windows: fold rows into or out of a sample baseline by rank-one updates of its scatter factor.

With ``W`` rows (or weight sum), mean ``mu`` and scatter ``S``, adding ``x``
gives ``mu' = mu + (x - mu) / (W + 1)`` and ``S' = S + (W / (W + 1)) (x - mu)(x -
mu)^T``; removing it gives ``mu' = mu - (x - mu) / (W - 1)`` and ``S' = S - (W / (W -
1)) (x - mu)(x - mu)^T``. Each is a rank-one update (``Factor.update``, O(p^2)) or
downdate (``Factor.downdate``, hyperbolic rotations) of the scatter factor
``L sqrt(W - 1)``, rescaled by ``1 / sqrt(W' - 1)`` at the end so the covariance
stays ``S' / (W' - 1)``.
"""

from __future__ import annotations

import math

import numpy as np

from ..linalg.factor import Factor
from ..linalg.health import health_of

__all__ = ["fold"]


def fold(mean: np.ndarray, factor: Factor, wsum: float, x: np.ndarray, sign: int) -> tuple[np.ndarray, Factor, float]:
    """``(mean', covariance factor', weight sum')`` after folding rows ``x`` in (``sign=+1``) or out (``-1``).

    Raises
    ------
    NotPositiveDefiniteError
        A downdate by rows that were not part of the fit.
    """
    columns = factor.columns
    scatter = Factor(factor.lower * math.sqrt(wsum - 1.0), factor.health, columns)
    mu = mean.astype(np.float64).copy()
    w = float(wsum)
    vecs = np.empty_like(x)
    for i, xi in enumerate(x):
        d = xi - mu
        vecs[i] = math.sqrt(w / (w + sign)) * d
        mu = mu + sign * d / (w + sign)
        w += sign
    if x.shape[0]:
        scatter = scatter.update(vecs) if sign > 0 else scatter.downdate(vecs)
    low = scatter.lower / math.sqrt(w - 1.0)
    h0 = factor.health
    return mu, Factor(low, health_of(low, h0.jitter, h0.jitter_relative, "updated"), columns), w
