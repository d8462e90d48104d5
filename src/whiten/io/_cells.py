"""Cells of a table chunk turned into float64, and the file line of a bad cell.

Private helpers of :mod:`whiten.io.tables`: one conversion per chunk into a
single float64 block, and, only when a cell is not a number, a second look
at the file to tell the user which line of it holds that cell.
"""

from __future__ import annotations

import bz2
import csv
import gzip
import io
import lzma
import os
import zipfile
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import IO, Any

import numpy as np

from ..errors import InputError

# each opener returns text in "rt" mode; the mapping forgets their mode-dependent overloads
_TEXT_OPENERS: dict[str, Callable[..., IO[str]]] = {".gz": gzip.open, ".bz2": bz2.open, ".xz": lzma.open}


def float_block(df: Any, columns: Sequence[str], first_row: int, index: Any, where: str,
                path: Path, fmt: str):
    """``df[columns]`` as one float64 DataFrame on ``index``; a cell that is not a number is an InputError.

    The values go straight into one column-major (rows x columns) array, so
    the frame's ``to_numpy()`` is a view of it and callers convert nothing
    again. Missing cells stay NaN.
    """
    import pandas as pd

    n = len(df)
    out = np.empty((n, len(columns)), dtype=np.float64, order="F")
    for j, c in enumerate(columns):
        s = df[c]
        if s.dtype.kind in "iufb":
            out[:, j] = s.to_numpy(dtype=np.float64, na_value=np.nan)
            continue
        coerced = pd.to_numeric(s, errors="coerce")
        bad = coerced.isna().to_numpy() & ~pd.isna(s).to_numpy()
        if bad.any():
            k = int(np.flatnonzero(bad)[0])
            raise _not_numeric(where, path, fmt, c, first_row + k, s.iloc[k])
        out[:, j] = coerced.to_numpy(dtype=np.float64, na_value=np.nan)
    return pd.DataFrame(out, index=index, columns=list(columns), copy=False)


def _not_numeric(where: str, path: Path, fmt: str, column: str, row: int, value: Any) -> InputError:
    line = data_line(path, fmt, row) if fmt != "parquet" else None
    at = f"row {row} (0-based data row" + (f"; line {line} of the file)" if line is not None else ")")
    return InputError(f"{where}: column {column!r} is not numeric: {at} holds {value!r}. Fix the cell, "
                      "or leave the column out with --columns / columns=[...]")


def data_line(path: Path, fmt: str, row: int) -> int | None:
    """1-based line of the file where 0-based data row ``row`` starts (blank lines skipped as pandas does).

    Found by reading the file again up to that row; only an error message
    pays for it. ``None`` when the file cannot be reopened as text.
    """
    try:
        fh = _open_text(path)
    except (OSError, ValueError, ImportError, zipfile.BadZipFile):
        return None
    with fh:
        reader = csv.reader(fh, delimiter="\t" if fmt == "tsv" else ",")
        seen = -1  # the header is record -1
        last = 0
        try:
            for rec in reader:
                start = last + 1
                last = reader.line_num
                if not rec:
                    continue
                if seen == row:
                    return start
                seen += 1
        except (csv.Error, UnicodeDecodeError):
            return None
    return None


def _open_text(path: Path) -> IO[str]:
    name = path.name.lower()
    for ext, opener in _TEXT_OPENERS.items():
        if name.endswith(ext):
            return opener(path, "rt", encoding="utf-8", newline="")
    if name.endswith(".zip"):
        zf = zipfile.ZipFile(path)
        first = zf.namelist()[0]
        return io.TextIOWrapper(zf.open(first), encoding="utf-8", newline="")
    if name.endswith(".zst"):
        import zstandard

        return io.TextIOWrapper(zstandard.open(os.fspath(path), "rb"), encoding="utf-8", newline="")
    return open(path, encoding="utf-8", newline="")
