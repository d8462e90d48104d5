"""Cholesky factor of a symmetric positive definite matrix: factor once, then ask.

:func:`~whiten.linalg.cholesky.cholesky` validates a matrix, factors it (with
disclosed jitter only when the plain factorization fails) and returns a
:class:`Factor`, which owns every
operation the rest of the library needs: ``solve``, ``whiten``, ``quad``,
``logdet``, rank-one ``update``/``downdate``, and the diagonal of the inverse as
a *reported* quantity. Layers above never call LAPACK themselves.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.linalg import blas, lapack

from .._numerics import EPS, column_norms, pow2_level_scale
from .._settings import current
from ..errors import InputError, NotPositiveDefiniteError
from .health import FactorHealth, _PendingHealth, factor_scaled, health_of

__all__ = ["Factor", "FactorHealth"]


def _name(names: Sequence[str] | None, k: int) -> str:
    return repr(names[k]) if names is not None else f"index {k}"


class Factor:
    """Lower Cholesky factor ``L`` with ``L @ L.T == a + jitter * I``.

    Build one with :func:`cholesky` (or :meth:`Factor.from_lower` for a factor
    you already trust). A Factor is immutable: ``update``/``downdate`` return a
    new one.

    Attributes
    ----------
    lower : ndarray, shape (p, p), read-only
    jitter : float
    rcond : float
    digits_lost : float
    health : FactorHealth
    columns : list of str or None
    dim : int

    Examples
    --------
    >>> import numpy as np, whiten
    >>> a = np.array([[4.0, 2.0], [2.0, 3.0]])
    >>> f = whiten.cholesky(a)
    >>> bool(np.allclose(a @ f.solve([1.0, 2.0]), [1.0, 2.0]))
    True
    """

    __slots__ = ("_lower", "_lower_f", "_health", "_names", "_matrix", "_inv_diag", "_inv_sd", "_logdet")

    def __init__(self, lower: np.ndarray, health: FactorHealth | _PendingHealth, names: Sequence[str] | None = None,
                 matrix: np.ndarray | None = None, *, _copy: bool = True):
        # one Fortran-ordered copy serves both users and LAPACK/BLAS; with _copy=False the
        # library hands over arrays it made for this factor alone (no copies at all)
        lower = np.array(lower, dtype=np.float64, order="F", copy=True) if _copy else np.asfortranarray(lower)
        lower.setflags(write=False)
        self._lower = lower
        self._lower_f = lower
        self._health: FactorHealth | _PendingHealth = health
        self._names = list(names) if names is not None else None
        if self._names is not None and len(self._names) != lower.shape[0]:
            raise InputError(f"columns: expected {lower.shape[0]} names, got {len(self._names)}")
        if matrix is not None:
            matrix = np.array(matrix, dtype=np.float64, copy=True) if _copy else matrix
            matrix.setflags(write=False)
        self._matrix = matrix
        self._inv_diag: np.ndarray | None = None
        self._inv_sd: np.ndarray | None = None
        self._logdet: float | None = None

    # ------------------------------------------------------------------ build
    @classmethod
    def from_lower(cls, lower: Any, *, columns: Sequence[str] | None = None, jitter: float = 0.0) -> Factor:
        """Wrap an existing lower-triangular factor (checked: square, finite, positive diagonal).

        Raises
        ------
        InputError
            Not square, not finite, or entries above the diagonal.
        NotPositiveDefiniteError
            A diagonal entry is not positive.
        """
        arr = np.asarray(lower, dtype=np.float64)
        if arr.ndim != 2 or arr.shape[0] != arr.shape[1] or arr.shape[0] == 0:
            raise InputError(f"lower: must be a non-empty square matrix, got shape {arr.shape}")
        if not np.isfinite(arr).all():
            raise InputError("lower: contains NaN or infinite entries")
        if np.any(np.triu(arr, 1) != 0):
            raise InputError("lower: has non-zero entries above the diagonal; pass a lower-triangular factor")
        names = columns
        d = np.diag(arr)
        if np.any(d <= 0):
            k = int(np.flatnonzero(d <= 0)[0])
            raise NotPositiveDefiniteError(
                f"lower: diagonal entry {_name(names, k)} is {d[k]:.3g}; a Cholesky factor has a positive diagonal",
                pivot=k, value=float(d[k]))
        return cls(arr, health_of(arr, jitter, 0.0, "given"), names)

    def rescaled(self, c: Any) -> Factor:
        """Factor of ``C a C`` for ``C = diag(c)``, c powers of two: rows of L times c (exact).

        This is how a covariance fitted to equilibrated data (each column
        multiplied by a power of two) is mapped back to the data's own units
        without a rounding error, even where ``C a C`` has entries beyond the
        float64 range (a column of 1e+160s has a variance of 1e+320): the matrix
        is never formed. The unit-diagonal condition estimate, and with it
        ``digits_lost``, is that of ``a`` (the unit-diagonal scaling absorbs C);
        the unscaled ``rcond`` is estimated anew when asked for.
        """
        cv = np.asarray(c, dtype=np.float64).reshape(self.dim)
        if np.all(cv == 1.0):
            return self
        h = self._health
        with np.errstate(over="ignore", under="ignore", invalid="ignore"):
            lower = self._lower * cv[:, None]
            a_abs = (np.abs(self._lower) @ np.abs(self._lower).T) * cv[:, None] * cv[None, :]
            anorm = float(a_abs.sum(axis=0).max())
            jit = float(h.jitter * np.max(cv) ** 2) if h.jitter else 0.0
        if not math.isfinite(anorm):
            anorm = 0.0  # the 1-norm itself is beyond float64: the unscaled rcond is reported as 0
        pend = _PendingHealth(h.rcond_scaled, anorm, jit, h.jitter_relative, h.method)
        return Factor(lower, pend, self._names, _copy=True)

    # ------------------------------------------------------------ attributes
    @property
    def lower(self) -> np.ndarray:
        return self._lower

    @property
    def dim(self) -> int:
        return self._lower.shape[0]

    @property
    def columns(self) -> list[str] | None:
        """Column (variable) labels, or None."""
        return None if self._names is None else list(self._names)

    @property
    def health(self) -> FactorHealth:
        h = self._health
        if isinstance(h, _PendingHealth):
            h = self._health = h.resolve(self._lower_f)
        return h

    @property
    def jitter(self) -> float:
        return self._health.jitter

    @property
    def rcond(self) -> float:
        return self.health.rcond

    @property
    def digits_lost(self) -> float:
        return self._health.digits_lost

    def __repr__(self) -> str:
        h = self.health
        return (f"Factor(dim={self.dim}, method={h.method!r}, rcond={h.rcond:.3g}, "
                f"digits_lost={h.digits_lost:.1f}, jitter={h.jitter:.3g})")

    # ------------------------------------------------------------ questions
    def matrix(self) -> np.ndarray:
        """The matrix this factor represents, ``L @ L.T`` (a new array)."""
        if self._matrix is not None:
            return self._matrix.copy()
        return self._lower @ self._lower.T

    def logdet(self) -> float:
        """``log det(a + jitter I)`` as ``2 * sum(log diag L)``; never overflows."""
        if self._logdet is None:
            self._logdet = float(2.0 * np.sum(np.log(np.diag(self._lower))))
        return self._logdet

    def _rhs(self, b: Any, name: str) -> tuple[np.ndarray, bool]:
        arr = np.asarray(b, dtype=np.float64)
        if arr.ndim not in (1, 2) or arr.shape[0] != self.dim:
            raise InputError(f"{name}: expected shape ({self.dim},) or ({self.dim}, k), got {arr.shape}")
        if not np.isfinite(arr).all():
            raise InputError(f"{name}: contains NaN or infinite entries")
        return arr, arr.ndim == 1

    def solve(self, b: Any) -> np.ndarray:
        """Solve ``(a + jitter I) x = b`` by two triangular solves (LAPACK ``dpotrs``).

        Parameters
        ----------
        b : array_like, shape (p,) or (p, k)

        Returns
        -------
        x : ndarray, same shape as b
        """
        arr, _ = self._rhs(b, "b")
        x, info = lapack.dpotrs(self._lower_f, arr, lower=1)
        if info != 0:  # pragma: no cover - only on invalid arguments
            raise InputError(f"dpotrs failed with info={info}")
        return x

    def solve_lower(self, b: Any, *, trans: bool = False) -> np.ndarray:
        """Solve ``L x = b`` (or ``L.T x = b`` with ``trans=True``) for columns b."""
        arr, _ = self._rhs(b, "b")
        x, info = lapack.dtrtrs(self._lower_f, arr, lower=1, trans=1 if trans else 0)
        if info != 0:  # pragma: no cover
            raise InputError(f"dtrtrs failed with info={info}")
        return x

    def _row_blocks(self, x: np.ndarray):
        rows = max(1, int(current().block_rows))
        for start in range(0, x.shape[0], rows):
            yield start, min(start + rows, x.shape[0])

    def _work_buffer(self, n_rows: int) -> np.ndarray:
        """One C-ordered block-sized work array for a whole blocked pass (one allocation, not one per
        block: on a virtual machine every fresh multi-megabyte array costs page faults)."""
        return np.empty((min(n_rows, max(1, int(current().block_rows))), self.dim))

    def _solve_rows(self, rows: np.ndarray, *, trans: bool = False) -> np.ndarray:
        """``rows[i] <- L^{-1} rows[i]`` (``L^{-T}`` with ``trans``) in place, for a C-ordered (m, p) array.

        Its transpose is Fortran-ordered, so BLAS-3 ``dtrsm`` solves it where it lies.
        """
        z = blas.dtrsm(1.0, self._lower_f, rows.T, side=0, lower=1, trans_a=1 if trans else 0, diag=0,
                       overwrite_b=1)
        if not np.shares_memory(z, rows):  # pragma: no cover - the wrapper solves C-slices in place
            rows[...] = z.T
        return rows

    def _whiten_block(self, block: np.ndarray, shift: np.ndarray | None, buf: np.ndarray) -> np.ndarray:
        """Rows of ``L^{-1} (x_i - shift)`` for one block, solved in ``buf`` (C-ordered, at least the
        block's shape); returns the filled part of ``buf``."""
        work = buf[: block.shape[0]]
        if shift is not None:
            np.subtract(block, shift, out=work)
        else:
            work[...] = block
        return self._solve_rows(work)

    def _rows(self, x: Any, name: str) -> tuple[np.ndarray, bool]:
        arr = np.asarray(x, dtype=np.float64)
        if arr.ndim == 1:
            arr = arr[None, :]
            one = True
        else:
            one = False
        if arr.ndim != 2 or arr.shape[1] != self.dim:
            raise InputError(f"{name}: expected rows of length {self.dim}, got shape {np.shape(x)}")
        # one cheap pass: the sum is finite exactly when no entry is NaN/inf, barring overflow
        if arr.size and not np.isfinite(np.add.reduce(arr, axis=None)):
            bad = ~np.isfinite(arr)
            if bad.any():
                r, c = np.argwhere(bad)[0]
                raise InputError(f"{name}: row {r}, column {c} is {arr[r, c]}; values must be finite")
        return arr, one

    def whiten(self, x: Any, *, shift: Any = None) -> np.ndarray:
        """Whitened rows ``z_i = L^{-1} (x_i - shift)``.

        Parameters
        ----------
        x : array_like, shape (p,) or (N, p)
        shift : array_like, shape (p,), optional
            Subtracted from every row first (e.g. a mean), block by block.

        Notes
        -----
        Row blocks of ``whiten.current_settings().block_rows`` rows go through one
        BLAS-3 triangular solve each; cost N p^2, extra memory one block.
        """
        arr, one = self._rows(x, "x")
        sh = None if shift is None else np.asarray(shift, dtype=np.float64).reshape(self.dim)
        out = np.empty_like(arr)
        buf = self._work_buffer(arr.shape[0])
        for a, b in self._row_blocks(arr):
            out[a:b] = self._whiten_block(arr[a:b], sh, buf)
        return out[0] if one else out

    def unwhiten(self, z: Any) -> np.ndarray:
        """Rows ``L z_i`` (the inverse map of :meth:`whiten`)."""
        arr, one = self._rows(z, "z")
        out = arr @ self._lower.T
        return out[0] if one else out

    def quad(self, x: Any, *, shift: Any = None) -> np.ndarray | float:
        """Quadratic forms ``(x_i - shift)^T (a + jitter I)^{-1} (x_i - shift)`` per row.

        Computed as the squared norm of the whitened row, block by block, so the
        result is never negative and no N x p temporary is formed.
        """
        arr, one = self._rows(x, "x")
        sh = None if shift is None else np.asarray(shift, dtype=np.float64).reshape(self.dim)
        if one:  # one vector: a single triangular solve, no block machinery
            v = arr[0] if sh is None else arr[0] - sh
            z, _ = lapack.dtrtrs(self._lower_f, v, lower=1)
            return float(z @ z)
        out = self._quad_checked(arr, sh)
        return float(out[0]) if one else out

    def _quad_checked(self, arr: np.ndarray, shift: np.ndarray | None) -> np.ndarray:
        """quad on rows already validated (finite, shape (N, p), float64)."""
        out = np.empty(arr.shape[0])
        buf = self._work_buffer(arr.shape[0])
        for a, b in self._row_blocks(arr):
            z = self._whiten_block(arr[a:b], shift, buf)
            np.einsum("ij,ij->i", z, z, out=out[a:b])
        return out

    def inv_diag(self) -> np.ndarray:
        """Diagonal of ``(a + jitter I)^{-1}``, a reported quantity (computed once).

        Entry j is ``||L^{-1} e_j||^2``. The triangular solve against the identity
        below is the one permitted form: the values are reported (variances,
        contribution denominators), never used as an operator.
        """
        if self._inv_diag is None:
            sd = self.inv_sd()
            with np.errstate(over="ignore", under="ignore"):
                d = sd * sd  # beyond float64 (inf) only where the precision itself is
            d.setflags(write=False)
            self._inv_diag = d
        return self._inv_diag

    def inv_sd(self) -> np.ndarray:
        """Square roots of the diagonal of ``(a + jitter I)^{-1}``, reported (computed once).

        Entry j is ``||L^{-1} e_j||``, a column norm taken without overflow or
        underflow (:func:`whiten._numerics.column_norms`), so it is finite even
        for a column of 1e-160s, whose precision (about 1e+320) is not.
        """
        if self._inv_sd is None:
            p = self.dim
            w = blas.dtrsm(  # inverse-ok: diagonal of the precision is reported, never applied
                1.0, self._lower_f, np.eye(p, order="F"), side=0, lower=1)
            sd = column_norms(w) if self._extreme() else np.sqrt(np.einsum("ij,ij->j", w, w))
            sd.setflags(write=False)
            self._inv_sd = sd
        return self._inv_sd

    def _extreme(self) -> bool:
        """True when some row of L is at a scale whose squares leave float64's normal range."""
        return bool(np.any(pow2_level_scale(np.max(np.abs(self._lower), axis=1)) != 1.0))

    # -------------------------------------------------------------- updates
    def update(self, x: Any) -> Factor:
        """Factor of ``a + x x^T`` (rank-one update, O(p^2)); ``x`` may be rows to add in turn."""
        return self._rank_one(x, +1.0)

    def downdate(self, x: Any) -> Factor:
        """Factor of ``a - x x^T`` (rank-one downdate by hyperbolic rotations).

        Raises
        ------
        NotPositiveDefiniteError
            When the result would not be positive definite; names the pivot.
        """
        return self._rank_one(x, -1.0)

    def _rank_one(self, x: Any, sign: float) -> Factor:
        rows, _ = self._rows(x, "x")
        lt = np.array(self._lower.T, order="C")  # upper factor R = L^T; rows of R are contiguous
        p = self.dim
        for v in rows:
            w = v.copy()
            for k in range(p):
                rkk = lt[k, k]
                r2 = rkk * rkk + sign * w[k] * w[k]
                if not (r2 > (64 * EPS * rkk) ** 2) or not np.isfinite(r2):
                    raise NotPositiveDefiniteError(
                        f"downdate would lose positive definiteness at pivot {_name(self._names, k)} "
                        f"(remaining pivot {r2:.3g} vs {rkk * rkk:.3g} before); the rows removed were "
                        "not part of the matrix, or the window is too small for its dimension",
                        pivot=k, value=float(r2))
                r = math.sqrt(r2)
                c = r / rkk
                s = w[k] / rkk
                lt[k, k] = r
                if k + 1 < p:
                    rest = lt[k, k + 1:]
                    rest += sign * s * w[k + 1:]
                    rest /= c
                    w[k + 1:] = c * w[k + 1:] - s * rest
        lower = lt.T
        h = self.health
        return Factor(lower, health_of(lower, h.jitter, h.jitter_relative, "updated"), self._names)

    # ------------------------------------------------------------ subsets
    def subset(self, idx: Sequence[int] | np.ndarray) -> Factor:
        """Factor of the principal sub-matrix ``m[idx][:, idx]`` (refactored, no jitter).

        A principal sub-matrix of a positive definite matrix is positive definite
        and no worse conditioned, so no jitter or warning is needed.
        """
        ix = np.asarray(idx, dtype=np.intp)
        if self._extreme():  # form the sub-matrix from rows equilibrated by powers of two, map back exactly
            c = pow2_level_scale(np.max(np.abs(self._lower), axis=1))[ix]
            ls = self._lower[ix] * c[:, None]
            m = ls @ ls.T
        else:
            c = None
            m = self.matrix()[np.ix_(ix, ix)]
        lower, _, info, rc_s, anorm = factor_scaled(m)
        if info != 0:  # rounding only; cannot happen for a well-formed factor
            raise NotPositiveDefiniteError(f"sub-matrix failed to factor at pivot {info - 1}", pivot=info - 1)
        names = None if self._names is None else [self._names[i] for i in ix]
        h = _PendingHealth(rc_s, anorm, self.jitter, self._health.jitter_relative, self._health.method)
        if c is not None:
            return Factor(lower, h, names, _copy=False).rescaled(1.0 / c)
        return Factor(lower, h, names, matrix=m, _copy=False)
