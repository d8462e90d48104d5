"""Tables read in chunks with bounded memory: CSV (pandas) and Parquet (pyarrow).

:func:`read_table_chunks` yields pandas DataFrames of float64 columns in the
requested order. Every problem is an :class:`~whiten.errors.InputError` that
names the file, and the row and column where there is one: a missing file, an
empty or header-only file, requested columns that are missing (listing the
missing and the extra ones), a cell that is not a number.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Any, Iterable, Iterator, Sequence

import numpy as np

from ..errors import InputError

__all__ = ["read_table_chunks", "table_columns", "table_format", "progress", "write_csv_chunk", "DEFAULT_CHUNKSIZE"]

DEFAULT_CHUNKSIZE = 100_000
_COMPRESSED = (".gz", ".bz2", ".xz", ".zip", ".zst")


def table_format(path: str | os.PathLike) -> str:
    """``"csv"``, ``"tsv"`` or ``"parquet"`` from the file name.

    Raises
    ------
    InputError
        An extension whiten does not read.
    """
    name = Path(path).name.lower()
    for ext in _COMPRESSED:
        if name.endswith(ext):
            name = name[: -len(ext)]
            break
    if name.endswith((".parquet", ".pq")):
        return "parquet"
    if name.endswith(".tsv"):
        return "tsv"
    if name.endswith((".csv", ".txt")):
        return "csv"
    raise InputError(
        f"data file {str(path)!r}: cannot tell the format from its name; use a .csv, .tsv or .parquet file")


def existing_file(path: str | os.PathLike, *, missing: str = "data file {path!r} not found",
                  folder: str = "data path {path!r} is a folder; pass a CSV or Parquet file") -> Path:
    """``path`` as a Path when it names an existing file; else InputError with the message given
    (``{path!r}`` is filled in)."""
    p = Path(path)
    if not p.exists():
        raise InputError(missing.format(path=str(p)))
    if p.is_dir():
        raise InputError(folder.format(path=str(p)))
    return p



def table_columns(path: str | os.PathLike) -> list[str]:
    """Column names of a table file, reading only its header (or Parquet schema)."""
    p = existing_file(path)
    fmt = table_format(p)
    if fmt == "parquet":
        pq = _pyarrow_parquet()
        try:
            return [str(c) for c in pq.ParquetFile(str(p)).schema_arrow.names]
        except Exception as exc:  # pyarrow raises several types for damaged files
            raise InputError(f"data file {str(p)!r} is not a readable Parquet file ({exc})") from None
    import pandas as pd

    try:
        head = pd.read_csv(p, nrows=0, sep="\t" if fmt == "tsv" else ",")
    except pd.errors.EmptyDataError:
        raise InputError(f"data file {str(p)!r} is empty (not even a header line)") from None
    except (UnicodeDecodeError, pd.errors.ParserError) as exc:
        raise InputError(f"data file {str(p)!r} could not be read as {fmt.upper()} ({exc})") from None
    return [str(c) for c in head.columns]


def _pyarrow_parquet():
    try:
        import pyarrow.parquet as pq
    except ImportError:  # pragma: no cover - pyarrow is installed in the test env
        raise InputError("reading Parquet files needs pyarrow: pip install 'whiten[parquet]'") from None
    return pq


def _select(path: Path, header: list[str], columns: Sequence[str] | None,
            index_column: str | None, extra_columns: Sequence[str] = ()) -> tuple[list[str], list[str]]:
    """(value columns, columns to read) after checking they exist."""
    if index_column is not None and index_column not in header:
        raise InputError(f"data file {str(path)!r}: index column {index_column!r} not found; "
                         f"the file has columns {header}")
    if columns is None:
        cols = [c for c in header if c != index_column and c not in set(extra_columns)]
    else:
        cols = [str(c) for c in columns]
        if len(set(cols)) != len(cols):
            dup = sorted({c for c in cols if cols.count(c) > 1})
            raise InputError(f"columns: {dup} requested more than once")
        missing = [c for c in cols if c not in header]
        if missing:
            extra = [c for c in header if c not in cols and c != index_column and c not in set(extra_columns)]
            raise InputError(f"data file {str(path)!r}: missing column(s) {missing}; "
                             f"columns in the file not requested: {extra}")
    for c in extra_columns:
        if c not in header:
            raise InputError(f"data file {str(path)!r}: column {c!r} not found; the file has columns {header}")
    if not cols:
        raise InputError(f"data file {str(path)!r} has no data columns besides the index column")
    read = list(dict.fromkeys(cols + list(extra_columns) + ([index_column] if index_column else [])))
    return cols, read


def _numeric_frame(df, cols: Sequence[str], offset: int, path: Path):
    """float64 columns in ``cols`` order; the first non-numeric cell is named."""
    import pandas as pd

    out = {}
    for c in cols:
        s = df[c]
        if s.dtype.kind in "iuf":
            out[c] = s.to_numpy(dtype=np.float64, na_value=np.nan)
            continue
        if s.dtype.kind == "b":
            out[c] = s.to_numpy(dtype=np.float64)
            continue
        coerced = pd.to_numeric(s, errors="coerce")
        bad = coerced.isna().to_numpy() & ~pd.isna(s).to_numpy()
        if bad.any():
            k = int(np.flatnonzero(bad)[0])
            row = offset + k
            raise InputError(
                f"data file {str(path)!r}: column {c!r} is not numeric: row {row} (0-based data row) "
                f"holds {s.iloc[k]!r}. Fix the cell, or leave the column out with --columns / columns=[...]")
        out[c] = coerced.to_numpy(dtype=np.float64, na_value=np.nan)
    return pd.DataFrame(out, index=df.index, columns=list(cols))


def read_table_chunks(path: str | os.PathLike, columns: Sequence[str] | None = None,
                      chunksize: int | None = None, index_column: str | None = None, *,
                      extra_columns: Sequence[str] = ()) -> Iterator[Any]:
    """Read a CSV/TSV or Parquet table in chunks of float64 columns.

    Parameters
    ----------
    path : str or PathLike
        ``.csv``/``.txt`` (comma), ``.tsv`` (tab), optionally compressed
        (``.gz``, ``.bz2``, ``.xz``, ``.zip``), or ``.parquet``/``.pq``.
    columns : sequence of str, optional
        Columns to return, in this order (default: every column except the
        index column and ``extra_columns``).
    chunksize : int, optional
        Rows per chunk (default 100000). Memory is bounded by one chunk.
    index_column : str, optional
        Column that becomes the index of every chunk (kept as read, e.g.
        timestamps as strings). Without it the index is the 0-based position
        of the row in the file.
    extra_columns : sequence of str
        Further columns read and returned as float64 after ``columns`` (e.g. a
        weight column).

    Yields
    ------
    pandas.DataFrame
        float64 columns (missing cells are NaN), at most ``chunksize`` rows.

    Raises
    ------
    InputError
        Missing file, unknown extension, empty or header-only file, missing
        columns (the message lists the missing and the extra ones), a cell
        that is not a number (row and column named).

    Examples
    --------
    >>> import tempfile, os, whiten.io.tables as t
    >>> d = tempfile.mkdtemp(); f = os.path.join(d, "a.csv")
    >>> _ = open(f, "w").write("a,b\\n1,2\\n3,4\\n5,6\\n")
    >>> [len(c) for c in t.read_table_chunks(f, chunksize=2)]
    [2, 1]
    """
    p = existing_file(path)
    fmt = table_format(p)
    chunksize = DEFAULT_CHUNKSIZE if chunksize is None else int(chunksize)
    if chunksize < 1:
        raise InputError(f"chunksize: must be a positive integer, got {chunksize}")
    header = table_columns(p)
    cols, read = _select(p, header, columns, index_column, extra_columns)
    out_cols = list(dict.fromkeys(cols + list(extra_columns)))
    return _iter_chunks(p, fmt, read, out_cols, chunksize, index_column)


def _iter_chunks(p: Path, fmt: str, read: list[str], out_cols: list[str], chunksize: int,
                 index_column: str | None) -> Iterator[Any]:
    import pandas as pd

    offset = 0
    if fmt == "parquet":
        pq = _pyarrow_parquet()
        try:
            pf = pq.ParquetFile(str(p))
            batches = pf.iter_batches(batch_size=chunksize, columns=read)
        except Exception as exc:
            raise InputError(f"data file {str(p)!r} is not a readable Parquet file ({exc})") from None
        frames: Iterable = (b.to_pandas() for b in batches)
    else:
        # every column as text would be slow; let pandas infer, then check per column
        frames = pd.read_csv(p, usecols=read, chunksize=chunksize, sep="\t" if fmt == "tsv" else ",",
                             skipinitialspace=True)
    got_rows = False
    try:
        for df in frames:
            if len(df) == 0:
                continue
            got_rows = True
            df.columns = [str(c) for c in df.columns]
            if index_column is not None:
                idx = pd.Index(df[index_column].to_numpy(), name=index_column)
            else:
                idx = pd.RangeIndex(offset, offset + len(df))
            df = df.set_axis(idx, axis=0)
            yield _numeric_frame(df, out_cols, offset, p)
            offset += len(df)
    except pd.errors.ParserError as exc:
        raise InputError(f"data file {str(p)!r}: could not parse near row {offset} ({exc})") from None
    if not got_rows:
        raise InputError(f"data file {str(p)!r} has a header but no data rows")


def progress(iterable: Iterable, *, desc: str = "chunks", total: int | None = None,
             enabled: bool | None = None, unit: str = "chunk") -> Iterable:
    """Wrap ``iterable`` in a tqdm progress bar on stderr, only when stderr is a terminal.

    ``enabled=None`` decides by ``sys.stderr.isatty()``; True/False force it.
    """
    if enabled is None:
        try:
            enabled = sys.stderr.isatty()
        except (AttributeError, ValueError):
            enabled = False
    if not enabled:
        return iterable
    from tqdm import tqdm

    return tqdm(iterable, desc=desc, total=total, unit=unit, file=sys.stderr, leave=False)


def write_csv_chunk(frame, fh, *, header: bool) -> None:
    """Append one chunk of a result table (index first) to an open text file.

    pyarrow's C++ CSV writer, when installed, formats numbers about five times
    faster than pandas (measured on a 200000 x 31 score table: 1.1 s against
    5.8 s); both write shortest round-trip decimal floats, NaN as an empty
    field, so ``pandas.read_csv`` reads either back to the same values. Without
    pyarrow, pandas writes the chunk.
    """
    try:
        import pyarrow as pa
        import pyarrow.csv as pacsv
    except ImportError:
        frame.to_csv(fh, header=header, index=True, lineterminator="\n")
        return
    flat = frame.reset_index()
    raw = getattr(fh, "buffer", None)
    if raw is not None:
        fh.flush()  # text and binary writes must not interleave out of order
    step = 32768  # slices keep the formatted text small (a few MB) whatever the chunk size
    for a in range(0, len(flat), step) if len(flat) else [0]:
        table = pa.Table.from_pandas(flat.iloc[a:a + step], preserve_index=False)
        sink = pa.BufferOutputStream()
        pacsv.write_csv(table, sink, write_options=pacsv.WriteOptions(include_header=header and a == 0,
                                                                      quoting_style="needed"))
        data = sink.getvalue()
        if raw is not None:
            raw.write(memoryview(data))
        else:
            fh.write(data.to_pybytes().decode("utf-8"))
