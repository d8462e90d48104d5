"""Rows from every supported input (array, DataFrame, table file, chunks), as raw blocks.

A :class:`Source` knows where rows come from and whether they can be read
again; it yields raw blocks (NaN kept) with their positions and labels. The
missing-value policy and the weights are applied by
:class:`whiten.baseline.cleaning.Cleaner`.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Iterator, Sequence
from typing import Any

import numpy as np

from .. import _validate
from .._settings import current
from ..errors import InputError
from ..io.tables import Table, open_table, progress, select_columns, table_progress

__all__ = ["Source", "array_column_names", "is_frame"]


def is_frame(x: Any) -> bool:
    return hasattr(x, "columns") and hasattr(x, "dtypes") and hasattr(x, "to_numpy")


def array_column_names(columns: Sequence[str] | None, p: int) -> list[str]:
    """Names for the p columns of an array: ``columns`` checked, or ``x0, x1, ...``."""
    if columns is None:
        return [f"x{k}" for k in range(p)]
    names = [str(c) for c in columns]
    if len(names) != p:
        raise InputError(f"columns: {len(names)} name(s) given for an array with {p} columns")
    if len(set(names)) != p:
        raise InputError(f"columns: names must be unique, got {names}")
    return names


class Source:
    """Rows from any supported input, as raw blocks (NaN possible), readable again when possible."""

    def __init__(self, data: Any, columns: Sequence[str] | None, chunksize: int | None,
                 index_column: str | None, weight_column: str | None, progress: bool | None, *,
                 sep: str | None = None, decimal: str | None = None, na_values: Any = None):
        self.weight_column = weight_column
        self.first_label: Any = None  # the first and last row labels read (the training period)
        self.last_label: Any = None
        self.index_column = index_column
        self.na_values: tuple = ()
        self.progress = progress
        self.chunksize = chunksize
        self.total_rows: int | None = None
        self._index_column: str | None = None
        # set by the _init_* of the input's kind
        self.names: list[str]
        self._array: np.ndarray | None = None
        self._wvals: np.ndarray | None = None
        self._table: Table | None = None
        if chunksize is not None and (not isinstance(chunksize, (int, np.integer)) or chunksize < 1):
            raise InputError(f"chunksize: expected a positive integer, got {chunksize!r}")
        if isinstance(data, (str, os.PathLike, Table)):
            table = data if isinstance(data, Table) else open_table(os.fspath(data), sep=sep, decimal=decimal,
                                                                    na_values=na_values)
            self.na_values = table.na_values
            self._init_path(table, columns, index_column)
        elif sep is not None or decimal is not None or na_values is not None:
            raise InputError("sep, decimal, na_values: read options of a table file; the data given is not a file "
                             "path")
        elif is_frame(data):
            self._init_frame(data, columns, index_column)
        elif isinstance(data, np.ndarray) or (isinstance(data, (list, tuple)) and (
                len(data) == 0 or not (is_frame(data[0]) or (
                    isinstance(data[0], np.ndarray) and data[0].ndim == 2)))):
            self._init_array(data, columns, index_column)
        elif isinstance(data, Iterable):
            self._init_chunks(data, columns, index_column)
        else:
            raise InputError(
                f"data: cannot read rows from a {type(data).__name__}; pass an array, a DataFrame, a CSV or "
                "Parquet path, or an iterable of DataFrame chunks")

    # -- kinds
    def _init_path(self, table: Table, columns, index_column) -> None:
        extra = [self.weight_column] if self.weight_column else []
        # header read and columns checked now (missing file, columns), so errors come before any work
        cols = table.select(columns, index_column=index_column, also=extra)
        self.names = cols
        self.reiterable = True
        self.label = table.where
        self._table = table

        def frames():
            chunks = table.chunks(cols + extra, chunksize=self.chunksize, index_column=index_column)
            return table_progress(table, chunks, self.progress, "reading")

        self._frames = frames
        self._array = None

    def _init_frame(self, df, columns, index_column) -> None:
        if index_column is not None:
            if index_column not in df.columns:
                raise InputError(f"index_column: {index_column!r} is not a column of the DataFrame")
            df = df.set_index(index_column)
        names_all = [str(c) for c in df.columns]
        wcol = self.weight_column
        if wcol is not None and wcol not in names_all:
            raise InputError(f"weights: column {wcol!r} not found in the DataFrame; columns are {names_all}")
        want = select_columns(names_all, columns, where="the DataFrame", also=[wcol] if wcol else [])
        lookup = {s: c for c, s in zip(df.columns, names_all)}
        cols = [lookup[c] for c in want]
        values, names, index = _validate.as_float_array(df[cols], name="data", ndim=(2,), allow_nan=True)
        assert names is not None  # a DataFrame's columns always give names
        self.names = names
        self._array = values
        self._index = index
        self._wvals = None
        if wcol is not None:
            w, _, _ = _validate.as_float_array(df[wcol], name=f"weights column {wcol!r}", ndim=(1,), allow_nan=True)
            self._wvals = w
        self.reiterable = True
        self.label = "DataFrame"
        self.total_rows = values.shape[0]

    def _init_array(self, data, columns, index_column=None) -> None:
        if index_column is not None:
            raise InputError("index_column: works with DataFrame or file input; an array has no columns to "
                             "take labels from")
        if self.weight_column is not None:
            raise InputError("weights: a column name works with DataFrame or file input; pass an array of weights")
        arr = _validate._as_ndarray(data, "data")
        if arr.ndim == 2 and arr.dtype.kind in "biuf":
            # no copy for float64 input; infinities are caught block by block by the cleaner,
            # which saves a full pass (and an N x p mask) over a large array
            values = arr.astype(np.float64, copy=False)
        else:  # the general converter gives the precise message
            values, _, _ = _validate.as_float_array(data, name="data", ndim=(2,), allow_nan=True)
        self.names = array_column_names(columns, values.shape[1])
        self._array = values
        self._index = None
        self._wvals = None
        self.reiterable = True
        self.label = "array"
        self.total_rows = values.shape[0]

    def _init_chunks(self, data, columns, index_column) -> None:
        self.reiterable = isinstance(data, (list, tuple))
        self._chunks_src = data
        self._array = None
        self._consumed = False
        self.label = "chunks"
        self._index_column = index_column
        self._columns_arg = None if columns is None else [str(c) for c in columns]
        names = self._columns_arg  # None: the first chunk gives them
        if names is None:
            if self.reiterable and len(data):
                first = data[0]
                names = self._chunk_names(first)
            elif not self.reiterable:
                it = iter(data)
                try:
                    first = next(it)
                except StopIteration:
                    raise InputError("data: the iterable of chunks is empty") from None
                names = self._chunk_names(first)
                import itertools

                self._chunks_src = itertools.chain([first], it)
            else:
                raise InputError("data: the list of chunks is empty")
        self.names = names

        def frames():
            if not self.reiterable:
                if self._consumed:
                    raise InputError("data: the chunk iterator was already consumed; pass a list to read it twice")
                self._consumed = True
            return progress(self._chunks_src, desc="chunks", enabled=self.progress)

        self._frames = frames

    def _chunk_names(self, chunk) -> list[str]:
        if is_frame(chunk):
            cols = [str(c) for c in chunk.columns]
            drop = {self.weight_column, self._index_column}
            return [c for c in cols if c not in drop]
        arr = np.asarray(chunk)
        if arr.ndim != 2:
            raise InputError(f"data: chunks must be 2-D, got shape {arr.shape}")
        return [f"x{k}" for k in range(arr.shape[1])]

    def row_place(self, pos: int, label: Any = None) -> str:
        """How messages name data row ``pos``: with the file and its line when the rows come from a file."""
        if self._table is not None:
            same = label is None or (not isinstance(label, str) and label == pos)
            return f"{self._table.where}: {self._table.at(pos, None if same else label)}"
        if hasattr(label, "item"):
            label = label.item()
        return f"data: row {pos}" + ("" if label is None or label == pos else f" (index {label!r})")

    @property
    def weights_name(self) -> str:
        """How messages name the weights: their column, or the weights= argument."""
        return f"weight column {self.weight_column!r}" if self.weight_column else "the weight"

    # -- blocks
    def raw_blocks(self) -> Iterator[tuple[np.ndarray, np.ndarray | None, np.ndarray, Any]]:
        """(values with NaN, weights-from-column or None, positions, labels) per block; the first and last
        labels seen are kept in ``first_label`` / ``last_label`` (row numbers without labels)."""
        for vals, w, pos, lab in self._raw_blocks():
            if len(pos):
                if pos[0] == 0:
                    self.first_label = lab[0] if lab is not None else 0
                self.last_label = lab[-1] if lab is not None else int(pos[-1])
            yield vals, w, pos, lab

    def _raw_blocks(self) -> Iterator[tuple[np.ndarray, np.ndarray | None, np.ndarray, Any]]:
        if self._array is not None:
            rows = max(1, int(current().block_rows))
            if self.chunksize is not None:
                rows = int(self.chunksize)
            n = self._array.shape[0]
            for a in range(0, n, rows):
                b = min(a + rows, n)
                w = None if self._wvals is None else self._wvals[a:b]
                lab = None if self._index is None else self._index[a:b]
                yield self._array[a:b], w, np.arange(a, b), lab
            return
        offset = 0
        for k, chunk in enumerate(self._frames()):
            vals, w, lab = self._convert_chunk(chunk, k)
            m = vals.shape[0]
            yield vals, w, np.arange(offset, offset + m), lab
            offset += m
        self.total_rows = offset

    def _convert_chunk(self, chunk, k: int):
        where = f"chunk {k}"
        if is_frame(chunk):
            if self._index_column is not None and self._index_column in chunk.columns:
                chunk = chunk.set_index(self._index_column)
            cols = [str(c) for c in chunk.columns]
            select_columns(cols, self.names, where=f"data ({where})", what="the first chunk's columns",
                           also=[self.weight_column] if self.weight_column else [])
            lookup = {str(c): c for c in chunk.columns}
            vals, _, index = _validate.as_float_array(chunk[[lookup[c] for c in self.names]],
                                                      name=f"data ({where})", ndim=(2,), allow_nan=True)
            w = None
            if self.weight_column is not None:
                if self.weight_column not in lookup:
                    raise InputError(f"data ({where}): weights column {self.weight_column!r} not found")
                w, _, _ = _validate.as_float_array(chunk[lookup[self.weight_column]], name="weights",
                                                   ndim=(1,), allow_nan=True)
            return vals, w, index
        if self.weight_column is not None:
            raise InputError(f"data ({where}): a weights column needs DataFrame chunks")
        vals, _, _ = _validate.as_float_array(chunk, name=f"data ({where})", ndim=(2,), allow_nan=True)
        if vals.shape[1] != len(self.names):
            raise InputError(f"data ({where}): expected {len(self.names)} columns, got {vals.shape[1]}")
        return vals, None, None
