"""Independent noise plus a few shared error sources: ``diag(d) + U U^T``."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..._numerics import digits_lost_from_rcond
from ...errors import InputError
from ..cholesky import cholesky
from ..factor import Factor, FactorHealth
from .base import StructuredCovariance, _positive_vector

__all__ = ['LowRankPlusDiagonal', 'low_rank_plus_diagonal']


class LowRankPlusDiagonal(StructuredCovariance):
    """``diag(d) + U U^T`` held as d, an orthonormal basis of D^{-1/2} U and a k x k Cholesky factor.

    Build with :func:`low_rank_plus_diagonal`.
    """

    def __init__(self, U: Any, d: Any):
        self._d = _positive_vector(d, "d")
        u = np.asarray(U, dtype=np.float64)
        if u.ndim == 1:
            u = u[:, None]
        if u.ndim != 2 or u.shape[0] != self._d.size or u.shape[1] == 0:
            raise InputError(f"U: expected shape ({self._d.size}, k) with k >= 1 to match d, got {np.shape(U)}")
        if not np.isfinite(u).all():
            r, c = np.argwhere(~np.isfinite(u))[0]
            raise InputError(f"U: row {r}, column {c} is {u[r, c]}; values must be finite")
        self._names = None
        self._sd = np.sqrt(self._d)
        self._u = np.array(u, copy=True)
        self._u.setflags(write=False)
        # V = D^{-1/2} U is the problem in the metric of the independent noise;
        # its thin QR, V = Q R, turns I + V V^T into I + Q (R R^T) Q^T.
        q, r = np.linalg.qr(u / self._sd[:, None], mode="reduced")
        q.setflags(write=False)
        self._q = q
        m = r @ r.T
        # The capacitance I + R R^T has the eigenvalues (and determinant) of
        # I + U^T D^{-1} U = I + R^T R, all >= 1, so it always factors: jitter
        # would only hide a bug.
        cap = np.eye(m.shape[0]) + 0.5 * (m + m.T)
        self._cap = cholesky(cap, jitter=False)
        # D^{-1/2} S D^{-1/2} = I + V V^T is the matrix whose accuracy matters after
        # the (exact) diagonal scaling. Its eigenvalues are those of C and, when
        # k < n, 1 (the directions no shared source touches), so its condition
        # number is lambda_max(C) / min(lambda_min(C), 1): a k x k eigenvalue
        # problem. The unscaled estimate is bounded by it times min(d)/max(d).
        ev = np.linalg.eigvalsh(cap)
        low = min(float(ev[0]), 1.0) if m.shape[0] < self._d.size else float(ev[0])
        rc_s = low / float(ev[-1])
        rc = rc_s * float(self._d.min() / self._d.max())
        self._health = FactorHealth(rc, rc_s, digits_lost_from_rcond(rc_s), 0.0, 0.0, "low-rank+diagonal")

    @property
    def dim(self) -> int:
        return self._d.size

    @property
    def rank(self) -> int:
        return self._u.shape[1]

    @property
    def capacitance(self) -> Factor:
        """Cholesky factor of the k x k capacitance ``I + R R^T`` (R from the QR of ``D^{-1/2} U``).

        It has the eigenvalues and determinant of ``I + U^T D^{-1} U``.
        """
        return self._cap

    @property
    def health(self) -> FactorHealth:
        return self._health

    def logdet(self) -> float:
        """``sum(log d) + log det C`` by the matrix determinant lemma; never overflows."""
        return float(np.sum(np.log(self._d))) + self._cap.logdet()

    def _split(self, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Rows c -> (coordinates a = c Q, part outside span(Q): c - a Q^T)."""
        a = c @ self._q
        return a, c - a @ self._q.T

    def _solve_cols(self, b: np.ndarray) -> np.ndarray:
        # S^{-1} = D^{-1/2} [(I - Q Q^T) + Q C^{-1} Q^T] D^{-1/2}  (Woodbury in the basis Q)
        a, perp = self._split((b / self._sd[:, None]).T)
        y = perp + (self._cap.solve(a.T).T) @ self._q.T
        return y.T / self._sd[:, None]

    def _whiten_rows(self, rows: np.ndarray) -> np.ndarray:
        # W = (I - Q Q^T) + Q L_C^{-1} Q^T satisfies W^T W = (I + V V^T)^{-1}
        a, perp = self._split(rows / self._sd)
        return perp + self._cap.solve_lower(a.T).T @ self._q.T

    def _quad_rows(self, rows: np.ndarray) -> np.ndarray:
        # ||(I - Q Q^T) c||^2 + ||L_C^{-1} Q^T c||^2: a sum of two squares, with the
        # part outside span(Q) formed explicitly, so a residual lying along the
        # shared error sources is not lost to cancellation (as ||c||^2 - ... would be).
        a, perp = self._split(rows / self._sd)
        w = self._cap.solve_lower(a.T)
        return np.einsum("ij,ij->i", perp, perp) + np.einsum("ji,ji->i", w, w)

    def _dense(self) -> np.ndarray:
        return np.diag(self._d) + self._u @ self._u.T


def low_rank_plus_diagonal(U: Any, d: Any) -> LowRankPlusDiagonal:
    """Covariance ``diag(d) + U U^T``: independent noise plus k shared error sources.

    Parameters
    ----------
    U : array_like, shape (n, k)
        Column j is how the j-th shared error source (unit variance) moves each
        measurement; a 1-D array is one source.
    d : array_like, shape (n,)
        Positive variances of the independent part.

    Returns
    -------
    LowRankPlusDiagonal

    Raises
    ------
    InputError
        Shapes disagree, non-finite values.
    NotPositiveDefiniteError
        A variance in ``d`` is zero or negative.

    Notes
    -----
    With ``V = D^{-1/2} U = Q R`` (thin Householder QR) the covariance is
    ``D^{1/2} (I + Q R R^T Q^T) D^{1/2}``. The k x k capacitance
    ``C = I + R R^T = L_C L_C^T`` (factored by :func:`whiten.cholesky`) has the
    eigenvalues of the textbook ``I + U^T D^{-1} U``. Solves use the Woodbury
    identity (Woodbury, 1950) in the basis Q,
    ``S^{-1} b = D^{-1/2} [c - Q Q^T c + Q C^{-1} Q^T c]``, ``c = D^{-1/2} b``; the
    log-determinant the matrix determinant lemma ``log det S = sum log d + log det C``;
    ``whiten`` the map ``(I - Q Q^T) + Q L_C^{-1} Q^T`` and ``quad`` the sum of
    squares ``||c - Q Q^T c||^2 + ||L_C^{-1} Q^T c||^2``. The plain Woodbury form
    ``||c||^2 - ||L_C^{-1} V^T c||^2`` subtracts two nearly equal numbers when c
    lies along the shared sources and loses ``log10 cond(C)`` digits; the sum of
    squares does not. Cost: O(n k^2) once, O(n k) per row; memory O(n k).
    ``health.digits_lost`` is ``log10 cond(D^{-1/2} S D^{-1/2})``, read off the
    eigenvalues of the k x k capacitance.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> U = np.ones((4, 1)); d = np.full(4, 0.5)
    >>> s = whiten.low_rank_plus_diagonal(U, d)
    >>> bool(np.isclose(s.logdet(), np.linalg.slogdet(s.dense())[1]))
    True
    """
    return LowRankPlusDiagonal(U, d)
