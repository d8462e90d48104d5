"""Baselines on dask collections: per-block accumulator states merged in a tree on the workers.

The blocks are cleaned on the workers by the in-memory engine's own kernel
(:func:`whiten.baseline.clean_block`) and accumulated by its own states and
merges (:mod:`whiten.estimate.streaming`), so the two engines cannot drift.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..._settings import current
from ..._validate import as_float_array
from ...baseline import Baseline, array_column_names, clean_block, health_from_factor
from ...baseline.cleaning import MISSING_POLICIES, dropped_rows_warning
from ...errors import InputError
from ...estimate.sample import (
    METHODS,
    ScatterFit,
    check_rows,
    covariance_factor,
    gram_factor,
    no_rows_error,
)
from ...estimate.streaming import Block, accumulate, merge
from ...io.tables import select_columns
from .common import is_dask_frame, require_dask, tree_reduce

__all__ = ["fit_baseline"]


def _blocks(data: Any, columns: Sequence[str] | None, weight_column: str | None = None):
    """(names, list of delayed numpy blocks, list of (label, offset) per block)."""
    require_dask()
    if weight_column is not None and not is_dask_frame(data):
        raise InputError("weights: with a dask array, put the weights in a dask DataFrame column and pass its "
                         "name (weights='column')")
    if is_dask_frame(data):
        names_all = [str(c) for c in data.columns]
        lookup = {str(c): c for c in data.columns}
        if weight_column is not None and weight_column not in lookup:
            raise InputError(f"weights: column {weight_column!r} not found in the dask DataFrame; columns are "
                             f"{names_all}")
        names = select_columns(names_all, columns, where="the dask DataFrame",
                               also=[weight_column] if weight_column is not None else [])
        cols = [lookup[c] for c in names]
        if weight_column is not None and weight_column in names:
            raise InputError(f"weights: column {weight_column!r} is also one of the fitted columns")
        take = cols + ([lookup[weight_column]] if weight_column is not None else [])
        for c, dt in zip(take, data[take].dtypes):
            if dt.kind not in "biuf":
                raise InputError(f"data: column {str(c)!r} of the dask DataFrame is not numeric (dtype {dt}); "
                                 "select numeric columns with columns=[...]")
        parts = data[take].to_delayed()
        # (label, offset) per block: frames name their partitions, arrays give row offsets
        where: list[tuple[str | None, int | None]] = [(f"partition {k}", None) for k in range(len(parts))]
        convert = (_frame_values if weight_column is None
                   else functools.partial(_frame_values_weighted, weights_name=f"weight column {weight_column!r}"))
        return names, [(convert, part) for part in parts], where
    arr = data
    if arr.ndim != 2:
        raise InputError(f"data: expected a 2-D dask array, got {arr.ndim}-D")
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


def _frame_values_weighted(frame, weights_name: str) -> tuple[np.ndarray, Any, np.ndarray, str]:
    """The fitted columns and, last, the weights column of one partition (and how messages name it)."""
    values, _, index = as_float_array(frame, name="data", ndim=(2,), allow_nan=True)
    return values[:, :-1], index, values[:, -1].copy(), weights_name

def _clean(block, convert, label: str | None, offset: int | None, names: Sequence[str], missing: str):
    """Rows of one block with the missing-value policy applied, plus counts (runs on a worker)."""
    w, wname = None, "the weight"
    if convert is not None:
        values, index, *rest = convert(block)
        w = rest[0] if rest else None
        wname = rest[1] if len(rest) > 1 else wname
    else:
        values, index = np.asarray(block, dtype=np.float64), None

    def where(r: int) -> str:
        if offset is not None:
            return f"data: row {offset + r}"
        return f"data ({label}): index {index[r]!r}" if index is not None else f"data ({label}): row {r}"

    out = clean_block(values, w, list(names), missing, where, wname)
    n_read = values.shape[0]
    return out.values, n_read, n_read - out.values.shape[0], out.first_dropped, out.weights


def _state_of(block, convert, label, offset, names, missing, shift, kind):
    values, n_read, n_dropped, first, w = _clean(block, convert, label, offset, names, missing)
    st, _ = accumulate(iter([Block(values, w, np.arange(values.shape[0]), None)]), kind, shift=shift)
    return {"state": st, "n_read": n_read, "n_dropped": n_dropped, "first": first, "blocks": 1}


def _combine(a: dict, b: dict) -> dict:
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
def fit_baseline(data: Any, *, estimator: str = "sample", columns: Sequence[str] | None = None,
                 missing: str = "drop", method: str = "auto", weights: str | None = None):
    """:func:`whiten.fit_baseline` for a dask array or dask DataFrame.

    Parameters
    ----------
    data : dask.array.Array (N, p) or dask.dataframe.DataFrame
    estimator : {"sample"}
        The sample estimator (the shrinkage and robust estimators need every
        row at once or several dependent passes; compute the data first).
    columns, missing, method
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
    if estimator != "sample":
        raise InputError(f"estimator: {estimator!r} is not available for dask input; use 'sample', or "
                         "compute the data first (data.compute()) for shrinkage and robust fits")
    if missing not in MISSING_POLICIES:
        raise InputError(f"missing: expected one of {MISSING_POLICIES}, got {missing!r}")
    if method not in METHODS:
        raise InputError(f"method: expected one of {METHODS}, got {method!r}")
    names, parts, where = _blocks(data, columns, weights)
    shift = _pilot_shift(parts, where, names, missing)
    kind = "qr" if method == "tsqr" else "gram"
    out = _reduce(parts, where, names, missing, shift, kind)
    st = out["state"]
    if st is None or st.n == 0:
        raise no_rows_error(names)
    check_rows(st, names)
    passes = 1
    if kind == "gram":
        f0, digits = gram_factor(st, names)
        if method == "gram" or digits <= current().gram_digits_max:
            fit = ScatterFit(st, "gram", digits, f0, out["blocks"], 1)
        else:
            out2 = _reduce(parts, where, names, missing, shift, "qr")
            passes = 2
            fit = ScatterFit(out2["state"], "tsqr", digits, None, out["blocks"], 2)
    else:
        fit = ScatterFit(st, "tsqr", None, None, out["blocks"], 1)
    f = covariance_factor(fit, names)
    if out["n_dropped"]:
        dropped_rows_warning(out["n_dropped"], out["n_read"], out["first"])
    health = health_from_factor(f, method=fit.method, gram_digits_lost=fit.gram_digits_lost,
                                 n_rows_read=out["n_read"], n_dropped=out["n_dropped"],
                                 n_chunks=out["blocks"], passes=passes)
    fst = fit.state
    weighted = weights is not None
    params = {"divisor": "sum(w) - 1" if weighted else "n - 1", "weighted": weighted, "weight_sum": fst.wsum,
              "engine": "dask"}
    return Baseline(mean=fst.location, factor=f, n=fst.n, columns=names, estimator="sample", params=params,
                    health=health, weight_sum=fst.wsum)
