"""Covariances with structure, answering the same questions as a :class:`Factor`.

Calibration loops often know the shape of their error covariance: independent
noise (:func:`diagonal`), independent noise plus a few shared error sources
(:func:`low_rank_plus_diagonal`), groups of instruments that do not talk to
each other (:func:`block_diagonal`), or a sensor grid times a time axis
(:func:`kronecker`). Each constructor factors only the small pieces and
returns an object with the operations of a :class:`~whiten.Factor` under the
same names and keywords: ``dim``, ``logdet()``, ``solve(b)``,
``whiten(x, shift=...)``, ``quad(x, shift=...)`` and ``health``, plus
``dense()`` (and its alias ``matrix()``) for small cases.

None of them ever forms an n x n matrix unless ``dense()`` is asked for, and
none forms an inverse: every ``S^{-1} b`` is a solve with factors of the pieces.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from .._settings import current
from ..errors import InputError, NotPositiveDefiniteError
from .factor import Factor, FactorHealth, cholesky

__all__ = [
    "StructuredCovariance",
    "DiagonalCovariance",
    "LowRankPlusDiagonal",
    "BlockDiagonalCovariance",
    "KroneckerCovariance",
    "diagonal",
    "low_rank_plus_diagonal",
    "block_diagonal",
    "kronecker",
]

# dense() refuses beyond this many entries (8 bytes each): 400 MB.
_DENSE_MAX_ENTRIES = 50_000_000
# Row blocks hold at most this many numbers, so a row of length 200000 does not
# turn block_rows=8192 into a 13 GB temporary.
_BLOCK_ENTRIES = 1 << 21


def _digits(rcond: float) -> float:
    return math.inf if rcond <= 0 else max(0.0, -math.log10(rcond))


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
    def names(self) -> list[str] | None:
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


# ---------------------------------------------------------------- diagonal
class DiagonalCovariance(StructuredCovariance):
    """``diag(d)``: independent errors. Build with :func:`diagonal`."""

    def __init__(self, d: Any, names: Sequence[str] | None = None):
        self._d = _positive_vector(d, "d")
        self._sd = np.sqrt(self._d)
        self._names = None if names is None else [str(n) for n in names]
        if self._names is not None and len(self._names) != self._d.size:
            raise InputError(f"names: expected {self._d.size} names, got {len(self._names)}")
        # A diagonal matrix scaled to unit diagonal is the identity: no digits lost.
        rc = float(self._d.min() / self._d.max())
        self._health = FactorHealth(rc, 1.0, 0.0, 0.0, 0.0, "diagonal")

    @property
    def dim(self) -> int:
        return self._d.size

    @property
    def variances(self) -> np.ndarray:
        return self._d

    @property
    def health(self) -> FactorHealth:
        return self._health

    def logdet(self) -> float:
        """``sum(log d)``; never overflows."""
        return float(np.sum(np.log(self._d)))

    def _solve_cols(self, b: np.ndarray) -> np.ndarray:
        return b / self._d[:, None]

    def _whiten_rows(self, rows: np.ndarray) -> np.ndarray:
        return rows / self._sd

    def _dense(self) -> np.ndarray:
        return np.diag(self._d)


def diagonal(d: Any, *, names: Sequence[str] | None = None) -> DiagonalCovariance:
    """Covariance of independent errors with variances ``d``.

    Parameters
    ----------
    d : array_like, shape (n,)
        Positive, finite variances.
    names : sequence of str, optional

    Returns
    -------
    DiagonalCovariance

    Raises
    ------
    InputError
        Not 1-D, empty or not finite.
    NotPositiveDefiniteError
        A variance is zero or negative (names its position).

    Notes
    -----
    Every operation costs O(n) per row. ``health.digits_lost`` is 0: solves
    with a diagonal are exact to rounding whatever the spread of ``d``.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> s = whiten.diagonal([4.0, 1e-20])
    >>> bool(np.isclose(s.quad([2.0, 1e-10]), 2.0))
    True
    """
    return DiagonalCovariance(d, names)


# ------------------------------------------------------- low rank + diagonal
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
        self._health = FactorHealth(rc, rc_s, _digits(rc_s), 0.0, 0.0, "low-rank+diagonal")

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


# ------------------------------------------------------------ block diagonal
class BlockDiagonalCovariance(StructuredCovariance):
    """Independent blocks, each a Factor or a structured covariance. Build with :func:`block_diagonal`."""

    def __init__(self, blocks: Sequence[Any]):
        if isinstance(blocks, np.ndarray) or not isinstance(blocks, (list, tuple)) or len(blocks) == 0:
            raise InputError("blocks: expected a non-empty list of matrices, Factors or structured covariances")
        parts = []
        for i, blk in enumerate(blocks):
            if isinstance(blk, (Factor, StructuredCovariance)):
                parts.append(blk)
            else:
                arr = np.asarray(blk, dtype=np.float64) if not hasattr(blk, "columns") else blk
                if np.ndim(arr) == 0:
                    raise InputError(f"blocks[{i}]: a scalar; pass [[v]] for a 1 x 1 block")
                try:
                    parts.append(cholesky(arr))
                except (InputError, NotPositiveDefiniteError) as exc:
                    raise type(exc)(f"blocks[{i}]: {exc}") from None
        self._parts = parts
        sizes = [p.dim for p in parts]
        self._offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
        names = [p.names for p in parts]
        self._names = sum(names, []) if all(n is not None for n in names) else None
        hs = [p.health for p in parts]
        self._health = FactorHealth(
            min(h.rcond for h in hs), min(h.rcond_scaled for h in hs), max(h.digits_lost for h in hs),
            max(h.jitter for h in hs), max(h.jitter_relative for h in hs),
            f"block-diagonal({len(parts)} blocks)")

    @property
    def dim(self) -> int:
        return int(self._offsets[-1])

    @property
    def blocks(self) -> list:
        return list(self._parts)

    @property
    def health(self) -> FactorHealth:
        """Worst of the blocks' health (smallest rcond, most digits lost, largest jitter)."""
        return self._health

    def _slices(self):
        for p, a, b in zip(self._parts, self._offsets[:-1], self._offsets[1:]):
            yield p, int(a), int(b)

    def logdet(self) -> float:
        return float(sum(p.logdet() for p in self._parts))

    def _solve_cols(self, b: np.ndarray) -> np.ndarray:
        out = np.empty_like(b)
        for p, a, e in self._slices():
            out[a:e] = p.solve(b[a:e])
        return out

    def _whiten_rows(self, rows: np.ndarray) -> np.ndarray:
        out = np.empty_like(rows)
        for p, a, e in self._slices():
            out[:, a:e] = p.whiten(rows[:, a:e])
        return out

    def _quad_rows(self, rows: np.ndarray) -> np.ndarray:
        out = np.zeros(rows.shape[0])
        for p, a, e in self._slices():
            out += p.quad(rows[:, a:e])
        return out

    def _dense(self) -> np.ndarray:
        m = np.zeros((self.dim, self.dim))
        for p, a, e in self._slices():
            m[a:e, a:e] = p.matrix()
        return m


def block_diagonal(blocks: Sequence[Any]) -> BlockDiagonalCovariance:
    """Covariance of independent groups of measurements (one block per group).

    Parameters
    ----------
    blocks : list of array_like, Factor or structured covariance
        Matrices are factored with :func:`whiten.cholesky` (jitter disclosed as
        usual); Factors and structured covariances are used as they are.

    Returns
    -------
    BlockDiagonalCovariance

    Raises
    ------
    InputError, NotPositiveDefiniteError
        From the block that fails, named by its position.

    Notes
    -----
    Each operation runs block by block: cost is the sum of the blocks' costs.
    ``health`` reports the worst block; the condition of the whole can be worse
    than the worst block when the blocks' scales differ (it is at least as
    large as each block's).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> s = whiten.block_diagonal([np.eye(2) * 4.0, [[1.0]]])
    >>> bool(np.isclose(s.quad([2.0, 2.0, 1.0]), 3.0))
    True
    """
    return BlockDiagonalCovariance(blocks)


# ----------------------------------------------------------------- Kronecker
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
        self._health = FactorHealth(rc, rc_s, _digits(rc_s), jit, max(ha.jitter_relative, hb.jitter_relative),
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
