"""Test matrices with a chosen condition number (built here, not taken from any book)."""

from __future__ import annotations

import numpy as np

EPS = float(np.finfo(np.float64).eps)


def random_orthogonal(p: int, rng: np.random.Generator) -> np.ndarray:
    """Haar-distributed orthogonal matrix (QR of a Gaussian matrix with sign fix)."""
    q, r = np.linalg.qr(rng.standard_normal((p, p)))
    return q * np.sign(np.diag(r))


def spd_with_condition(p: int, cond: float, rng: np.random.Generator, *, scale: float = 1.0) -> np.ndarray:
    """Symmetric positive definite p x p matrix with 2-norm condition number ``cond``.

    Eigenvalues are log-spaced between ``scale`` and ``scale / cond``; the
    eigenvectors are random, so the matrix is not diagonally dominated and its
    unit-diagonal scaling does not cure the conditioning.
    """
    q = random_orthogonal(p, rng)
    lam = scale * np.logspace(0.0, -np.log10(cond), p) if p > 1 else np.array([scale])
    a = (q * lam) @ q.T
    return 0.5 * (a + a.T)


def covariance_with_scales(p: int, cond: float, rng: np.random.Generator, *, decades: float = 4.0) -> np.ndarray:
    """A correlation matrix of condition ``cond`` rescaled by standard deviations over ``decades``."""
    c = spd_with_condition(p, cond, rng)
    d = np.sqrt(np.diag(c))
    corr = c / np.outer(d, d)
    sd = np.logspace(0.0, -decades, p)
    rng.shuffle(sd)
    return corr * np.outer(sd, sd)
