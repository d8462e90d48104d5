"""The one writer of result tables: the format follows the output's name.

``.csv`` (comma), ``.tsv`` (tab), ``.csv.gz`` / ``.tsv.gz`` (the same, gzip
compressed) and ``.parquet`` / ``.pq`` (pyarrow, the optional ``parquet``
extra). :func:`output_format` tells the format from the name before any work
is done, so a name whiten cannot write, or Parquet without pyarrow, is a
one-line error before the first row is read. :func:`open_output` writes the
table chunk by chunk to a temporary sibling (:mod:`whiten.io.atomic`) and
renames it into place when complete.

Text output has one style whatever optional packages are installed (see
:func:`whiten.io.tables.write_csv_chunk`): booleans as ``true``/``false``,
minimal quoting, numbers by ``repr``. A gzip file is written with a zero time
stamp and no file name in its header, so the same rows give the same bytes.
"""

from __future__ import annotations

import contextlib
import gzip
import io
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from ..errors import InputError
from .atomic import atomic_open

__all__ = ["output_format", "open_output", "OUTPUT_FORMATS", "TableWriter"]

#: endings whiten writes, and the format of each
OUTPUT_FORMATS = {".csv": "csv", ".tsv": "tsv", ".csv.gz": "csv.gz", ".tsv.gz": "tsv.gz", ".parquet": "parquet",
                  ".pq": "parquet"}


def output_format(path: str | os.PathLike, *, option: str = "-o") -> str:
    """The format of a result table from its name: ``csv``, ``tsv``, ``csv.gz``, ``tsv.gz`` or ``parquet``.

    Raises
    ------
    InputError
        An ending whiten does not write (the message lists those it does), or
        ``.parquet`` while pyarrow is not installed (it says what to install).

    Examples
    --------
    >>> output_format("week32_scores.csv.gz"), output_format("scores.TSV")
    ('csv.gz', 'tsv')
    """
    name = Path(path).name.lower()
    for ending in sorted(OUTPUT_FORMATS, key=len, reverse=True):
        if name.endswith(ending) and len(name) > len(ending):
            fmt = OUTPUT_FORMATS[ending]
            if fmt == "parquet":
                try:
                    import pyarrow
                    import pyarrow.parquet  # noqa: F401
                except ImportError:
                    raise InputError(f"{option} {str(path)!r}: writing Parquet needs pyarrow, which is not "
                                     "installed: pip install 'whiten[parquet]' (or choose a .csv name)") from None
            return fmt
    raise InputError(f"{option} {str(path)!r}: cannot tell the output format from the name; end it in "
                     ".csv, .tsv, .csv.gz, .tsv.gz or .parquet")


class TableWriter:
    """Chunks of a result table written to an open binary file in one format (see :func:`open_output`)."""

    def __init__(self, fh: Any, fmt: str):
        self.format = fmt
        self._fh = fh
        self._text: Any = None
        self._gz: Any = None
        self._pq: Any = None
        self._schema: Any = None
        self.rows = 0
        if fmt in ("csv", "tsv", "csv.gz", "tsv.gz"):
            raw = fh
            if fmt.endswith(".gz"):
                self._gz = raw = gzip.GzipFile(filename="", mode="wb", fileobj=fh, mtime=0)
            self._text = io.TextIOWrapper(raw, encoding="utf-8", newline="")
        self._sep = "\t" if fmt.startswith("tsv") else ","

    def write(self, frame: Any) -> None:
        """Append one chunk (its index is the first column; the first chunk writes the header)."""
        if self._text is not None:
            from .tables import write_csv_chunk

            write_csv_chunk(frame, self._text, header=self.rows == 0, sep=self._sep)
        else:
            self._write_parquet(frame)
        self.rows += len(frame)

    def _write_parquet(self, frame: Any) -> None:
        import pyarrow as pa
        import pyarrow.parquet as pq

        flat = frame.reset_index()
        flat.columns = [str(c) for c in flat.columns]
        if self._schema is None:
            fields = []
            for c in flat.columns:
                kind = flat[c].dtype.kind
                typ = {"b": pa.bool_(), "f": pa.float64(), "i": pa.int64(), "u": pa.uint64(),
                       "M": pa.timestamp("ns")}.get(kind, pa.string())
                fields.append(pa.field(c, typ))
            self._schema = pa.schema(fields)
            self._pq = pq.ParquetWriter(self._fh, self._schema)
        for f in self._schema:
            if f.type == pa.string():
                col = flat[f.name]
                flat[f.name] = [None if v is None or (isinstance(v, float) and v != v) else str(v) for v in col]
        try:
            table = pa.Table.from_pandas(flat, schema=self._schema, preserve_index=False)
        except (pa.ArrowInvalid, pa.ArrowTypeError, ValueError, TypeError) as exc:
            raise InputError(f"output: a chunk of rows does not fit the Parquet columns of the first ({exc})") from None
        self._pq.write_table(table)

    def close(self) -> None:
        if self._text is not None:
            self._text.flush()
            self._text.detach()
            if self._gz is not None:
                self._gz.close()
        elif self._pq is not None:
            self._pq.close()


@contextlib.contextmanager
def open_output(path: str | os.PathLike, *, force: bool = False, what: str = "output",
                option: str = "-o") -> Iterator[TableWriter]:
    """A :class:`TableWriter` in the format of ``path``'s name, written atomically.

    A table with no rows written still gets its file: an empty text file, or
    (Parquet) none, which is an error the caller avoids by writing at least
    the header chunk.

    Examples
    --------
    >>> import os, tempfile, pandas as pd
    >>> d = tempfile.mkdtemp(); f = os.path.join(d, "t.tsv")
    >>> with open_output(f) as w:
    ...     w.write(pd.DataFrame({"d2": [1.5], "alarm": [True]}, index=pd.Index([0], name="row")))
    >>> open(f).read()
    'row\\td2\\talarm\\n0\\t1.5\\ttrue\\n'
    """
    fmt = output_format(path, option=option)
    with atomic_open(path, "wb", force=force, what=what) as fh:
        writer = TableWriter(fh, fmt)
        try:
            yield writer
        finally:
            writer.close()
