"""The one reader of data tables: CSV/TSV (pandas) and Parquet (pyarrow), in chunks of bounded memory.

:func:`open_table` checks the file, tells its format and reads its header
once; :meth:`Table.select` checks a choice of columns against the header and
:meth:`Table.chunks` yields float64 DataFrames in file order.
:func:`select_columns` words a column mismatch for in-memory frames the same
way. Every problem is an :class:`~whiten.errors.InputError` that names the
file, and the line, row and column where there is one: a missing file, an
empty or header-only file, columns that are missing (listing the missing and
the extra ones), a cell that is not a number.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Iterable, Iterator, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._validate import select_columns
from ..errors import InputError
from ._cells import check_field_counts, float_block, header_fields
from .options import na_list, rename_map

__all__ = ["open_table", "Table", "select_columns", "read_table_chunks", "table_columns", "table_format",
           "existing_file", "progress", "write_csv_chunk", "DEFAULT_CHUNKSIZE", "reader_options", "table_progress",
           "na_list", "rename_map"]

DEFAULT_CHUNKSIZE = 100_000
_COMPRESSED = (".gz", ".bz2", ".xz", ".zip", ".zst")
_SEP = {"csv": ",", "tsv": "\t"}


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


def open_table(path: str | os.PathLike, *, sep: str | None = None, decimal: str | None = None,
               na_values: Sequence[str] | str | None = None) -> Table:
    """Open a table file: check it exists, tell its format, read its header once.

    Parameters
    ----------
    path : str or PathLike
        ``.csv``/``.txt`` (comma), ``.tsv`` (tab), optionally compressed
        (``.gz``, ``.bz2``, ``.xz``, ``.zip``, ``.zst``), or ``.parquet``/``.pq``.
    sep : str, optional
        Field separator of a text table, one character (``"tab"`` is a tab);
        default from the name (comma, or tab for ``.tsv``). ``";"`` with
        ``decimal=","`` reads the usual European spreadsheet export.
    decimal : str, optional
        ``"."`` (default) or ``","``. No thousands separator is read: a
        cell such as ``1,234`` (decimal ``"."``) or ``1.234`` (decimal ``","``)
        is an error, never a silent guess.
    na_values : sequence of str, or str, optional
        Codes that mean "no reading" (e.g. ``["-9999", "ERR", "n/a"]``, or
        ``"-9999,ERR,n/a"``): a cell whose text is one of them, or whose number
        equals a numeric one, is missing (NaN), in text and Parquet files alike.
        An empty cell is always missing.

    Returns
    -------
    Table
        ``.columns`` is the header; :meth:`Table.select` checks a choice of
        columns against it and :meth:`Table.chunks` reads the rows.

    Raises
    ------
    InputError
        The file is missing or a folder, its name has no known extension,
        it is empty (not even a header line) or cannot be read; a column
        name appears twice in the header; the header is one column holding
        ``;`` or a tab (the separator is wrong: pass ``sep``).

    Notes
    -----
    Text tables are checked before any row is used: every line must have as
    many fields as the header (a thousands separator or an unquoted separator
    inside a value would shift the fields), else the line of the file is named.

    Examples
    --------
    >>> import tempfile, os, whiten.io.tables as t
    >>> d = tempfile.mkdtemp(); f = os.path.join(d, "a.csv")
    >>> _ = open(f, "w").write("stamp,a,b\\nt0,1,2\\nt1,3,4\\nt2,5,6\\n")
    >>> tab = t.open_table(f)
    >>> tab.columns, tab.select(index_column="stamp")
    (['stamp', 'a', 'b'], ['a', 'b'])
    >>> [list(c.index) for c in tab.chunks(["b"], chunksize=2, index_column="stamp")]
    [['t0', 't1'], ['t2']]
    """
    p = existing_file(path)
    fmt = table_format(p)
    chosen, dec = reader_options(sep, decimal)
    use = chosen or _SEP.get(fmt, ",")
    if dec == use:
        raise InputError(f"--decimal / decimal={dec!r} is also the field separator; choose --sep ';' "
                         "with --decimal ','")
    names = _header(p, fmt, use, explicit=chosen is not None)
    dup = sorted({c for c in names if names.count(c) > 1})
    if dup:
        at = "; ".join(f"{d!r} at fields " + ", ".join(str(k + 1) for k, c in enumerate(names) if c == d)
                       for d in dup)
        raise InputError(f"data file {str(p)!r}: the header names a column more than once ({at}); "
                         "give every column its own name")
    return Table(p, fmt, names, sep=use, decimal=dec, na_values=na_list(na_values))


def reader_options(sep: str | None, decimal: str | None) -> tuple[str | None, str]:
    """``(sep, decimal)`` checked: one character each (``"tab"``/``"\\t"`` is a tab), decimal ``.`` or ``,``."""
    if sep is not None:
        if not isinstance(sep, str):
            raise InputError(f"--sep / sep: expected one character such as ',' ';' or 'tab', got {sep!r}")
        sep = "\t" if sep.lower() in ("tab", "\\t") else sep
        if len(sep) != 1 or sep in "\"\r\n" or sep.isalnum() or sep == ".":
            raise InputError(f"--sep / sep: expected one character such as ',' ';' or 'tab', got {sep!r}")
    decimal = "." if decimal is None else decimal
    if decimal not in (".", ","):
        raise InputError(f"--decimal / decimal: expected '.' or ',', got {decimal!r}")
    return sep, decimal


def _header(p: Path, fmt: str, sep: str, *, explicit: bool) -> list[str]:
    if fmt == "parquet":
        pq = _pyarrow_parquet()
        try:
            return [str(c) for c in pq.ParquetFile(str(p)).schema_arrow.names]
        except Exception as exc:  # pyarrow raises several types for damaged files
            raise InputError(f"data file {str(p)!r} is not a readable Parquet file ({exc})") from None
    names = header_fields(p, sep)
    if names is None:
        raise InputError(f"data file {str(p)!r} is empty (not even a header line)")
    if len(names) == 1 and not explicit:
        for ch, word in ((";", "';'"), ("\t", "tab"), (",", "','")):
            if ch != sep and ch in names[0]:
                hint = " (and --decimal ',' for decimal commas)" if ch == ";" else ""
                raise InputError(
                    f"data file {str(p)!r}: the header reads as one column {names[0]!r}, which holds {word}; "
                    f"the fields are separated by {word}: pass --sep {word}{hint} (sep={ch!r} in Python)")
    return names


class Table:
    """A table file opened by :func:`open_table`: its path, format and header.

    Attributes
    ----------
    path : pathlib.Path
    format : str
        ``"csv"``, ``"tsv"`` or ``"parquet"``.
    columns : list of str
        The header (Parquet: the schema's names), read once.
    """

    def __init__(self, path: Path, fmt: str, columns: list[str], *, sep: str = ",", decimal: str = ".",
                 na_values: Sequence[str] = ()):
        self.path = path
        self.format = fmt
        self.columns = columns
        self.sep = sep
        self.decimal = decimal
        self.na_values = tuple(na_values)
        self._shape_checked = fmt == "parquet"
        self._file_names: dict[str, str] = {}  # renamed column -> its name in the file (see rename)
        #: bytes of the file read so far by the running :meth:`chunks` (for progress), and the file's size
        self.bytes_read = 0
        self.size = path.stat().st_size if path.exists() else 0

    @property
    def where(self) -> str:
        """How messages name the file: ``"data file '<path>'"``."""
        return f"data file {str(self.path)!r}"

    def line_of(self, row: int) -> int | None:
        """1-based line of the file where 0-based data row ``row`` starts (``None`` for Parquet)."""
        from ._cells import data_line

        return None if self.format == "parquet" else data_line(self.path, self.format, row, self.sep)

    def at(self, row: int, label: Any = None) -> str:
        """How messages name a data row: ``"line 5, row 3 (0-based data row, index 't3')"``."""
        line = self.line_of(row)
        if hasattr(label, "item"):
            label = label.item()
        lab = f", index {label!r}" if label is not None else ""
        return (f"line {line}, " if line is not None else "") + f"row {row} (0-based data row{lab})"

    def __repr__(self) -> str:
        return f"Table({str(self.path)!r}, format={self.format!r}, columns={self.columns})"

    def rename(self, mapping: dict[str, str] | None) -> Table:
        """The same file with columns renamed (``{"name in the file": "name wanted"}``); see :func:`rename_map`.

        Raises
        ------
        InputError
            A name to rename that is not in the header (the header is listed), or
            a new name that another column already has.
        """
        if not mapping:
            return self
        gone = [old for old in mapping if old not in self.columns]
        if gone:
            raise InputError(f"--rename / rename: {self.where} has no column {', '.join(map(repr, gone))}; its "
                             f"columns are {self.columns}")
        new = [mapping.get(c, c) for c in self.columns]
        dup = sorted({c for c in new if new.count(c) > 1})
        if dup:
            raise InputError(f"--rename / rename: after renaming, {self.where} would have two columns named "
                             f"{', '.join(map(repr, dup))}")
        out = Table(self.path, self.format, new, sep=self.sep, decimal=self.decimal, na_values=self.na_values)
        out._file_names = {n: o for n, o in zip(new, self.columns) if n != o}
        return out

    def select(self, columns: Sequence[str] | None = None, *, index_column: str | None = None,
               what: str = "the columns asked for", also: Sequence[str] = ()) -> list[str]:
        """The value columns chosen, checked against the header (see :func:`select_columns`)."""
        return select_columns(self.columns, columns, where=self.where, index_column=index_column,
                              what=what, also=also)

    def chunks(self, columns: Sequence[str], *, chunksize: int | None = None,
               index_column: str | None = None) -> Iterator[Any]:
        """The rows of ``columns``, in file order, as float64 DataFrames of at most ``chunksize`` rows.

        Parameters
        ----------
        columns : sequence of str
            Columns returned, in this order (checked against the header).
        chunksize : int, optional
            Rows per chunk (default 100000); memory is bounded by one chunk.
        index_column : str, optional
            Column whose values (as read, e.g. timestamps as text) label the
            rows. Without it the label is the 0-based data-row number.

        Yields
        ------
        pandas.DataFrame
            One float64 block per chunk; a missing cell is NaN. No row is
            dropped or moved.

        Raises
        ------
        InputError
            Columns not in the file; while reading: a header with no data
            rows, a cell that is not a number (file, line, data row and
            column named), a file that stops parsing.
        """
        chunksize = DEFAULT_CHUNKSIZE if chunksize is None else int(chunksize)
        if chunksize < 1:
            raise InputError(f"chunksize: must be a positive integer, got {chunksize}")
        cols = select_columns(self.columns, columns, where=self.where, index_column=index_column)
        return self._rows(cols, chunksize, index_column)

    def _rows(self, cols: list[str], chunksize: int, index_column: str | None) -> Iterator[Any]:
        import pandas as pd

        read = list(dict.fromkeys(cols + ([index_column] if index_column else [])))
        p, fmt = self.path, self.format
        if fmt == "parquet":
            pq = _pyarrow_parquet()
            try:
                batches = pq.ParquetFile(str(p)).iter_batches(
                    batch_size=chunksize, columns=[self._file_names.get(c, c) for c in read])
            except Exception as exc:
                raise InputError(f"{self.where} is not a readable Parquet file ({exc})") from None
            frames: Iterable = (b.to_pandas() for b in batches)
            raw = None
        else:
            if not self._shape_checked:  # a line with more or fewer fields than the header is refused
                check_field_counts(p, self.sep, len(self.columns), self.where)
                self._shape_checked = True
            # every column as text would be slow; pandas infers, then each column is checked. No
            # usecols: with it pandas reads a long row's first fields silently; names= keeps ours
            # read through our own handle, so its position tells the bytes read (progress)
            raw = open(p, "rb")  # closed in the finally below
            frames = pd.read_csv(raw, header=0, names=self.columns, chunksize=chunksize, sep=self.sep,
                                 decimal=self.decimal, thousands=None, skipinitialspace=True,
                                 compression=_compression(p))
        offset = 0
        self.bytes_read = 0
        try:
            for df in frames:
                if len(df) == 0:
                    continue
                back = {o: n for n, o in self._file_names.items()}
                df.columns = [back.get(str(c), str(c)) if fmt == "parquet" else str(c) for c in df.columns]
                if index_column is not None:
                    idx = pd.Index(df[index_column].to_numpy(), name=index_column)
                else:
                    idx = pd.RangeIndex(offset, offset + len(df))
                block = float_block(df, cols, offset, idx, self.where, p, fmt, sep=self.sep,
                                    decimal=self.decimal, na_values=self.na_values)
                offset += len(df)
                self.bytes_read = self._position(raw, offset)
                yield block
        except pd.errors.ParserError as exc:
            raise InputError(f"{self.where}: could not parse near row {offset} ({exc})") from None
        finally:
            close = getattr(frames, "close", None)
            if close is not None:  # the file is closed whether the rows were all read or an error stopped them
                close()
            if raw is not None:
                raw.close()
        if offset == 0:
            raise InputError(f"{self.where} has a header but no data rows")


    def _position(self, raw: Any, rows: int) -> int:
        """Bytes of the file read after ``rows`` rows: the handle's position (text) or the share of rows
        (Parquet)."""
        if raw is not None:
            try:
                return min(int(raw.tell()), self.size)
            except (OSError, ValueError):
                return self.bytes_read
        total = self._parquet_rows()
        return self.size if not total else int(self.size * min(rows / total, 1.0))

    def _parquet_rows(self) -> int:
        try:
            return int(_pyarrow_parquet().ParquetFile(str(self.path)).metadata.num_rows)
        except Exception:  # progress only: a file that cannot say gives no share
            return 0


def table_progress(table: Table, chunks: Iterable, enabled: bool | None, desc: str) -> Iterable:
    """``chunks`` of ``table`` with progress on stderr: bytes read of the file's size and the time left
    (:mod:`whiten.io.progress`); ``enabled=None`` is a bar on a terminal, else a line about every 10 s."""
    from .progress import with_progress

    return with_progress(chunks, lambda: table.bytes_read, table.size, desc=desc, enabled=enabled)


def _compression(p: Path) -> str | None:
    name = p.name.lower()
    for ext, kind in ((".gz", "gzip"), (".bz2", "bz2"), (".xz", "xz"), (".zip", "zip"), (".zst", "zstd")):
        if name.endswith(ext):
            return kind
    return None


def table_columns(path: str | os.PathLike) -> list[str]:
    """Column names of a table file, reading only its header (or Parquet schema)."""
    return open_table(path).columns


def _pyarrow_parquet():
    try:
        import pyarrow.parquet as pq
    except ImportError:  # pragma: no cover - pyarrow is installed in the test env
        raise InputError("reading Parquet files needs pyarrow: pip install 'whiten[parquet]'") from None
    return pq


def read_table_chunks(path: str | os.PathLike, columns: Sequence[str] | None = None,
                      chunksize: int | None = None, index_column: str | None = None, *,
                      extra_columns: Sequence[str] = ()) -> Iterator[Any]:
    """Read a CSV/TSV or Parquet table in chunks of float64 columns (:func:`open_table` in one call).

    Parameters
    ----------
    path : str or PathLike
        See :func:`open_table`.
    columns : sequence of str, optional
        Columns to return, in this order (default: every column except the
        index column and ``extra_columns``).
    chunksize : int, optional
        Rows per chunk (default 100000). Memory is bounded by one chunk.
    index_column : str, optional
        Column that labels the rows (see :meth:`Table.chunks`).
    extra_columns : sequence of str
        Further columns returned as float64 after ``columns`` (e.g. a weight column).

    Yields
    ------
    pandas.DataFrame
        float64 columns (missing cells are NaN), at most ``chunksize`` rows.

    Raises
    ------
    InputError
        As :func:`open_table`, :meth:`Table.select` and :meth:`Table.chunks`.

    Examples
    --------
    >>> import tempfile, os, whiten.io.tables as t
    >>> d = tempfile.mkdtemp(); f = os.path.join(d, "a.csv")
    >>> _ = open(f, "w").write("a,b\\n1,2\\n3,4\\n5,6\\n")
    >>> [len(c) for c in t.read_table_chunks(f, chunksize=2)]
    [2, 1]
    """
    table = open_table(path)
    cols = table.select(columns, index_column=index_column, also=extra_columns)
    return table.chunks(list(dict.fromkeys(cols + list(extra_columns))), chunksize=chunksize,
                        index_column=index_column)


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


def write_csv_chunk(frame, fh, *, header: bool, sep: str = ",") -> None:
    """Append one chunk of a result table (index first) to an open text file, in whiten's one CSV style.

    The style, the same whatever optional packages are installed: comma
    separated (``sep="\\t"`` for a .tsv), ``\\n`` line ends, numbers as the shortest decimal that reads
    back to the same float64 (Python's ``repr``), a missing value as an empty
    field, booleans as ``true``/``false``, and text quoted only when it holds
    a comma, a quote or a line break (a quote inside doubled), as the csv
    module's minimal quoting does. ``pandas.read_csv`` reads it back to the
    same values and types. (pyarrow's faster writer is not used: it quotes
    every text field and spells numbers differently, so the bytes would
    depend on whether it is installed.)
    """
    import csv

    out = frame
    flags = [c for c in frame.columns if frame[c].dtype.kind == "b"]
    if flags:
        out = frame.copy(deep=False)
        for c in flags:
            out[c] = np.where(frame[c].to_numpy(), "true", "false")
    out.to_csv(fh, header=header, index=True, lineterminator="\n", na_rep="", quoting=csv.QUOTE_MINIMAL, sep=sep)
