"""Scoring dask collections: the in-memory scorer mapped over the partitions, a lazy frame back."""

from __future__ import annotations

import warnings
from typing import Any

from ...errors import InputError
from ...monitor.fdr import add_fdr
from ...monitor.score import score as score_in_memory
from .common import is_dask_frame, require_dask

__all__ = ["score"]


# ------------------------------------------------------------------ score
def _score_partition(frame, baseline, options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the driver already warned when it built the meta
        out = score_in_memory(baseline, frame, **options)
    out.attrs = {}
    return out


def score(baseline: Any, data: Any, **options):
    """Score a dask collection against a baseline, partition by partition.

    Returns a lazy ``dask.dataframe.DataFrame`` with the columns of
    :func:`whiten.monitor.score`, one row per input row, partitions and index
    kept. Call ``.compute()`` for a pandas frame, or ``.to_csv(...)`` /
    ``.to_parquet(...)`` to write it without collecting it.

    The one documented exception: with ``fdr=q`` the Benjamini-Hochberg step
    needs every p-value of the batch at once, so the scores are computed and
    a pandas DataFrame is returned.
    """
    require_dask()
    import dask.dataframe as dd
    import pandas as pd

    cols = list(baseline.columns)
    if not is_dask_frame(data):
        if data.ndim != 2 or data.shape[1] != len(cols):
            raise InputError(f"data: expected a 2-D dask array with {len(cols)} columns (the baseline's "
                             f"sensors {cols}), got shape {data.shape}")
        data = dd.from_dask_array(data.rechunk({1: -1}), columns=cols)
    fdr = options.pop("fdr", None)
    empty = data._meta if hasattr(data, "_meta") else data.head(0)
    meta = score_in_memory(baseline, empty, **options)
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
