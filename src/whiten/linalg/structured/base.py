"""The common behaviour of the structured covariances: input checks, row blocking, the shift.

Subclasses provide ``dim``, ``logdet``, ``_solve_cols`` (columns),
``_whiten_rows`` (rows, already shifted), ``_quad_rows`` and ``_dense``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..._settings import current
from ...errors import InputError, NotPositiveDefiniteError
from ..cholesky import cholesky
from ..factor import Factor, FactorHealth

__all__ = ["StructuredCovariance"]

# dense() refuses beyond this many entries (8 bytes each): 400 MB.
_DENSE_MAX_ENTRIES = 50_000_000
# Row blocks hold at most this many numbers, so a row of length 200000 does not
# turn block_rows=8192 into a 13 GB temporary.
_BLOCK_ENTRIES = 1 << 21


def _positive_vector(d: Any, name: str) -> np.ndarray:
    arr = np.asarray(d, dtype=np.float64)
    if arr.ndim != 1 or arr.shape[0] == 0:
        raise InputError(f"{name}: expected a non-empty 1-D array of variances, got shape {arr.shape}")
    if not np.isfinite(arr).all():
        k = int(np.flatnonzero(~np.isfinite(arr))[0])
        raise InputError(f"{name}: entry {k} is {arr[k]}; variances must be finite")
    if np.any(arr <= 0):
        k = int(np.flatnonzero(arr <= 0)[0])
        raise NotPositiveDefiniteError(
            f"{name}: entry {k} is {arr[k]:.3g}; every variance must be positive "
            "(a zero variance makes the covariance singular)", pivot=k, value=float(arr[k]))
    out = arr.copy()
    out.setflags(write=False)
    return out


def _as_factor(a: Any, name: str) -> Factor:
    if isinstance(a, Factor):
        return a
    if isinstance(a, StructuredCovariance):
        raise InputError(f"{name}: expected a matrix or a whiten.Factor here, got {type(a).__name__}")
    return cholesky(a)


class StructuredCovariance:
    """Common behaviour of the structured covariances (not built directly).

    Subclasses provide ``dim``, ``logdet``, ``_solve_cols`` (columns),
    ``_whiten_rows`` (rows, already shifted), ``_quad_rows`` and ``dense``;
    this class does input checking, row blocking and the shift.
    """

    _names: list[str] | None = None

    # -------------------------------------------------------------- basics
    @property
    def dim(self) -> int:  # pragma: no cover - every subclass overrides
        raise NotImplementedError

    @property
    def columns(self) -> list[str] | None:
        """Column (variable) labels, or None."""
        return None if self._names is None else list(self._names)

    @property
    def health(self) -> FactorHealth:  # pragma: no cover - every subclass overrides
        raise NotImplementedError

    @property
    def jitter(self) -> float:
        return self.health.jitter

    @property
    def rcond(self) -> float:
        return self.health.rcond

    @property
    def digits_lost(self) -> float:
        return self.health.digits_lost

    def matrix(self) -> np.ndarray:
        """Alias of :meth:`dense`, so code written for a Factor works unchanged."""
        return self.dense()

    def dense(self) -> np.ndarray:
        """The covariance as an (n, n) array, for small cases and tests.

        Raises
        ------
        InputError
            When n * n exceeds 5e7 entries (400 MB); use the structured operations.
        """
        n = self.dim
        if n * n > _DENSE_MAX_ENTRIES:
            raise InputError(
                f"dense(): a {n} x {n} matrix would need {n * n * 8 / 1e9:.1f} GB; use solve/quad/whiten, "
                "which never form it")
        return self._dense()

    def _dense(self) -> np.ndarray:  # pragma: no cover - every subclass overrides
        raise NotImplementedError

    def logdet(self) -> float:  # pragma: no cover - every subclass overrides
        """``log det S``, computed from the structure (never from the dense matrix)."""
        raise NotImplementedError

    def _solve_cols(self, b: np.ndarray) -> np.ndarray:  # pragma: no cover - every subclass overrides
        raise NotImplementedError

    def _whiten_rows(self, rows: np.ndarray) -> np.ndarray:  # pragma: no cover - every subclass overrides
        raise NotImplementedError

    # -------------------------------------------------------------- checks
    def _rhs(self, b: Any, name: str) -> np.ndarray:
        arr = np.asarray(b, dtype=np.float64)
        if arr.ndim not in (1, 2) or arr.shape[0] != self.dim:
            raise InputError(f"{name}: expected shape ({self.dim},) or ({self.dim}, k), got {arr.shape}")
        if not np.isfinite(arr).all():
            raise InputError(f"{name}: contains NaN or infinite entries")
        return arr

    def _rows(self, x: Any, name: str) -> tuple[np.ndarray, bool]:
        arr = np.asarray(x, dtype=np.float64)
        one = arr.ndim == 1
        if one:
            arr = arr[None, :]
        if arr.ndim != 2 or arr.shape[1] != self.dim:
            raise InputError(f"{name}: expected rows of length {self.dim}, got shape {np.shape(x)}")
        if not np.isfinite(arr).all():
            r, c = np.argwhere(~np.isfinite(arr))[0]
            raise InputError(f"{name}: row {r}, column {c} is {arr[r, c]}; values must be finite")
        return arr, one

    def _shift(self, shift: Any) -> np.ndarray | None:
        if shift is None:
            return None
        sh = np.asarray(shift, dtype=np.float64)
        if sh.shape != (self.dim,):
            raise InputError(f"shift: expected shape ({self.dim},), got {sh.shape}")
        if not np.isfinite(sh).all():
            raise InputError("shift: contains NaN or infinite entries")
        return sh

    def _blocks(self, nrows: int):
        rows = max(1, min(int(current().block_rows), _BLOCK_ENTRIES // max(1, self.dim)))
        for start in range(0, nrows, rows):
            yield start, min(start + rows, nrows)

    # ----------------------------------------------------------- questions
    def solve(self, b: Any) -> np.ndarray:
        """Solve ``S x = b`` for b of shape (n,) or (n, k); x has the shape of b."""
        arr = self._rhs(b, "b")
        one = arr.ndim == 1
        x = self._solve_cols(arr[:, None] if one else arr)
        return x[:, 0] if one else x

    def whiten(self, x: Any, *, shift: Any = None) -> np.ndarray:
        """Whitened rows ``z_i = W (x_i - shift)`` with ``W^T W = S^{-1}``.

        Parameters
        ----------
        x : array_like, shape (n,) or (N, n)
        shift : array_like, shape (n,), optional

        Returns
        -------
        z : ndarray, same shape as x
            Rows with identity covariance when the x_i have covariance S.
        """
        arr, one = self._rows(x, "x")
        sh = self._shift(shift)
        out = np.empty_like(arr)
        for a, b in self._blocks(arr.shape[0]):
            blk = arr[a:b] if sh is None else arr[a:b] - sh
            out[a:b] = self._whiten_rows(blk)
        return out[0] if one else out

    def quad(self, x: Any, *, shift: Any = None) -> np.ndarray | float:
        """Quadratic forms ``(x_i - shift)^T S^{-1} (x_i - shift)``: float for one row, else (N,)."""
        arr, one = self._rows(x, "x")
        sh = self._shift(shift)
        out = np.empty(arr.shape[0])
        for a, b in self._blocks(arr.shape[0]):
            blk = arr[a:b] if sh is None else arr[a:b] - sh
            out[a:b] = self._quad_rows(blk)
        return float(out[0]) if one else out

    def _quad_rows(self, rows: np.ndarray) -> np.ndarray:
        z = self._whiten_rows(rows)
        return np.einsum("ij,ij->i", z, z)

    def __repr__(self) -> str:
        h = self.health
        return (f"{type(self).__name__}(dim={self.dim}, method={h.method!r}, rcond={h.rcond:.3g}, "
                f"digits_lost={h.digits_lost:.1f})")
