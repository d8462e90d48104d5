"""Cholesky factor of a symmetric positive definite matrix: factor once, then ask.

:func:`cholesky` validates a matrix, factors it (with disclosed jitter only when
the plain factorization fails) and returns a :class:`Factor`, which owns every
operation the rest of the library needs: ``solve``, ``whiten``, ``quad``,
``logdet``, rank-one ``update``/``downdate``, and the diagonal of the inverse as
a *reported* quantity. Layers above never call LAPACK themselves.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any, Sequence

import numpy as np
from scipy.linalg import blas, lapack

from .._settings import current
from .._validate import as_square
from .._warn import warn
from ..errors import ConditioningWarning, InputError, JitterWarning, NotPositiveDefiniteError

__all__ = ["Factor", "FactorHealth", "cholesky"]

_EPS = float(np.finfo(np.float64).eps)


@dataclasses.dataclass(frozen=True)
class FactorHealth:
    """Numerical health of a factorization.

    Attributes
    ----------
    rcond : float
        LAPACK ``dpocon`` estimate of ``1 / cond_1(m)`` for the matrix actually
        factored, ``m = a + jitter * I``.
    rcond_scaled : float
        The same estimate for ``m`` scaled to unit diagonal. Cholesky solves are
        accurate relative to this one (van der Sluis, 1969), so it drives
        ``digits_lost``: a covariance such as ``diag(1, 1e-11)`` has a tiny
        ``rcond`` but loses no digits.
    digits_lost : float
        ``log10(1 / rcond_scaled)``: decimal digits a solve may lose.
    jitter : float
        Absolute amount added to the diagonal (0.0 when none).
    jitter_relative : float
        ``jitter / mean(diag(a))``.
    method : str
        ``"cholesky"``, ``"cholesky+jitter"``, ``"updated"`` or ``"given"``.
    """

    rcond: float
    rcond_scaled: float
    digits_lost: float
    jitter: float
    jitter_relative: float
    method: str

    @property
    def digits_trusted(self) -> float:
        """Roughly how many significant decimal digits a solve keeps."""
        return max(0.0, -math.log10(_EPS) - self.digits_lost)

    def to_dict(self) -> dict:
        return dataclasses.asdict(self) | {"digits_trusted": self.digits_trusted}


def _pow2_scale(diag: np.ndarray) -> np.ndarray:
    """Powers of two close to diag**-0.5 (1 where diag <= 0).

    Scaling by powers of two is exact in binary floating point, so the factor of
    the scaled matrix maps back to the factor of the original without rounding.
    """
    d = np.where(diag > 0, diag, 1.0)
    return np.exp2(-np.round(0.5 * np.log2(d)))


def _pocon(lower: np.ndarray, anorm: float) -> float:
    if anorm == 0 or not np.isfinite(anorm):
        return 0.0
    rc, info = lapack.dpocon(lower, anorm, uplo="L")
    return float(rc) if info == 0 else 0.0


def _digits_lost(rcond: float) -> float:
    return math.inf if rcond <= 0 else max(0.0, -math.log10(rcond))


def _scale_columns_and_norms(ms: np.ndarray, s: np.ndarray) -> tuple[float, float]:
    """Scale the columns of ``ms = S m`` by s in place (so ``ms = S m S``), in column
    slabs, and return the 1-norms of ``m`` and of ``S m S`` read off each slab
    while it is in cache.

    No p x p temporary and no BLAS call: numpy and scipy may each load their
    own OpenBLAS, and a numpy matrix-vector product just before ``dpotrf``
    leaves numpy's worker threads spinning on the cores the factorization
    needs (measured: ``dpotrf`` at p=2000 twice as slow right after one).
    ``|m_ij| = |ms_ij| / (s_i s_j)`` exactly, since s holds powers of two.
    """
    p = ms.shape[0]
    width = max(1, (1 << 17) // max(p, 1))  # slabs of about 1 MB
    inv_s = 1.0 / s
    anorm = anorm_s = 0.0
    for j0 in range(0, p, width):
        j1 = min(p, j0 + width)
        slab = ms[:, j0:j1]
        slab *= s[None, j0:j1]
        blk = np.abs(slab)
        anorm_s = max(anorm_s, float(blk.sum(axis=0).max()))
        blk *= inv_s[:, None]
        anorm = max(anorm, float((blk.sum(axis=0) * inv_s[j0:j1]).max()))
    return anorm, anorm_s


def _factor_scaled(m: np.ndarray):
    """Factor m through its (power-of-two) unit-diagonal scaling; m is not modified.

    Returns ``(lower, scale, info, rcond_scaled, anorm)``: ``lower`` is the factor
    of m (None on failure), ``scale`` the diagonal scaling s with m_s = S m S,
    ``anorm`` the 1-norm of m (for the unscaled condition estimate, which is
    computed only when asked for). The scaled copy is factored in place, so the
    only n x n array made is that copy.
    """
    s = _pow2_scale(np.diag(m).copy())
    ms = np.multiply(m, s[:, None], order="F")
    anorm, anorm_s = _scale_columns_and_norms(ms, s)
    c, info = lapack.dpotrf(ms, lower=1, clean=1, overwrite_a=1)
    if info != 0:
        return None, s, int(info), 0.0, anorm
    rc_s = _pocon(c, anorm_s)
    c /= s[:, None]  # exact: s holds powers of two
    return c, s, 0, rc_s, anorm


@dataclasses.dataclass(frozen=True)
class _PendingHealth:
    """A factor's health before the unscaled condition estimate is made.

    ``digits_lost`` (from the scaled estimate, which every factorization makes)
    is known at once; the unscaled ``rcond`` is a reported quantity, so its
    ``dpocon`` (a fifth of a p=2000 factorization) runs on first request.
    """

    rcond_scaled: float
    anorm: float
    jitter: float
    jitter_relative: float
    method: str

    @property
    def digits_lost(self) -> float:
        return _digits_lost(self.rcond_scaled)

    def resolve(self, lower: np.ndarray) -> FactorHealth:
        return FactorHealth(_pocon(lower, self.anorm), self.rcond_scaled, self.digits_lost,
                            self.jitter, self.jitter_relative, self.method)


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
    names : list of str or None
    dim : int

    Examples
    --------
    >>> import numpy as np, whiten
    >>> a = np.array([[4.0, 2.0], [2.0, 3.0]])
    >>> f = whiten.cholesky(a)
    >>> bool(np.allclose(a @ f.solve([1.0, 2.0]), [1.0, 2.0]))
    True
    """

    __slots__ = ("_lower", "_lower_f", "_health", "_names", "_matrix", "_inv_diag", "_logdet")

    def __init__(self, lower: np.ndarray, health: FactorHealth, names: Sequence[str] | None = None,
                 matrix: np.ndarray | None = None, *, _copy: bool = True):
        # one Fortran-ordered copy serves both users and LAPACK/BLAS; with _copy=False the
        # library hands over arrays it made for this factor alone (no copies at all)
        lower = np.array(lower, dtype=np.float64, order="F", copy=True) if _copy else np.asfortranarray(lower)
        lower.setflags(write=False)
        self._lower = lower
        self._lower_f = lower
        self._health = health
        self._names = list(names) if names is not None else None
        if self._names is not None and len(self._names) != lower.shape[0]:
            raise InputError(f"names: expected {lower.shape[0]} names, got {len(self._names)}")
        if matrix is not None:
            matrix = np.array(matrix, dtype=np.float64, copy=True) if _copy else matrix
            matrix.setflags(write=False)
        self._matrix = matrix
        self._inv_diag = None
        self._logdet = None

    # ------------------------------------------------------------------ build
    @classmethod
    def from_lower(cls, lower: Any, *, names: Sequence[str] | None = None, jitter: float = 0.0) -> "Factor":
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
        d = np.diag(arr)
        if np.any(d <= 0):
            k = int(np.flatnonzero(d <= 0)[0])
            raise NotPositiveDefiniteError(
                f"lower: diagonal entry {_name(names, k)} is {d[k]:.3g}; a Cholesky factor has a positive diagonal",
                pivot=k, value=float(d[k]))
        return cls(arr, _health_of(arr, jitter, 0.0, "given"), names)

    # ------------------------------------------------------------ attributes
    @property
    def lower(self) -> np.ndarray:
        return self._lower

    @property
    def dim(self) -> int:
        return self._lower.shape[0]

    @property
    def names(self) -> list[str] | None:
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
        Row blocks of ``whiten.get_options().block_rows`` rows go through one
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
            p = self.dim
            w = blas.dtrsm(1.0, self._lower_f, np.eye(p, order="F"), side=0, lower=1)  # inverse-ok: diagonal of the precision is reported, never applied
            d = np.einsum("ij,ij->j", w, w)
            d.setflags(write=False)
            self._inv_diag = d
        return self._inv_diag

    # -------------------------------------------------------------- updates
    def update(self, x: Any) -> "Factor":
        """Factor of ``a + x x^T`` (rank-one update, O(p^2)); ``x`` may be rows to add in turn."""
        return self._rank_one(x, +1.0)

    def downdate(self, x: Any) -> "Factor":
        """Factor of ``a - x x^T`` (rank-one downdate by hyperbolic rotations).

        Raises
        ------
        NotPositiveDefiniteError
            When the result would not be positive definite; names the pivot.
        """
        return self._rank_one(x, -1.0)

    def _rank_one(self, x: Any, sign: float) -> "Factor":
        rows, _ = self._rows(x, "x")
        lt = np.array(self._lower.T, order="C")  # upper factor R = L^T; rows of R are contiguous
        p = self.dim
        for v in rows:
            w = v.copy()
            for k in range(p):
                rkk = lt[k, k]
                r2 = rkk * rkk + sign * w[k] * w[k]
                if not (r2 > (64 * _EPS * rkk) ** 2) or not np.isfinite(r2):
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
        return Factor(lower, _health_of(lower, h.jitter, h.jitter_relative, "updated"), self._names)

    # ------------------------------------------------------------ subsets
    def subset(self, idx: Sequence[int]) -> "Factor":
        """Factor of the principal sub-matrix ``m[idx][:, idx]`` (refactored, no jitter).

        A principal sub-matrix of a positive definite matrix is positive definite
        and no worse conditioned, so no jitter or warning is needed.
        """
        idx = np.asarray(idx, dtype=np.intp)
        m = self.matrix()[np.ix_(idx, idx)]
        lower, _, info, rc_s, anorm = _factor_scaled(m)
        if info != 0:  # rounding only; cannot happen for a well-formed factor
            raise NotPositiveDefiniteError(f"sub-matrix failed to factor at pivot {info - 1}", pivot=info - 1)
        names = None if self._names is None else [self._names[i] for i in idx]
        h = _PendingHealth(rc_s, anorm, self.jitter, self._health.jitter_relative, self._health.method)
        return Factor(lower, h, names, matrix=m, _copy=False)


def _health_of(lower: np.ndarray, jitter: float, jitter_rel: float, method: str) -> FactorHealth:
    """Condition estimates for a factor whose matrix is L L^T (O(p^2) beyond the product)."""
    m = lower @ lower.T
    rc = _pocon(np.asfortranarray(lower), float(np.abs(m).sum(axis=0).max()))
    s = _pow2_scale(np.diag(m).copy())
    ls = lower * s[:, None]
    ms = m * s[:, None] * s[None, :]
    rc_s = _pocon(np.asfortranarray(ls), float(np.abs(ms).sum(axis=0).max()))
    return FactorHealth(rc, rc_s, _digits_lost(rc_s), float(jitter), float(jitter_rel), method)


def _min_eig(ms: np.ndarray) -> float:
    from scipy.linalg import eigvalsh

    return float(eigvalsh(ms, subset_by_index=[0, 0], check_finite=False)[0])


def cholesky(a: Any, *, jitter: str | bool | float = "auto", names: Sequence[str] | None = None) -> Factor:
    """Cholesky factor of a symmetric positive (semi-)definite matrix, with disclosed repair.

    Parameters
    ----------
    a : array_like or pandas.DataFrame, shape (p, p)
        Symmetric to ``whiten.get_options().symmetry_rtol`` relative to ``max|a|``.
        A DataFrame's column names become the factor's ``names``.
    jitter : {"auto", False} or float
        ``"auto"`` (default): factor ``a`` as given; only if that fails, add an
        increasing ladder of diagonal jitter ``jitter_start * mean(diag a)``,
        ... up to ``jitter_ceiling * mean(diag a)`` (see :func:`whiten.options`),
        with a :class:`~whiten.errors.JitterWarning` giving the amount.
        ``False``: never add jitter; failure raises. A float: add exactly this
        absolute amount to the diagonal (recorded, no warning).
    names : sequence of str, optional
        Variable names used in messages and results.

    Returns
    -------
    Factor

    Raises
    ------
    InputError
        Not square, empty, non-finite, non-numeric or not symmetric.
    NotPositiveDefiniteError
        Clearly indefinite (smallest eigenvalue of the unit-diagonal matrix below
        ``-indefinite_tol``), a negative variance, ``jitter=False`` on a singular
        matrix, or still failing at the jitter ceiling.

    Warns
    -----
    JitterWarning
        When jitter was added (amount, relative amount, condition afterwards).
    ConditioningWarning
        When ``digits_lost`` exceeds ``whiten.get_options().digits_warn``.

    Notes
    -----
    Definiteness is judged on the matrix scaled to unit diagonal (by powers of
    two, which is exact), so a valid covariance with a wide dynamic range such
    as ``diag(1, 1e-11)`` factors without jitter or warning. Cost: p^3/3 flops
    for the factorization and O(p^2) for each condition estimate (``dpocon``);
    the eigenvalue check runs only when the plain factorization fails.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> f = whiten.cholesky(np.diag([1.0, 1e-11]))
    >>> f.jitter, bool(f.digits_lost < 1)
    (0.0, True)
    """
    opts = current()
    m, frame_names = as_square(a, name="a")
    names = list(names) if names is not None else frame_names
    if names is not None and len(names) != m.shape[0]:
        raise InputError(f"names: expected {m.shape[0]} names, got {len(names)}")
    diag = np.diag(m)
    if np.any(diag < 0):
        k = int(np.argmin(diag))
        raise NotPositiveDefiniteError(
            f"a: diagonal entry {_name(names, k)} is negative ({diag[k]:.3g}); a covariance has "
            "non-negative variances. Check the sign convention or the input",
            pivot=k, value=float(diag[k]))
    mean_diag = float(diag.mean())
    if mean_diag == 0:
        raise NotPositiveDefiniteError("a: is the zero matrix; nothing to factor", pivot=0, value=0.0)

    if jitter is not False and jitter != "auto":
        if isinstance(jitter, str) or not np.isfinite(float(jitter)) or float(jitter) < 0:
            raise InputError(f"jitter: expected 'auto', False or a non-negative float, got {jitter!r}")
        amount = float(jitter)
        mj = m + amount * np.eye(m.shape[0])
        lower, _, info, rc_s, anorm = _factor_scaled(mj)
        if info != 0:
            raise NotPositiveDefiniteError(
                f"a + {amount:.3g}*I is not positive definite (failed at pivot {_name(names, info - 1)}); "
                "use a larger jitter or jitter='auto'", pivot=info - 1)
        return _finish(lower, mj, rc_s, anorm, amount, amount / mean_diag, "cholesky" if amount == 0 else "cholesky+jitter",
                       names, opts)

    lower, sc, info, rc_s, anorm = _factor_scaled(m)
    if info == 0:
        return _finish(lower, m, rc_s, anorm, 0.0, 0.0, "cholesky", names, opts)

    # The plain factorization failed at pivot info-1. Indefinite or merely singular?
    pivot = info - 1
    ms = m * sc[:, None] * sc[None, :]
    lam = _min_eig(ms)
    lam_rel = lam / float(np.diag(ms).mean())
    zero_var = [k for k in range(m.shape[0]) if diag[k] == 0]
    zv = f"; zero variance in {', '.join(_name(names, k) for k in zero_var)}" if zero_var else ""
    if lam_rel < -opts.indefinite_tol:
        raise NotPositiveDefiniteError(
            f"a: is indefinite: the unit-diagonal matrix has eigenvalue {lam_rel:.3g} "
            f"(tolerance {-opts.indefinite_tol:g}); factorization failed at pivot {_name(names, pivot)}. "
            "Jitter would hide a real error here: check how the matrix was built "
            "(pairwise-deleted covariances and hand-edited entries are common causes)",
            pivot=pivot, value=lam_rel)
    if jitter is False:
        raise NotPositiveDefiniteError(
            f"a: is singular to working precision (positive semi-definite, smallest eigenvalue "
            f"{lam_rel:.3g} of the unit-diagonal matrix; failed at pivot {_name(names, pivot)}{zv}). "
            "Use jitter='auto' to repair with disclosure, whiten.pivoted_cholesky(a) to find the "
            "dependent variables, or a shrinkage estimate",
            pivot=pivot, value=lam_rel)
    rel = opts.jitter_start
    while rel <= opts.jitter_ceiling * (1 + 1e-12):
        amount = rel * mean_diag
        mj = m + amount * np.eye(m.shape[0])
        lower, _, info, rc_s, anorm = _factor_scaled(mj)
        if info == 0:
            f = _finish(lower, mj, rc_s, anorm, amount, rel, "cholesky+jitter", names, opts, conditioning_warning=False)
            warn(JitterWarning,
                 f"matrix is singular to working precision (failed at pivot {_name(names, pivot)}{zv}); "
                 f"added jitter {amount:.3g} to the diagonal ({rel:.1e} of the mean diagonal). "
                 f"Condition after repair: rcond {f.rcond:.3g}, about {f.digits_lost:.1f} digits lost. "
                 "Results describe a + jitter*I; find dependent variables with whiten.pivoted_cholesky")
            return f
        rel *= opts.jitter_factor
    raise NotPositiveDefiniteError(
        f"a: could not be factored even with jitter {opts.jitter_ceiling:.1e} of the mean diagonal "
        f"(failed at pivot {_name(names, pivot)}{zv}). Remove dependent variables (see "
        "whiten.pivoted_cholesky), use a shrinkage estimate, or raise whiten.options(jitter_ceiling=...)",
        pivot=pivot, value=lam_rel)


def _finish(lower, m, rc_s, anorm, amount, rel, method, names, opts, conditioning_warning=True) -> Factor:
    h = _PendingHealth(rc_s, anorm, float(amount), float(rel), method)
    f = Factor(lower, h, names, matrix=m, _copy=False)  # both arrays were made for this factor
    if conditioning_warning and h.digits_lost > opts.digits_warn:
        warn(ConditioningWarning,
             f"matrix is ill-conditioned: rcond {rc_s:.3g} (unit-diagonal scaling), about "
             f"{h.digits_lost:.1f} of ~16 significant digits may be lost in solves "
             f"(threshold {opts.digits_warn:g}). Consider removing near-redundant variables "
             "(whiten.pivoted_cholesky names them) or a shrinkage estimate")
    return f
