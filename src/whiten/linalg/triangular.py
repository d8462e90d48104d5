"""Triangular solves and condition estimates for R and L factors.

Every solve with a triangle in the package goes through here or through a
:class:`~whiten.Factor`; nothing forms the inverse of a triangle except where a
caller reports its rows (variances), and those call sites say so.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import lapack, solve_triangular

__all__ = ["tri_solve", "tri_rcond", "condition_2", "stack_solve_lower"]


def tri_solve(r: np.ndarray, b: np.ndarray, *, trans: bool = False) -> np.ndarray:
    """Solve ``r x = b`` (or ``r.T x = b``) for upper-triangular ``r``."""
    return solve_triangular(r, b, lower=False, trans=1 if trans else 0, check_finite=False)


def tri_rcond(r: np.ndarray) -> float:
    """LAPACK ``dtrcon`` estimate of 1 / cond_1(r) for upper-triangular r (0 when singular)."""
    if r.size == 0:
        return 1.0
    if not np.all(np.isfinite(r)) or np.any(np.diag(r) == 0):
        return 0.0
    rc, info = lapack.dtrcon(np.asfortranarray(r), norm="1", uplo="U", diag="N")
    return float(rc) if info == 0 else 0.0


def condition_2(r: np.ndarray) -> float:
    """2-norm condition number of an upper-triangular r from its singular values."""
    if r.size == 0:
        return 1.0
    s = np.linalg.svd(r, compute_uv=False)
    return math.inf if s[-1] == 0 else float(s[0] / s[-1])


def stack_solve_lower(lower: np.ndarray, r: np.ndarray) -> np.ndarray:
    """``L^{-1} r`` for stacks: lower (..., n, n), r (..., n), batch shapes broadcast.

    scipy >= 1.15 broadcasts ``solve_triangular`` over leading axes; older
    versions fall back to ``numpy.linalg.solve`` (an LU of a triangular matrix,
    still a solve and still without a per-matrix Python loop).
    """
    try:
        return solve_triangular(lower, r[..., None], lower=True, check_finite=False)[..., 0]
    except ValueError:  # pragma: no cover - scipy < 1.15
        return np.linalg.solve(lower, r[..., None])[..., 0]
