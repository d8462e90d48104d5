"""What every dask job shares: recognising a dask collection, the tree reduction, row vectors."""

from __future__ import annotations

import math
import sys
from typing import Any

import numpy as np

from ...errors import InputError

__all__ = ["is_dask_collection", "require_dask", "is_dask_frame", "tree_reduce", "row_vector"]


def is_dask_collection(x: Any) -> bool:
    """True for dask arrays and dask DataFrames (without importing dask otherwise)."""
    mod = type(x).__module__ or ""
    if not (mod.startswith("dask") or "dask" in sys.modules and hasattr(x, "__dask_graph__")):
        return False
    return hasattr(x, "__dask_graph__") and x.__dask_graph__() is not None


def require_dask():
    try:
        import dask
        import dask.array  # noqa: F401
    except ImportError:  # pragma: no cover - only without the extra
        raise InputError("dask input needs the optional extra: pip install 'whiten[dask]'") from None


def is_dask_frame(x: Any) -> bool:
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


def row_vector(v: Any, what: str, expect: str):
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
