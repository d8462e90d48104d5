"""The same jobs on dask collections (optional extra ``whiten[dask]``).

Dask does the scheduling (threads, processes or a ``distributed`` cluster);
whiten supplies what runs per block and how partial results combine:

* fitting a baseline maps every row block to an accumulator state (count,
  mean and scatter, or an R factor) and merges the states pairwise in a
  balanced tree on the workers; only the final p x p state comes back;
* scoring maps :func:`whiten.monitor.score` over the partitions and returns a
  lazy dask DataFrame (see :func:`score_dask` for the one exception);
* linear fits reduce R factors of ``[X, y]`` blocks in the same tree
  (tall-skinny QR) and finish on the p x p factor.

Point at an existing cluster the usual dask way, before calling whiten::

    from distributed import Client
    client = Client("tcp://scheduler-host:8786")   # every later compute() runs there
    base = whiten.fit_baseline(ddf)                # ddf: a dask DataFrame

Results equal the in-memory results up to rounding (the tests ask 1e-10
relative): the per-block arithmetic is the same code, only the merge tree
differs.
"""

from __future__ import annotations

import math
import operator
import sys
import warnings
from typing import Any, Sequence

import numpy as np

from .._settings import current
from .._validate import as_float_array
from .._warn import warn
from ..errors import InputError

__all__ = ["is_dask_collection", "fit_baseline_dask", "score_dask", "fit_linear_dask", "tree_reduce"]


def is_dask_collection(x: Any) -> bool:
    """True for dask arrays and dask DataFrames (without importing dask otherwise)."""
    mod = type(x).__module__ or ""
    if not (mod.startswith("dask") or "dask" in sys.modules and hasattr(x, "__dask_graph__")):
        return False
    return hasattr(x, "__dask_graph__") and x.__dask_graph__() is not None


def _require_dask():
    try:
        import dask  # noqa: F401
        import dask.array  # noqa: F401
    except ImportError:  # pragma: no cover - only without the extra
        raise InputError("dask input needs the optional extra: pip install 'whiten[dask]'") from None


def _is_dask_frame(x: Any) -> bool:
    return hasattr(x, "columns") and hasattr(x, "npartitions")


def tree_reduce(parts: list, combine) -> Any:
    """Combine delayed partial results pairwise in a balanced tree (depth log2 n)."""
    from dask import delayed

    if not parts:
        raise InputError("data: the dask collection has no blocks")
    level = list(parts)
    while len(level) > 1:
        nxt = [delayed(combine)(level[i], level[i + 1]) for i in range(0, len(level) - 1, 2)]
        if len(level) % 2:
            nxt.append(level[-1])
        level = nxt
    return level[0]


# ----------------------------------------------------------------- blocks
def _blocks(data: Any, columns: Sequence[str] | None, weight_column: str | None = None):
    """(names, list of delayed numpy blocks, list of (label, offset) per block)."""
    _require_dask()
    if weight_column is not None and not _is_dask_frame(data):
        raise InputError("weights: with a dask array, put the weights in a dask DataFrame column and pass its "
                         "name (weights='column')")
    if _is_dask_frame(data):
        names_all = [str(c) for c in data.columns]
        lookup = {str(c): c for c in data.columns}
        if weight_column is not None and weight_column not in lookup:
            raise InputError(f"weights: column {weight_column!r} not found in the dask DataFrame; columns are "
                             f"{names_all}")
        if columns is None:
            cols = [c for c in data.columns if str(c) != weight_column]
            names = [str(c) for c in cols]
        else:
            names = [str(c) for c in columns]
            missing = [c for c in names if c not in names_all]
            if missing:
                extra = [c for c in names_all if c not in names]
                raise InputError(f"columns: missing {missing} in the dask DataFrame; not selected: {extra}")
            cols = [lookup[c] for c in names]
        if weight_column is not None and weight_column in names:
            raise InputError(f"weights: column {weight_column!r} is also one of the fitted columns")
        take = cols + ([lookup[weight_column]] if weight_column is not None else [])
        for c, dt in zip(take, data[take].dtypes):
            if dt.kind not in "biuf":
                raise InputError(f"data: column {str(c)!r} of the dask DataFrame is not numeric (dtype {dt}); "
                                 "select numeric columns with columns=[...]")
        parts = data[take].to_delayed()
        where = [(f"partition {k}", None) for k in range(len(parts))]
        convert = _frame_values if weight_column is None else _frame_values_weighted
        return names, [(convert, part) for part in parts], where
    arr = data
    if arr.ndim != 2:
        raise InputError(f"data: expected a 2-D dask array, got {arr.ndim}-D")
    from ..baseline import array_column_names

    names = array_column_names(columns, arr.shape[1])
    if arr.dtype.kind not in "biuf":
        raise InputError(f"data: the dask array has dtype {arr.dtype}; a numeric array is needed")
    if any(math.isnan(c) for c in arr.chunks[0]):
        arr = arr.compute_chunk_sizes()
    arr = arr.rechunk({1: -1})
    offsets = np.concatenate([[0], np.cumsum(arr.chunks[0])[:-1]]).astype(int)
    parts = list(arr.to_delayed().ravel())
    where = [(None, int(o)) for o in offsets]
    return names, [(None, part) for part in parts], where


def _frame_values(frame) -> tuple[np.ndarray, Any]:
    values, _, index = as_float_array(frame, name="data", ndim=(2,), allow_nan=True)
    return values, index


def _frame_values_weighted(frame) -> tuple[np.ndarray, Any, np.ndarray]:
    """The fitted columns and, last, the weights column of one partition."""
    values, _, index = as_float_array(frame, name="data", ndim=(2,), allow_nan=True)
    return values[:, :-1], index, values[:, -1].copy()


def _clean(block, convert, label: str | None, offset: int | None, names: Sequence[str], missing: str):
    """Rows of one block with the missing-value policy applied, plus counts (runs on a worker)."""
    w = None
    if convert is not None:
        values, index, *rest = convert(block)
        w = rest[0] if rest else None
    else:
        values, index = np.asarray(block, dtype=np.float64), None

    def where(r: int) -> str:
        if offset is not None:
            return f"row {offset + r}"
        return f"{label}, index {index[r]!r}" if index is not None else f"{label}, row {r}"

    n_read = values.shape[0]
    first = None
    if w is not None:
        from ..baseline import check_frequency_weights

        check_frequency_weights(w, where)
    if values.size and not np.isfinite(values.sum()):
        inf = np.isinf(values)
        if inf.any():
            r, c = (int(v) for v in np.argwhere(inf)[0])
            raise InputError(f"data: {where(r)}, column {names[c]!r} is {values[r, c]}; every value must be a "
                             "finite number (a missing value may be NaN)")
        nan = np.isnan(values)
        bad = nan.any(axis=1)
        if bad.any():
            k = int(np.flatnonzero(bad)[0])
            j = int(np.flatnonzero(nan[k])[0])
            if missing == "error":
                raise InputError(f"data: {where(k)}, column {names[j]!r} is missing; pass missing='drop' "
                                 "to leave incomplete rows out (they are counted and reported)")
            first = (where(k), names[j])
            values = values[~bad]
            w = None if w is None else w[~bad]
    return values, n_read, n_read - values.shape[0], first, w


def _state_of(block, convert, label, offset, names, missing, shift, kind):
    from ..estimate.streaming import Block, accumulate

    values, n_read, n_dropped, first, w = _clean(block, convert, label, offset, names, missing)
    st, _ = accumulate(iter([Block(values, w, np.arange(values.shape[0]), None)]), kind, shift=shift)
    return {"state": st, "n_read": n_read, "n_dropped": n_dropped, "first": first, "blocks": 1}


def _combine(a: dict, b: dict) -> dict:
    from ..estimate.streaming import merge

    if a["state"] is None:
        st = b["state"]
    elif b["state"] is None:
        st = a["state"]
    else:
        st = merge(a["state"], b["state"])
    return {"state": st, "n_read": a["n_read"] + b["n_read"], "n_dropped": a["n_dropped"] + b["n_dropped"],
            "first": a["first"] or b["first"], "blocks": a["blocks"] + b["blocks"]}


def _pilot_shift(parts, where, names, missing) -> np.ndarray:
    """Mean of the complete rows of the first block that has any (computed now, one block)."""
    for (convert, part), (label, offset) in zip(parts, where):
        values, _, _, _, _ = _clean(part.compute(), convert, label, offset, names, missing)
        if values.shape[0]:
            return values.mean(axis=0)
    raise InputError(f"no complete rows to fit (columns {list(names)}); check the missing values")


def _reduce(parts, where, names, missing, shift, kind) -> dict:
    from dask import delayed

    states = [delayed(_state_of)(part, convert, label, offset, names, missing, shift, kind)
              for (convert, part), (label, offset) in zip(parts, where)]
    return tree_reduce(states, _combine).compute()


# ------------------------------------------------------------------- fit
def fit_baseline_dask(data: Any, *, estimator: str = "sample", columns: Sequence[str] | None = None,
                      missing: str = "drop", path: str = "auto", weights: str | None = None):
    """:func:`whiten.fit_baseline` for a dask array or dask DataFrame.

    Parameters
    ----------
    data : dask.array.Array (N, p) or dask.dataframe.DataFrame
    estimator : {"sample"}
        The sample estimator (the shrinkage and robust estimators need every
        row at once or several dependent passes; compute the data first).
    columns, missing, path
        As in :func:`whiten.fit_baseline`.
    weights : str, optional
        Name of a column of the dask DataFrame holding non-negative frequency
        weights (the covariance then divides by ``sum(w) - 1``, as in memory).

    Returns
    -------
    Baseline
        ``health.n_chunks`` counts the dask blocks; ``health.passes`` is 2 when
        the accurate (TSQR) route re-read the data.

    Notes
    -----
    One small compute for the pilot shift (the first block's mean), then one
    tree reduction of per-block states: Gram states first; when their factor
    loses more than ``gram_digits_max`` digits, a second reduction of R-factor
    states (a tall-skinny QR). Per block the cost is that of the in-memory
    fit; the tree adds O(p^3) per merge and moves one p x p matrix per edge.
    """
    from ..baseline import Baseline, _health_from_factor
    from ..estimate.sample import ScatterFit, _gram_factor, _no_rows, check_rows, covariance_factor

    if estimator != "sample":
        raise InputError(f"estimator: {estimator!r} is not available for dask input; use 'sample', or "
                         "compute the data first (data.compute()) for shrinkage and robust fits")
    if missing not in ("drop", "error"):
        raise InputError(f"missing: expected one of ('drop', 'error'), got {missing!r}")
    if path not in ("auto", "gram", "tsqr"):
        raise InputError(f"path: expected one of ('auto', 'gram', 'tsqr'), got {path!r}")
    names, parts, where = _blocks(data, columns, weights)
    shift = _pilot_shift(parts, where, names, missing)
    kind = "qr" if path == "tsqr" else "gram"
    out = _reduce(parts, where, names, missing, shift, kind)
    st = out["state"]
    if st is None or st.n == 0:
        raise _no_rows(names)
    check_rows(st, names)
    passes = 1
    if kind == "gram":
        f0, digits = _gram_factor(st, names)
        if path == "gram" or digits <= current().gram_digits_max:
            fit = ScatterFit(st, "gram", digits, f0, out["blocks"], 1)
        else:
            out2 = _reduce(parts, where, names, missing, shift, "qr")
            passes = 2
            fit = ScatterFit(out2["state"], "tsqr", digits, None, out["blocks"], 2)
    else:
        fit = ScatterFit(st, "tsqr", None, None, out["blocks"], 1)
    f = covariance_factor(fit, names)
    if out["n_dropped"]:
        w, c = out["first"]
        warn(UserWarning, f"left out {out['n_dropped']} incomplete row(s) of {out['n_read']} (first: {w}, column "
                          f"{c!r} missing); the baseline uses the other {out['n_read'] - out['n_dropped']} row(s). "
                          "Pass missing='error' to stop at the first one instead")
    health = _health_from_factor(f, path=fit.path, gram_digits_lost=fit.gram_digits_lost,
                                 n_rows_read=out["n_read"], n_dropped=out["n_dropped"],
                                 n_chunks=out["blocks"], passes=passes)
    fst = fit.state
    weighted = weights is not None
    params = {"divisor": "sum(w) - 1" if weighted else "n - 1", "weighted": weighted, "weight_sum": fst.wsum,
              "engine": "dask"}
    return Baseline(mean=fst.location, factor=f, n=fst.n, columns=names, estimator="sample", params=params,
                    health=health, weight_sum=fst.wsum)


# ------------------------------------------------------------------ score
def _score_partition(frame, baseline, options):
    from ..monitor import score

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the driver already warned when it built the meta
        out = score(baseline, frame, **options)
    out.attrs = {}
    return out


def score_dask(baseline: Any, data: Any, **options):
    """Score a dask collection against a baseline, partition by partition.

    Returns a lazy ``dask.dataframe.DataFrame`` with the columns of
    :func:`whiten.monitor.score`, one row per input row, partitions and index
    kept. Call ``.compute()`` for a pandas frame, or ``.to_csv(...)`` /
    ``.to_parquet(...)`` to write it without collecting it.

    The one documented exception: with ``fdr=q`` the Benjamini-Hochberg step
    needs every p-value of the batch at once, so the scores are computed and
    a pandas DataFrame is returned.
    """
    _require_dask()
    import dask.dataframe as dd
    import pandas as pd

    from ..monitor import score
    from ..monitor.score import add_fdr

    cols = list(baseline.columns)
    if not _is_dask_frame(data):
        if data.ndim != 2 or data.shape[1] != len(cols):
            raise InputError(f"data: expected a 2-D dask array with {len(cols)} columns (the baseline's "
                             f"sensors {cols}), got shape {data.shape}")
        data = dd.from_dask_array(data.rechunk({1: -1}), columns=cols)
    fdr = options.pop("fdr", None)
    empty = data._meta if hasattr(data, "_meta") else data.head(0)
    meta = score(baseline, empty, **options)
    attrs = dict(meta.attrs)
    meta.attrs = {}
    lazy = data.map_partitions(_score_partition, baseline, options, meta=meta)
    if fdr is None:
        lazy.attrs = attrs
        return lazy
    frame = lazy.compute()
    c = {k: frame[k].to_numpy() for k in frame.columns}
    add_fdr(c, fdr)
    out = pd.DataFrame(c, index=frame.index)
    out.attrs = attrs | {"fdr": fdr}
    return out


# ------------------------------------------------------------- regression
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

    @property
    def n(self) -> int:
        return self._n

    @property
    def p(self) -> int:
        return len(self.names) + int(self.intercept)

    @property
    def all_names(self) -> list:
        from ..regression.design import INTERCEPT_NAME

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
    from ..linalg.qr import r_of as _r_of

    return _r_of(_aug_block(xb, yb, intercept, offset, names, wb))


def _r_stack(a, b):
    from ..linalg.qr import r_of as _r_of

    return _r_of(np.asfortranarray(np.vstack([a, b])))


def _pass_block(xb, yb, intercept, offset, names, kept, sw, x, kind, want_grad, wb=None):
    """(A^T r, r^T r) of one (weighted) block, the residual in extended precision when refining."""
    from ..linalg import compensated as _extended

    blk = _aug_block(xb, yb, intercept, offset, names, wb)
    ab = blk[:, kept] * sw[None, :]
    yb_ = blk[:, -1]
    rb = yb_ - ab @ x if kind == "none" else _extended.residual(ab, x, yb_, None, kind)
    grad = (_extended.gradient(ab, rb, kind) if kind != "none" else ab.T @ rb) if want_grad else None
    return grad, float(rb @ rb)


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
    _require_dask()
    import dask.array as da

    if _is_dask_frame(X):
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
    ya = _row_vector(y, "y", "one response column")
    if any(math.isnan(c) for c in xa.chunks[0]):
        xa = xa.compute_chunk_sizes()
    if xa.shape[0] != ya.shape[0]:
        raise InputError(f"y: has {ya.shape[0]} rows but X has {xa.shape[0]}; they must describe the same rows")
    xa = xa.rechunk({1: -1})
    ya = ya.rechunk((xa.chunks[0],))
    return names, xa, ya


def _row_vector(v: Any, what: str, expect: str):
    """One value per row as a 1-D dask array (from a dask Series/array or an in-memory array), sizes known."""
    import dask.array as da

    if hasattr(v, "to_dask_array"):
        va = v.to_dask_array(lengths=True)
    elif is_dask_collection(v):
        va = v
    else:
        va = da.from_array(np.asarray(v, dtype=np.float64))
    if va.ndim == 2 and va.shape[1] == 1:
        va = va[:, 0]
    if va.ndim != 1:
        raise InputError(f"{what}: expected {expect}, got shape {va.shape}")
    if any(math.isnan(c) for c in va.chunks[0]):
        va = va.compute_chunk_sizes()
    return va


def _weights_blocks(weights: Any, xa):
    """The weights as a dask array chunked like the rows of X."""
    wa = _row_vector(weights, "weights", "one weight per row")
    if wa.shape[0] != xa.shape[0]:
        raise InputError(f"weights: has {wa.shape[0]} entries but X has {xa.shape[0]} rows")
    return wa.rechunk((xa.chunks[0],))


def fit_linear_dask(X: Any, y: Any, *, intercept: bool = True, weights: Any = None, rank_policy: str = "nan",
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
    from dask import delayed
    import dask.array as da

    from .._numerics import EPS as _EPS
    from ..regression.inference import assemble as _assemble
    from ..regression.solve import MAX_REFINE, RANK_POLICIES, solution_from_r

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
    tol = 10.0 * max(n, p) * _EPS if rank_tol is None else float(rank_tol)
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
    resid = sol.wresid
    fitted = ya - resid
    return _assemble(design, sol, s, r_full, aside, tol, rank_policy, rss=last["rss"], vectors=(fitted, resid))


#: the name the engine seam (whiten._engines) calls
fit_linear = fit_linear_dask
