"""QR building blocks: equilibration, Householder and blocked (tall-skinny) QR, triangles, rank.

Nothing here forms an inverse, and the R factors are those of the data
(Householder, LAPACK ``dgeqrf``), so condition numbers are never squared. The
one Gram matrix (:func:`gram`, and the first pass of :func:`cholqr2_r`) is a
stepping stone that the callers correct or only report.

These are the only QR and BLAS-3 kernels of the package: the regression,
likelihood and streaming code and the dask engine call them instead of
LAPACK, so every QR in whiten uses one workspace rule and one sign rule.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator

import numpy as np
from scipy.linalg import blas, lapack

from ..errors import InputError
from .triangular import condition_2, tri_rcond, tri_solve

__all__ = [
    "cholqr2_r",
    "pow2_column_scale",
    "householder_thin",
    "r_of",
    "qr_r",
    "upper_r",
    "pivoted_qr_r",
    "gram",
    "tsqr_r",
    "sequential_dependence",
    "greedy_rank_drop",
    "tri_solve",
    "tri_rcond",
    "condition_2",
    "CHOLQR2_MIN_RCOND",
]


def pow2_column_scale(norms: np.ndarray) -> np.ndarray:
    """Powers of two ``s_j`` with ``s_j * norms_j`` in [1/sqrt 2, sqrt 2] (1 for a zero column).

    Column equilibration by powers of two is exact in binary arithmetic: the
    scaled design holds the same digits as the user's, and the coefficients map
    back without rounding. Householder QR is column-scaling invariant in exact
    arithmetic, but the scaled problem makes the rank tolerance and the
    condition number meaningful (van der Sluis, 1969).
    """
    safe = np.where((norms > 0) & np.isfinite(norms), norms, 1.0)
    return np.exp2(-np.round(np.log2(safe)))


def _geqrf(a: np.ndarray, overwrite: bool):
    """LAPACK dgeqrf with the optimal workspace (the wrappers' default is the unblocked minimum)."""
    _, _, work, info = lapack.dgeqrf(a, lwork=-1)
    lwork = max(1, int(work[0])) if info == 0 else max(1, a.shape[1])
    qr, tau, _, info = lapack.dgeqrf(a, lwork=lwork, overwrite_a=1 if overwrite else 0)
    if info != 0:  # pragma: no cover - invalid arguments only
        raise RuntimeError(f"dgeqrf info={info}")
    return qr, tau


def householder_thin(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Thin Householder QR ``a = q @ r`` (q: (n, p) orthonormal columns, r: (p, p) upper).

    Requires n >= p. ``a`` is not modified. Cost 4 n p^2 flops (factor plus
    forming the thin Q).
    """
    n, p = a.shape
    fa = np.asfortranarray(a)
    qr, tau = _geqrf(fa, overwrite=fa is not a)
    r = np.triu(qr[:p, :p])
    _, work, info = lapack.dorgqr(qr[:, :p], tau, lwork=-1)
    lwork = max(1, int(work[0])) if info == 0 else max(1, p)
    q, _, info = lapack.dorgqr(qr[:, :p], tau, lwork=lwork, overwrite_a=1)
    if info != 0:  # pragma: no cover
        raise RuntimeError(f"dorgqr info={info}")
    return q, r


def r_of(block: np.ndarray) -> np.ndarray:
    """Upper-triangular (or trapezoidal) R of a block, shape (min(m, p), p).

    ``block`` should be Fortran-ordered; it is overwritten (a C-ordered block is
    copied by the LAPACK wrapper and left alone).
    """
    m, p = block.shape
    qr, _ = _geqrf(block, overwrite=True)
    k = min(m, p)
    return np.triu(qr[:k, :])


def qr_r(a: np.ndarray) -> np.ndarray:
    """R of a Householder QR of ``a`` (not modified), shape (min(m, p), p); signs as LAPACK leaves them."""
    return r_of(np.array(a, dtype=np.float64, order="F", copy=True))


def upper_r(a: np.ndarray) -> np.ndarray:
    """R (k x p, k = min(rows, p)) of a Householder QR of ``a`` (overwritten), unsigned.

    Uses the LAPACK wrapper's default (minimal) workspace, as the streaming
    scatter states always have: the workspace decides the blocking of
    ``dgeqrf`` and with it the last bits of R, and stored states must merge
    with new ones bit for bit.

    Raises
    ------
    InputError
        Only if LAPACK rejects its arguments.
    """
    m, p = a.shape
    k = min(m, p)
    if k == 0:
        return np.zeros((0, p))
    qr, _tau, _work, info = lapack.dgeqrf(a, overwrite_a=1)
    if info != 0:  # pragma: no cover - only on invalid arguments
        raise InputError(f"dgeqrf failed with info={info}")
    return np.triu(qr[:k])


def pivoted_qr_r(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Column-pivoted Householder QR ``a P = Q R`` (LAPACK ``dgeqp3``): ``(R, perm)``.

    ``R`` has shape (min(m, p), p) with ``|r_00| >= |r_11| >= ...``; ``perm`` holds
    0-based column indices (``a[:, perm] = Q R``). ``a`` is not modified; Q is not formed.
    """
    m, p = a.shape
    fa = np.array(a, dtype=np.float64, order="F", copy=True)
    _, _, _, work, info = lapack.dgeqp3(fa, lwork=-1)
    lwork = max(1, int(work[0])) if info == 0 else max(1, 3 * (p + 1))
    qr, jpvt, _tau, _, info = lapack.dgeqp3(fa, lwork=lwork, overwrite_a=1)
    if info != 0:  # pragma: no cover - invalid arguments only
        raise RuntimeError(f"dgeqp3 info={info}")
    k = min(m, p)
    return np.triu(qr[:k, :]), np.asarray(jpvt, dtype=np.intp) - 1


def gram(y: np.ndarray) -> np.ndarray:
    """``y.T @ y`` (symmetric, both triangles) by BLAS ``dsyrk``, for a C-ordered ``y`` of shape (m, p).

    ``y.T`` of a C-ordered array is Fortran-ordered, so ``dsyrk`` reads it without a copy.
    """
    s = blas.dsyrk(1.0, y.T, trans=0, lower=0)
    return np.triu(s) + np.triu(s, 1).T


def tsqr_r(blocks: Iterator[np.ndarray], p: int, *, fan_in: int = 32) -> np.ndarray:
    """R factor (p x p) of a tall matrix given as an iterator of row blocks.

    Each block is reduced to its own R (Householder, BLAS-3), and the small R's
    are stacked and reduced again whenever ``fan_in`` of them have accumulated:
    the tall-skinny QR of Demmel, Grigori, Hoemmen & Langou (2012). Memory is
    one block plus ``fan_in`` p x p triangles; the result equals (up to the
    signs of its rows) the R of a Householder QR of the whole matrix, with the
    same backward stability. Blocks may be overwritten.
    """
    pending: list[np.ndarray] = []
    for blk in blocks:
        if blk.shape[0] == 0:
            continue
        pending.append(r_of(np.asfortranarray(blk)))
        if len(pending) >= fan_in:
            pending = [r_of(np.asfortranarray(np.vstack(pending)))]
    if not pending:
        return np.zeros((p, p))
    r = r_of(np.asfortranarray(np.vstack(pending))) if len(pending) > 1 else pending[0]
    if r.shape[0] < p:  # fewer rows than columns overall
        r = np.vstack([r, np.zeros((p - r.shape[0], p))])
    # fix signs so that diag(R) >= 0 (makes R unique and comparable across paths)
    sgn = np.where(np.diag(r) < 0, -1.0, 1.0)
    return r * sgn[:, None]


#: CholeskyQR2 is used only when the equilibrated Gram matrix has rcond above this
#: (condition of the data below ~1e6, well inside the ~eps^-1/2 limit of Yamamoto et al., 2015)
CHOLQR2_MIN_RCOND = 1e-12


def cholqr2_r(blocks: Callable[[], Iterator[np.ndarray]], p: int) -> np.ndarray | None:
    """R factor (p x p) of a tall matrix by CholeskyQR2, or None when it does not apply.

    ``blocks()`` must return a fresh iterator over C-ordered row blocks each time
    it is called (two passes are made). Pass 1 accumulates the Gram matrix of the
    blocks (BLAS ``dsyrk``); its Cholesky factor ``R1`` (after exact power-of-two
    equilibration) gives ``Q1 = A R1^{-1}``. Pass 2 forms ``Q1`` block by block
    (``dtrsm``) and accumulates ``Q1^T Q1``, whose Cholesky factor ``R2`` corrects
    ``R1``: ``R = R2 R1``. Fukaya, Nakatsukasa, Yanagisawa & Yamamoto (2014) and
    Yamamoto, Nakatsukasa, Yanagisawa & Fukaya (2015) show that for
    ``cond(A) < ~eps^-1/2`` the result is as accurate as a Householder R
    (orthogonality and residual ``||A - QR||`` of order eps): the Gram matrix is
    only a stepping stone, corrected from the data in the second pass, so the
    squared condition number does not reach the answer. Here it is used only when
    the equilibrated Gram matrix has ``rcond > 1e-12`` (``dpocon``), i.e. cond(A)
    below about 1e6; otherwise None is returned and the caller uses Householder
    TSQR. Cost: 3 n p^2 flops, all BLAS-3; memory one block.
    """
    g = np.zeros((p, p), order="F")
    for blk in blocks():
        g = blas.dsyrk(1.0, blk.T, beta=1.0, c=g, trans=0, lower=0, overwrite_c=1)
    g = np.triu(g) + np.triu(g, 1).T
    d = np.diag(g).copy()
    if not np.all(np.isfinite(g)) or np.any(d <= 0):
        return None
    sc = np.exp2(-np.round(0.5 * np.log2(d)))
    gs = g * sc[:, None] * sc[None, :]
    r1, info = lapack.dpotrf(gs, lower=0, clean=1)
    if info != 0:
        return None
    rc, info = lapack.dpocon(r1, float(np.abs(gs).sum(axis=0).max()), uplo="U")
    if info != 0 or not rc > CHOLQR2_MIN_RCOND:
        return None
    # Q1 = (A S) R1^-1 = A (R1 S^-1)^-1: fold the exact scaling into the triangle, not the blocks
    r1f = np.asfortranarray(r1 / sc[None, :])
    h = np.zeros((p, p), order="F")
    for blk in blocks():
        z = blas.dtrsm(1.0, r1f, blk.T, side=0, lower=0, trans_a=1, overwrite_b=0)   # Q1^T = R1'^-T B^T
        h = blas.dsyrk(1.0, z, beta=1.0, c=h, trans=0, lower=0, overwrite_c=1)
    h = np.triu(h) + np.triu(h, 1).T
    r2, info = lapack.dpotrf(h, lower=0, clean=1)
    if info != 0:
        return None
    r = np.triu(r2 @ r1)
    return r / sc[None, :]               # undo the exact column scaling


def sequential_dependence(r: np.ndarray, tol: float) -> list[int]:
    """Columns that are (numerically) linear combinations of the columns before them.

    For a QR of the design in the user's column order, ``|r_jj|`` is the
    distance of column j from the span of columns 0..j-1. Column j is set
    aside when that distance is at most ``tol * max_i |r_ii|``. Because an
    aside column lies in the span of the earlier ones, dropping it leaves the
    later distances unchanged, so one QR decides every column. The rule is
    deterministic: of two dependent columns, the *later* one in the user's
    order is set aside.
    """
    d = np.abs(np.diag(r))
    top = float(d.max()) if d.size else 0.0
    if top == 0:
        return list(range(r.shape[1]))
    return [j for j in range(r.shape[1]) if d[j] <= tol * top]


def greedy_rank_drop(r: np.ndarray, kept: list[int], tol: float) -> list[int]:
    """Extra columns to set aside when the kept columns are still numerically rank deficient.

    ``r`` is the R of the kept columns (in order). The numerical rank is the
    number of singular values of ``r`` (columns scaled to unit length) above
    ``tol * s_max`` -- the SVD, because column pivoting can miss a spread-out
    near-dependence (Kahan's 1966 example). Columns are then tried latest-first
    in the user's order: a column is set aside if the others keep that rank.
    Deterministic (order, not pivoting, decides); cost O(p^4) on the small
    triangle only, and it runs only when the cheap sequential test left the
    triangle looking singular.
    """

    def rank_of(m: np.ndarray) -> int:
        if m.shape[1] == 0:
            return 0
        norms = np.sqrt(np.einsum("ij,ij->j", m, m))
        sv = np.linalg.svd(m / np.where(norms > 0, norms, 1.0)[None, :], compute_uv=False)
        return int(np.sum(sv > tol * sv[0])) if sv[0] > 0 else 0

    target = rank_of(r)
    cols = list(range(len(kept)))
    dropped: list[int] = []
    for j in reversed(range(len(kept))):
        if len(cols) <= target:
            break
        trial = [c for c in cols if c != j]
        if rank_of(r[:, trial]) == target:
            cols = trial
            dropped.append(kept[j])
    return sorted(dropped)

