"""Separable covariances: ``A ⊗ B`` held as the Cholesky factors of A and B."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..._numerics import digits_lost_from_rcond
from ..factor import Factor, FactorHealth
from .base import StructuredCovariance, _as_factor

__all__ = ['KroneckerCovariance', 'kronecker']


class KroneckerCovariance(StructuredCovariance):
    """``A ⊗ B`` held as the Cholesky factors of A and B. Build with :func:`kronecker`.

    Vectors are in row-major order: entry ``i * b + j`` of a length ``a * b``
    vector is the element (i, j) of an a x b array (e.g. i a sensor, j a time).
    """

    def __init__(self, A: Any, B: Any):
        self._fa = _as_factor(A, "A")
        self._fb = _as_factor(B, "B")
        self._names = None
        ha, hb = self._fa.health, self._fb.health
        # cond(A ⊗ B) = cond(A) cond(B) in the 1-norm and 2-norm, and the
        # unit-diagonal scaling of A ⊗ B is the Kronecker product of theirs.
        rc = ha.rcond * hb.rcond
        rc_s = ha.rcond_scaled * hb.rcond_scaled
        jit = max(ha.jitter, hb.jitter)
        method = "kronecker" + ("+jitter" if jit > 0 else "")
        self._health = FactorHealth(rc, rc_s, digits_lost_from_rcond(rc_s), jit,
                                    max(ha.jitter_relative, hb.jitter_relative),
                                    method)

    @property
    def dim(self) -> int:
        return self._fa.dim * self._fb.dim

    @property
    def factors(self) -> tuple[Factor, Factor]:
        return self._fa, self._fb

    @property
    def health(self) -> FactorHealth:
        return self._health

    def logdet(self) -> float:
        """``b log det A + a log det B``."""
        return self._fb.dim * self._fa.logdet() + self._fa.dim * self._fb.logdet()

    def _apply(self, cols: np.ndarray, op_a, op_b) -> np.ndarray:
        """Apply ``op_a`` to the first and ``op_b`` to the second Kronecker axis of columns.

        cols is (a*b, k); viewed as (a, b, k). op_x acts on the leading axis of a
        2-D array, so reshapes bring each axis to the front in turn.
        """
        a, b = self._fa.dim, self._fb.dim
        k = cols.shape[1]
        t = cols.reshape(a, b * k)
        t = op_a(t).reshape(a, b, k)
        t = np.ascontiguousarray(t.transpose(1, 0, 2)).reshape(b, a * k)
        t = op_b(t).reshape(b, a, k)
        return np.ascontiguousarray(t.transpose(1, 0, 2)).reshape(a * b, k)

    def _solve_cols(self, b: np.ndarray) -> np.ndarray:
        # (A ⊗ B)^{-1} = A^{-1} ⊗ B^{-1}
        return self._apply(b, self._fa.solve, self._fb.solve)

    def _whiten_rows(self, rows: np.ndarray) -> np.ndarray:
        # (L_A ⊗ L_B)^{-1} = L_A^{-1} ⊗ L_B^{-1}, each a triangular solve on one axis
        z = self._apply(rows.T, self._fa.solve_lower, self._fb.solve_lower)
        return z.T

    def _dense(self) -> np.ndarray:
        return np.kron(self._fa.matrix(), self._fb.matrix())


def kronecker(A: Any, B: Any) -> KroneckerCovariance:
    """Separable covariance ``A ⊗ B`` (e.g. between sensors ⊗ between times).

    Parameters
    ----------
    A : array_like (a, a) or Factor
    B : array_like (b, b) or Factor
        Matrices are factored separately with :func:`whiten.cholesky`.

    Returns
    -------
    KroneckerCovariance
        Of dimension ``a * b``; vectors are row-major (see the class).

    Raises
    ------
    InputError, NotPositiveDefiniteError
        As :func:`whiten.cholesky` for A or B.

    Notes
    -----
    With ``A = L_A L_A^T`` and ``B = L_B L_B^T``, ``A ⊗ B = (L_A ⊗ L_B)(L_A ⊗ L_B)^T``
    (Van Loan, 2000). A vector reshaped to an a x b array X is whitened as
    ``L_A^{-1} X L_B^{-T}`` by two triangular solves, cost O(ab(a + b)) per row
    instead of O(a^2 b^2); ``log det = b log det A + a log det B``.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> A = np.array([[2.0, 0.5], [0.5, 1.0]]); B = np.array([[1.0, 0.3], [0.3, 2.0]])
    >>> s = whiten.kronecker(A, B)
    >>> bool(np.isclose(s.logdet(), np.linalg.slogdet(np.kron(A, B))[1]))
    True
    """
    return KroneckerCovariance(A, B)
