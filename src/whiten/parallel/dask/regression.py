"""Least squares on dask collections: R of ``[1 X y]`` reduced on the workers, refinement passes there too."""

from __future__ import annotations

import math
import operator
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..._numerics import EPS
from ...errors import InputError
from ...linalg import compensated
from ...linalg.qr import r_of, tri_solve
from ...regression.accuracy import sensitivity_sums
from ...regression.design import INTERCEPT_NAME
from ...regression.inference import assemble
from ...regression.solve import MAX_REFINE, RANK_POLICIES, solution_from_r
from .common import (
    is_dask_collection,
    is_dask_frame,
    require_dask,
    row_vector,
    tree_reduce,
)

__all__ = ["fit_linear"]



class _DaskDesign:
    """What the regression assembly needs to know of a design whose rows stay on the cluster."""

    def __init__(self, names: list, intercept: bool, n: int, index=None):
        self.names = list(names)
        self.intercept = bool(intercept)
        self._n = int(n)
        self.index = index
        self.sqrt_w = None
        self.sum_log_sqrt_w = 0.0
        self.factor = None
        self.sensitivity: float | None = None  # the data statement's sums, gathered on the workers

    @property
    def n(self) -> int:
        return self._n

    @property
    def p(self) -> int:
        return len(self.names) + int(self.intercept)

    @property
    def all_names(self) -> list:
        return ([INTERCEPT_NAME] if self.intercept else []) + list(self.names)

    def _in_memory_only(self, *_args, **_kw):
        raise InputError("this needs the rows in memory (influence measures, minimum-norm fits): "
                         "fit on X.compute(), y.compute() when they fit, or use the coefficients as they are")

    whitened = whitened_blocks = augmented_blocks = raw_rows = _in_memory_only


def _aug_block(xb, yb, intercept: bool, offset: int, names: Sequence[str], wb=None) -> np.ndarray:
    """``[1 X y]`` of one block, rows scaled by sqrt(w) when weighted (checked, the row named)."""
    xb = np.asarray(xb, dtype=np.float64)
    yb = np.asarray(yb, dtype=np.float64).reshape(-1)
    for what, arr, labels in (("X", xb, names), ("y", yb[:, None], ["y"])):
        if arr.size and not np.isfinite(arr.sum()):
            r, c = (int(v) for v in np.argwhere(~np.isfinite(arr))[0])
            raise InputError(f"{what}: row {offset + r}, column {labels[c]!r} is {arr[r, c]}; every value must "
                             "be a finite number (drop incomplete rows first, e.g. ddf.dropna())")
    k0 = int(intercept)
    blk = np.empty((xb.shape[0], xb.shape[1] + k0 + 1), order="F")
    if intercept:
        blk[:, 0] = 1.0
    blk[:, k0:-1] = xb
    blk[:, -1] = yb
    if wb is not None:
        blk *= _sqrt_weights(wb, offset)[:, None]
    return blk


def _sqrt_weights(wb, offset: int) -> np.ndarray:
    w = np.asarray(wb, dtype=np.float64).reshape(-1)
    bad = np.flatnonzero(~(np.isfinite(w) & (w > 0)))
    if bad.size:
        r = int(bad[0])
        raise InputError(f"weights: row {offset + r} has weight {w[r]:g}; weights must be finite and positive "
                         "(to exclude a row, remove it explicitly)")
    return np.sqrt(w)


def _r_block(xb, yb, intercept, offset, names, wb=None):
    return r_of(_aug_block(xb, yb, intercept, offset, names, wb))


def _r_stack(a, b):
    return r_of(np.asfortranarray(np.vstack([a, b])))


def _pass_block(xb, yb, intercept, offset, names, kept, sw, x, kind, want_grad, wb=None):
    """(A^T r, r^T r) of one (weighted) block, the residual in extended precision when refining."""
    blk = _aug_block(xb, yb, intercept, offset, names, wb)
    ab = blk[:, kept] * sw[None, :]
    yb_ = blk[:, -1]
    rb = yb_ - ab @ x if kind == "none" else compensated.residual(ab, x, yb_, None, kind)
    grad = (compensated.gradient(ab, rb, kind) if kind != "none" else ab.T @ rb) if want_grad else None
    return grad, float(rb @ rb)


def _sens_block(xb, yb, intercept, offset, kept, sw, x, r, icept, wb=None):
    """This block's share of the sensitivity sums (:func:`whiten.regression.accuracy.sensitivity_sums`)."""
    xb = np.asarray(xb, dtype=np.float64)
    a = np.column_stack([np.ones(xb.shape[0]), xb]) if intercept else xb
    w = None if wb is None else _sqrt_weights(wb, offset) ** 2
    return sensitivity_sums(a[:, kept] * sw[None, :], np.asarray(yb, dtype=np.float64).reshape(-1), w, x, r, icept)


def _add_pair(a, b):
    return a[0] + b[0], a[1] + b[1]


def _add_pass(a, b):
    ga, ra = a
    gb, rb = b
    return (None if ga is None else ga + gb), ra + rb


def _resid_block(xb, yb, intercept, kept, sw, x):
    """Residuals ``y - X b`` of one block in y units (weights do not enter: they are the whitening only)."""
    xb = np.asarray(xb, dtype=np.float64)
    yb = np.asarray(yb, dtype=np.float64).reshape(-1)
    a = np.column_stack([np.ones(xb.shape[0]), xb]) if intercept else xb
    return yb - (a[:, kept] * sw[None, :]) @ x


def _sum_log_sqrt_w(wb, offset: int) -> float:
    return float(np.sum(np.log(_sqrt_weights(wb, offset))))


def _xy_blocks(X: Any, y: Any):
    """names, aligned dask arrays X (n, k) and y (n,)."""
    require_dask()
    import dask.array as da

    if is_dask_frame(X):
        names = [str(c) for c in X.columns]
        for c, dt in zip(X.columns, X.dtypes):
            if dt.kind not in "biuf":
                raise InputError(f"X: column {str(c)!r} of the dask DataFrame is not numeric (dtype {dt})")
        xa = X.to_dask_array(lengths=True)
    elif is_dask_collection(X):
        xa = X
        if xa.ndim == 1:
            xa = xa[:, None]
        names = [f"x{j}" for j in range(xa.shape[1])]
    else:
        xa = da.from_array(np.asarray(X, dtype=np.float64))
        names = [f"x{j}" for j in range(xa.shape[1])]
    ya = row_vector(y, "y", "one response column")
    if any(math.isnan(c) for c in xa.chunks[0]):
        xa = xa.compute_chunk_sizes()
    if xa.shape[0] != ya.shape[0]:
        raise InputError(f"y: has {ya.shape[0]} rows but X has {xa.shape[0]}; they must describe the same rows")
    xa = xa.rechunk({1: -1})
    ya = ya.rechunk((xa.chunks[0],))
    return names, xa, ya


def _weights_blocks(weights: Any, xa):
    """The weights as a dask array chunked like the rows of X."""
    wa = row_vector(weights, "weights", "one weight per row")
    if wa.shape[0] != xa.shape[0]:
        raise InputError(f"weights: has {wa.shape[0]} entries but X has {xa.shape[0]} rows")
    return wa.rechunk((xa.chunks[0],))


def fit_linear(X: Any, y: Any, *, intercept: bool = True, weights: Any = None, rank_policy: str = "nan",
               rank_tol=None, refine: Any = "auto"):
    """:func:`whiten.fit_linear` for dask arrays / DataFrames (ordinary or weighted least squares).

    Returns a :class:`whiten.LinearFit` whose coefficients, standard errors,
    R², tests, VIFs, collinearity findings and health equal the in-memory fit
    to rounding; ``fitted`` and ``residuals`` are lazy dask arrays.

    Notes
    -----
    The R factor of ``[1 X y]`` is reduced on the workers as a tall-skinny QR
    (a Householder QR per block, then pairwise QR of stacked R's in a balanced
    tree: Demmel, Grigori, Hoemmen & Langou, 2012). Refinement, when it runs,
    is one more distributed pass per step returning ``A^T r`` computed in
    extended precision. ``weights`` (a dask array or Series, or an array,
    aligned with the rows) scale each block's rows by ``sqrt(w)`` on the
    worker that holds them. GLS with a dense error covariance, ridge,
    influence measures and minimum-norm fits need the rows in memory and are
    refused with a message.
    """
    import dask.array as da
    from dask import delayed

    if rank_policy not in RANK_POLICIES:
        raise InputError(f"rank_policy: choose one of {list(RANK_POLICIES)}, got {rank_policy!r}")
    if rank_policy == "minimum-norm":
        raise InputError("rank_policy='minimum-norm' needs the rows in memory; use 'nan', 'drop' or 'raise' "
                         "with dask input")
    if refine not in ("auto", True, False):
        raise InputError(f"refine: choose 'auto', True or False, got {refine!r}")
    names, xa, ya = _xy_blocks(X, y)
    wa = None if weights is None else _weights_blocks(weights, xa)
    design = _DaskDesign(names, intercept, xa.shape[0])
    n, p = design.n, design.p
    if n < p:
        raise InputError(f"X: {n} rows cannot determine {p} coefficients; give at least {p} rows")
    tol = 10.0 * max(n, p) * EPS if rank_tol is None else float(rank_tol)
    xb = list(xa.to_delayed().ravel())
    yb = list(ya.to_delayed().ravel())
    offsets = np.concatenate([[0], np.cumsum(xa.chunks[0])[:-1]]).astype(int).tolist()
    wb = [None] * len(xb) if wa is None else list(wa.to_delayed().ravel())
    rs = [delayed(_r_block)(a, b, intercept, o, names, w) for a, b, o, w in zip(xb, yb, offsets, wb)]
    if wa is None:
        raug = np.asarray(tree_reduce(rs, _r_stack).compute())
    else:
        logs = [delayed(_sum_log_sqrt_w)(w, o) for w, o in zip(wb, offsets)]
        import dask

        raug, slw = dask.compute(tree_reduce(rs, _r_stack), tree_reduce(logs, operator.add))  # one pass, both sums
        raug = np.asarray(raug)
        design.sqrt_w = wa  # lazy: marks the fit as weighted; never pulled in
        design.sum_log_sqrt_w = float(slw)
    if raug.shape[0] < p + 1:
        raug = np.vstack([raug, np.zeros((p + 1 - raug.shape[0], p + 1))])
    raug = raug * np.where(np.diag(raug) < 0, -1.0, 1.0)[:, None]
    last = {}

    def make_pass(kept, sw, kind):
        def residual_pass(x, want_grad):
            parts = [delayed(_pass_block)(a, b, intercept, o, names, kept, sw, x, kind, want_grad, w)
                     for a, b, o, w in zip(xb, yb, offsets, wb)]
            grad, rss = tree_reduce(parts, _add_pass).compute()
            last["rss"] = rss
            last["x"] = x
            res = da.concatenate([
                da.from_delayed(delayed(_resid_block)(a, b, intercept, kept, sw, x), shape=(int(c),),
                                dtype=np.float64)
                for a, b, c in zip(xb, yb, xa.chunks[0])])
            return res, grad
        return residual_pass

    notes: list[str] = []
    s, r_full, aside, sol = solution_from_r(raug, p, "dask-tsqr", tol, rank_policy, MAX_REFINE, refine, notes,
                                            make_pass)
    if sol is None and refine is not True:
        # semi-normal refinement would not converge at this condition; the TSQR solution itself
        # is backward stable (as accurate as an unrefined Householder QR), so keep it and say so
        notes[:] = ["refinement skipped: at this condition the semi-normal refinement would not converge; "
                    "the distributed route kept the unrefined TSQR solution (backward stable, accurate to "
                    "about eps*(kappa + kappa^2 * residual/fit); health.digits_trusted reports that bound)"]
        s, r_full, aside, sol = solution_from_r(raug, p, "dask-tsqr", tol, rank_policy, MAX_REFINE, False,
                                                notes, make_pass)
    if sol is None:
        raise InputError("refine=True: the design is too ill-conditioned for refinement on the distributed "
                         "route (scaled condition above 1e5); pass refine='auto' to keep the TSQR solution, or "
                         "fit on the computed arrays")
    # the data statement: the componentwise sums, one more pass where the blocks lie
    icept = sol.cols.index(0) if intercept and 0 in sol.cols else None
    sw = s[sol.cols]
    parts = [delayed(_sens_block)(a, b, intercept, o, sol.cols, sw, sol.x, sol.r, icept, w)
             for a, b, o, w in zip(xb, yb, offsets, wb)]
    near, at_v = tree_reduce(parts, _add_pair).compute()
    c = tri_solve(sol.r, tri_solve(sol.r, np.eye(len(sol.cols)), trans=True))  # inverse-ok: reported bound only
    xn = float(np.max(np.abs(sol.x))) if sol.x.size else 0.0
    design.sensitivity = float(np.max(near + np.abs(c) @ at_v)) / xn if xn > 0 else math.inf
    resid = sol.wresid
    fitted = ya - resid
    # _DaskDesign has every Design attribute that assemble reads when rss= and vectors= are given (not the
    # in-memory rows); a shared Protocol would have to cover the in-memory helpers too
    return assemble(design, sol, s, r_full, aside, tol, rank_policy,  # type: ignore[arg-type]
                    rss=last["rss"], vectors=(fitted, resid))
