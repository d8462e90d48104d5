"""Solvers of the least-squares problem: dense Householder, blocked many-row, minimum-norm; refinement.

Dense route (Björck, 1996, "Numerical Methods for Least Squares Problems"):
Householder QR of the equilibrated design in the user's column order; a column
whose distance from the span of the columns before it is at most
``rank_tol * max|r_ii|`` is set aside (the later of two dependent columns); if
the remaining triangle still looks singular (``dtrcon``), the singular values
of R settle the rank and columns are set aside latest-first; then iterative
refinement of the augmented system ``[I A; A^T 0][r; x] = [b; 0]`` (Björck,
1967) with the residuals in compensated (double-double) arithmetic.

Many-row route: the data are read in row blocks with bounded memory. R of
``[A y]`` comes from CholeskyQR2 (two BLAS-3 passes; Fukaya et al., 2014) when
the equilibrated Gram matrix is well enough conditioned (rcond > 1e-12),
otherwise from a Householder tall-skinny QR (Demmel et al., 2012).
:func:`solution_from_r` finishes from that R (shared with the dask engine):
refinement by the corrected semi-normal equations (Björck, 1987) with
``numpy.longdouble`` residuals, accurate while the scaled condition number is
below ``1e5``; above that it hands over to the dense route (None). With
``refine="auto"`` it refines only when fewer than 8 digits would otherwise
survive (the statistical uncertainty of a fit on that many rows is far larger
than such rounding), and says so in the notes.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from .._numerics import EPS, column_norms
from .._settings import current
from ..linalg import compensated
from ..linalg.qr import (
    cholqr2_r,
    greedy_rank_drop,
    householder_thin,
    pow2_column_scale,
    qr_r,
    sequential_dependence,
    tri_rcond,
    tri_solve,
    tsqr_r,
)
from .design import Design

__all__ = ["refinement_verdict", "RANK_POLICIES", "MAX_REFINE", "BLOCKED_MAX_COND", "BLOCKED_AUTO_DIGITS", "Solution",
           "refine_dense", "dense_solution", "minimum_norm", "blocked_solution", "solution_from_r"]

RANK_POLICIES = ("nan", "drop", "raise", "minimum-norm")
#: the blocked path refines by semi-normal equations, which converge while
#: cond^2 * eps << 1; above this scaled condition number it hands over to Householder
BLOCKED_MAX_COND = 1e5
MAX_REFINE = 6
#: on the many-row path, refine="auto" refines when fewer digits than this would survive
BLOCKED_AUTO_DIGITS = 8


@dataclasses.dataclass
class Solution:
    """What a solver leaves for the inference step (scaled coordinates throughout)."""

    cols: list            # fitted design columns (indices into all_names)
    x: np.ndarray         # scaled coefficients of the fitted columns
    r: np.ndarray         # R of the fitted scaled columns
    wresid: np.ndarray    # whitened residuals
    q: np.ndarray | None
    steps: int
    converged: bool
    last_corr: float
    arithmetic: str
    method: str         # what ran (becomes FitHealth.method)
    notes: list
    var_rows: np.ndarray | None = None   # minimum-norm: rows whose squared norms are the variances
    error_estimate: float | None = None  # refine=False: one unapplied correction against the data as given


def refinement_verdict(x: np.ndarray, dx: np.ndarray, prev: float) -> tuple[float, bool, bool]:
    """``(relative correction, stop, converged)`` after one refinement step ``x = x + dx``.

    Stops at working precision (converged), or when the correction no longer at
    least halves: stagnation at the arithmetic's limit, converged only if the
    correction is already below 1e-10.
    """
    xn = float(np.max(np.abs(x))) if x.size else 0.0
    corr = float(np.max(np.abs(dx))) / xn if xn > 0 else 0.0
    if corr <= 2 * EPS:
        return corr, True, True
    if corr > 0.5 * prev:
        return corr, True, corr < 1e-10
    return corr, False, False


def refine_dense(a, b, q, r, kind, max_steps):
    """Björck (1967) refinement of the augmented system with thin Q; returns x, resid, steps, conv, corr."""
    x = tri_solve(r, q.T @ b)
    ops = compensated.ExtendedProducts(a, kind)
    res = ops.residual(x, b, None)
    steps, conv, corr = 0, False, math.nan
    prev = math.inf
    for _ in range(max_steps):
        f = ops.residual(x, b, res)
        g = -ops.gradient(res)
        h = tri_solve(r, g, trans=True)
        d = q.T @ f
        dx = tri_solve(r, d - h)
        dr = f - q @ (d - h)
        x = x + dx
        res = res + dr
        steps += 1
        corr, stop, conv = refinement_verdict(x, dx, prev)
        if stop:
            break
        prev = corr
    return x, res, steps, conv, corr


def dense_solution(a, b, s, tol, policy, all_names, max_steps, refine, notes, path="householder"):
    aS = a * s[None, :]
    q, r = householder_thin(aS)
    aside = sequential_dependence(r, tol)
    kept = [j for j in range(r.shape[1]) if j not in aside]
    r_full = r
    if aside:
        q, r = householder_thin(aS[:, kept])
    if kept and tri_rcond(r) < tol:
        extra = greedy_rank_drop(r, kept, tol)
        if extra:
            notes.append("rank in doubt after the sequential test; the singular values of R settled it")
            path += "+svd-rank"
            aside = sorted(set(aside) | set(extra))
            kept = [j for j in range(r_full.shape[1]) if j not in aside]
            q, r = householder_thin(aS[:, kept])
    if aside and policy == "minimum-norm":
        return r_full, aside, minimum_norm(aS, b, tol=tol, path=path, notes=notes)
    kind = "compensated"
    if refine:
        x, res, steps, conv, corr = refine_dense(aS[:, kept], b, q, r, kind, max_steps)
    else:
        x = tri_solve(r, q.T @ b)
        res = b - aS[:, kept] @ x
        steps, conv, corr, kind = 0, False, math.nan, "none"
    sol = Solution(kept, x, r, res, q, steps, conv, corr, kind, path, notes)
    return r_full, aside, sol


def minimum_norm(aS, b, tol, path, notes):
    """Minimum-norm solution over all columns, with the columns scaled to exactly unit length.

    In those coordinates the answer does not depend on the units of the
    predictors (the raw minimum-norm solution does). Truncated SVD of the R of
    the design (p x p), singular values at or below ``tol * s_max`` dropped.
    """
    q, r = householder_thin(aS)
    cn = np.sqrt(np.einsum("ij,ij->j", r, r))
    cn = np.where(cn > 0, cn, 1.0)
    u, sv, vt = np.linalg.svd(r / cn[None, :])
    k = int(np.sum(sv > tol * sv[0]))
    c = u[:, :k].T @ (q.T @ b)
    x = (vt[:k].T @ (c / sv[:k])) / cn
    res = compensated.residual(aS, x, b, None, "compensated")
    notes.append("minimum-norm solution with unit-length columns (truncated SVD of R; not refined)")
    var_rows = (vt[:k] / sv[:k, None]) / cn[None, :]  # inverse-ok: squared column norms are reported variances only
    return Solution(list(range(aS.shape[1])), x, r, res, None, 0, False, math.nan, "compensated",
                     path + "+minimum-norm", notes, var_rows=var_rows)


def blocked_solution(design: Design, tol, policy, max_steps, refine, notes):
    """Tall-skinny QR of [A y] in row blocks, semi-normal-equation refinement; None to hand over."""
    rows = max(int(current().block_rows), 4 * (design.p + 1))
    p = design.p

    def blocks():
        for _, _, blk in design.augmented_blocks(rows):
            yield blk

    raug = cholqr2_r(blocks, p + 1)
    path = "blocked-cholqr2"
    if raug is None:
        # ill-conditioned, or an exact fit ([A y] singular): Householder on every block
        raug = tsqr_r(blocks(), p + 1)
        path = "blocked-tsqr"

    def make_pass(kept, sw, kind):
        return _local_residual_pass(design, rows, kept, sw, kind)

    return solution_from_r(raug, p, path, tol, policy, max_steps, refine, notes, make_pass)


def _local_residual_pass(design: Design, rows: int, kept, sw, kind):
    """``residual_pass(x, want_grad) -> (whitened residuals, A^T r or None)`` over in-memory rows."""
    p = design.p

    def residual_pass(xc, want_grad):
        if not want_grad and kind == "none":
            # plain double: one matrix-vector product over the whole design, no copies
            beta = xc * sw
            k0 = int(design.intercept)
            pred = [c - k0 for c in kept if c >= k0]
            fit_ = design.x[:, pred] @ beta[len(kept) - len(pred):] if len(pred) < design.x.shape[1] \
                else design.x @ beta[len(kept) - len(pred):]
            if design.intercept and 0 in kept:
                fit_ = fit_ + beta[0]
            res = design.y - fit_
            if design.sqrt_w is not None:
                res = res * design.sqrt_w
            return res, None
        # one pass: residual b - A x and gradient A^T r, both in extended precision when refining
        res = np.empty(design.n)
        grad = np.zeros(len(kept))
        for a0, b0, blk in design.augmented_blocks(rows):
            ab = blk[:, kept] * sw[None, :]
            yb = blk[:, p]
            if kind == "none":
                rb = yb - ab @ xc
            else:
                rb = compensated.residual(ab, xc, yb, None, kind)
            res[a0:b0] = rb
            if want_grad:
                grad += compensated.gradient(ab, rb, kind) if kind != "none" else ab.T @ rb
        return res, grad

    return residual_pass


def solution_from_r(raug, p, path, tol, policy, max_steps, refine, notes, make_pass):
    """Finish a blocked fit from the R factor of ``[A y]`` (shape (p+1, p+1) or (p, p+1)).

    ``make_pass(kept, column_scale, arithmetic)`` returns the residual pass over
    the rows (in memory, or on a dask cluster). Returns ``(s, r_full, aside,
    solution or None)``; None hands over to the dense Householder route.
    """
    norms = column_norms(raug[:, :p])
    s = pow2_column_scale(norms)
    # power-of-two column scaling is exact, so R of the scaled design is R * s
    r_full = raug[:p, :p] * s[None, :]
    aside = sequential_dependence(r_full, tol)
    kept = [j for j in range(p) if j not in aside]
    raug_s = np.column_stack([r_full, raug[:p, p:]])
    if raug.shape[0] > p:
        raug_s = np.vstack([raug_s, np.concatenate([np.zeros(p), raug[p:, p]])[None, :]])
    sub = raug_s[:, kept + [p]]
    rk = qr_r(sub)[: len(kept) + 1]
    sgn = np.where(np.diag(rk) < 0, -1.0, 1.0)
    rk = rk * sgn[:, None]
    r = rk[: len(kept), : len(kept)]
    z = rk[: len(kept), len(kept)]
    if policy == "minimum-norm" and aside:
        return s, r_full, aside, None
    rc = tri_rcond(r)
    if refine == "auto":
        # Many rows: refine only when fewer than BLOCKED_AUTO_DIGITS digits would survive;
        # beyond that the statistical uncertainty dwarfs the rounding error.
        zn = float(np.linalg.norm(z))
        rho = float(abs(rk[len(kept), len(kept)])) if rk.shape[0] > len(kept) else 0.0
        kap = 1.0 / max(rc, 1e-300)
        bound = EPS * (kap + kap * kap * (rho / zn if zn > 0 else math.inf))
        refine = bool(bound > 10.0 ** -BLOCKED_AUTO_DIGITS)
        if not refine:
            notes.append(f"refinement skipped on the many-row path: error bound {bound:.2g} "
                         f"(about {-math.log10(max(bound, EPS)):.1f} digits) is far below the statistical "
                         "uncertainty; pass refine=True to refine anyway")
    if rc < tol or (refine and 1.0 / max(rc, 1e-300) > BLOCKED_MAX_COND):
        notes.append(f"blocked QR showed a scaled 1-norm condition near {1 / max(rc, 1e-300):.2g}; "
                     f"above {BLOCKED_MAX_COND:g} the semi-normal refinement would not converge, "
                     "so the fit was redone by Householder QR with an explicit thin Q (memory n*p)")
        return s, r_full, aside, None
    x = tri_solve(r, z)
    kind = compensated.extended_kind("longdouble") if refine else "none"
    residual_pass = make_pass(kept, s[kept], kind)
    steps, conv, corr, prev = 0, False, math.nan, math.inf
    res, grad = residual_pass(x, refine)
    if refine:
        for _ in range(max_steps):
            dx = tri_solve(r, tri_solve(r, grad, trans=True))
            x = x + dx
            steps += 1
            corr, stop, conv = refinement_verdict(x, dx, prev)
            res, grad = residual_pass(x, True)
            if stop:
                break
            prev = corr
    sol = Solution(kept, x, r, res, None, steps, conv, corr, kind, path, notes)
    return s, r_full, aside, sol
