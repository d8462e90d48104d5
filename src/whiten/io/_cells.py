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
import re
import zipfile
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import IO, Any, cast

import numpy as np

from .._validate import disclose_integer_rounding
from ..errors import InputError

# each opener returns text in "rt" mode; the mapping forgets their mode-dependent overloads
_TEXT_OPENERS: dict[str, Callable[..., IO[str]]] = {".gz": gzip.open, ".bz2": bz2.open, ".xz": lzma.open}


def float_block(df: Any, columns: Sequence[str], first_row: int, index: Any, where: str,
                path: Path, fmt: str, *, sep: str = ",", decimal: str = ".", na_values: Sequence[str] = ()):
    """``df[columns]`` as one float64 DataFrame on ``index``; a cell that is not a number is an InputError.

    The values go straight into one column-major (rows x columns) array, so
    the frame's ``to_numpy()`` is a view of it and callers convert nothing
    again. Missing cells stay NaN, and so does a cell holding one of ``na_values``
    (its text, or for a numeric code its number).
    """
    import pandas as pd

    codes = set(na_values)
    numbers = np.array([v for v in (_as_number(c) for c in codes) if v is not None], dtype=np.float64)

    n = len(df)
    out = np.empty((n, len(columns)), dtype=np.float64, order="F")
    for j, c in enumerate(columns):
        s = df[c]
        if s.dtype.kind in "iufb":
            if s.dtype.kind in "iu":  # pandas read integers; beyond 2**53 float64 rounds them
                disclose_integer_rounding([(str(c), s.to_numpy())], None, name=where, first_row=first_row,
                                          where=lambda r: _row_words(path, fmt, r, sep))
            out[:, j] = s.to_numpy(dtype=np.float64, na_value=np.nan)
            if numbers.size:
                out[np.isin(out[:, j], numbers), j] = np.nan
            continue
        text = s.astype("string").str.strip()
        if codes:
            coded = text.isin(codes).to_numpy(dtype=bool, na_value=False)
            if coded.any():
                s = s.where(~coded, None)
                text = text.where(~coded, pd.NA)
        grouped = text.str.contains(_GROUPED[decimal], regex=True, na=False).to_numpy(dtype=bool)
        if decimal != ".":
            text = text.str.replace(decimal, ".", regex=False)
        coerced = pd.to_numeric(text, errors="coerce")
        bad = (coerced.isna().to_numpy() & ~pd.isna(s).to_numpy()) | grouped
        if bad.any():
            k = int(np.flatnonzero(bad)[0])
            raise _not_numeric(where, path, fmt, c, first_row + k, s.iloc[k], sep, decimal)
        out[:, j] = coerced.to_numpy(dtype=np.float64, na_value=np.nan)
        long_ints = text.str.fullmatch(r"[+-]?\d{17,}", na=False).to_numpy(dtype=bool)
        if long_ints.any():  # integer literals too long for int64: compare the text with the double
            at = np.flatnonzero(long_ints)
            digits = np.array([int(t) for t in text.iloc[at]], dtype=object)
            disclose_integer_rounding([(str(c), digits)], None, name=where,
                                      where=lambda r, at=at: _row_words(path, fmt, first_row + int(at[r]), sep))
        if numbers.size:
            out[np.isin(out[:, j], numbers), j] = np.nan
    _refuse_infinite(out, columns, first_row, index, where, path, fmt, sep)
    return pd.DataFrame(out, index=index, columns=list(columns), copy=False)


def _row_words(path: Path, fmt: str, row: int, sep: str) -> str:
    line = data_line(path, fmt, row, sep)
    return f"row {row}" + (f" (line {line})" if line is not None else "")


def _refuse_infinite(out: np.ndarray, columns: Sequence[str], first_row: int, index: Any, where: str,
                     path: Path, fmt: str, sep: str) -> None:
    """An infinite cell is an InputError naming file, line, row, label and column (NaN is a missing cell)."""
    if out.size == 0:
        return
    with np.errstate(all="ignore"):
        sums = np.add.reduce(out, axis=0)  # finite or NaN unless a column holds an infinity (or overflows)
    if not np.isinf(sums).any() and not np.isnan(sums).any():
        return
    bad = np.isinf(out)
    if not bad.any():
        return
    r = int(np.flatnonzero(bad.any(axis=1))[0])
    c = int(np.flatnonzero(bad[r])[0])
    line = data_line(path, fmt, first_row + r, sep) if fmt != "parquet" else None
    name = getattr(index, "name", None)
    v = index[r]
    lab = f", index {(v.item() if hasattr(v, 'item') else v)!r}" if name is not None else ""
    at = (f"line {line}, " if line is not None else "") + f"row {first_row + r} (0-based data row{lab})"
    raise InputError(f"{where}: {at}, column {columns[c]!r} is {out[r, c]}; every value must be a finite "
                     "number (leave a reading empty if it is missing)")


# a thousands separator: "." when the decimal mark is ",", else "," (or a quote/space between digit groups)
_GROUPED = {".": r"^[+-]?\d{1,3}(?:[,' ]\d{3})+(?:\.\d*)?$", ",": r"\."}


# a date or time stamp: 2026-05-04, 04/05/2026, 2026-05-04T06:15, 06:15:00 ...
_DATE_LIKE = re.compile(r"^(\d{4}[-/.]\d{1,2}[-/.]\d{1,2}|\d{1,2}[-/.]\d{1,2}[-/.]\d{2,4}|\d{1,2}:\d{2})")


def _not_numeric(where: str, path: Path, fmt: str, column: str, row: int, value: Any,
                 sep: str = ",", decimal: str = ".") -> InputError:
    line = data_line(path, fmt, row, sep) if fmt != "parquet" else None
    at = f"row {row} (0-based data row" + (f"; line {line} of the file)" if line is not None else ")")
    text = str(value).strip()
    if decimal == "," and "." in text:
        why = ("The file's decimal mark is ',' so '.' would be a thousands separator, which whiten never "
               "guesses; remove it, or read the file with --decimal '.'")
    elif decimal == "." and "," in text and text.replace(",", "").replace(".", "").lstrip("+-").isdigit():
        why = ("',' is a thousands separator or a decimal comma, which whiten never guesses; remove the "
               "thousands separators, or for a decimal comma pass --sep ';' --decimal ','")
    elif _DATE_LIKE.match(text):
        why = (f"It looks like a date or time: if the column labels the rows, name it with --index-column "
               f"{column} (index_column={column!r} in Python)")
    else:
        why = "Fix the cell, or leave the column out with --columns (columns=[...] in Python)"
    return InputError(f"{where}: column {column!r} is not numeric: {at} holds {value!r}. {why}")


def _as_number(code: str) -> float | None:
    try:
        v = float(code)
    except ValueError:
        return None
    return v if np.isfinite(v) else None


def header_fields(path: Path, sep: str) -> list[str] | None:
    """The header record of a text table (a UTF-8 byte-order mark dropped); ``None`` for an empty file."""
    try:
        fh = _open_text(path, encoding="utf-8-sig")
    except (OSError, ValueError, ImportError, zipfile.BadZipFile, IndexError) as exc:
        raise InputError(f"data file {str(path)!r} could not be opened ({exc})") from None
    with fh:
        try:
            for rec in csv.reader(fh, delimiter=sep, skipinitialspace=True, strict=True):
                if rec:
                    return [c for c in rec]
        except (csv.Error, UnicodeDecodeError, EOFError, OSError) as exc:
            raise InputError(f"data file {str(path)!r}: the header could not be read as text ({exc})") from None
    return None


def check_field_counts(path: Path, sep: str, n: int, where: str) -> None:
    """Every non-blank record of a text table has ``n`` fields, else InputError naming the line.

    A file without a quote character is checked on its bytes, vectorized (a
    record is a line, fields are separators + 1); a file with quotes goes
    through the csv module, which knows about quoted separators and line breaks.
    """
    if not _quoted(path):
        line, got = _count_plain(path, sep, n)
    else:
        line, got = _count_csv(path, sep, n)
    if line is None:
        return
    extra = ("more" if got > n else "fewer")
    hint = ("a thousands separator (10,189), a decimal comma or a separator inside an unquoted value "
            "would shift the fields" if got > n else "a field is missing: write an empty field (,,) for a "
            "missing reading")
    raise InputError(f"{where}: line {line} has {got} fields, {extra} than the {n} of the header ({hint}); "
                     "fix the line, quote the value, or choose the separator with --sep / sep=")


def _open_binary(path: Path) -> IO[bytes]:
    name = path.name.lower()
    for ext, opener in _TEXT_OPENERS.items():
        if name.endswith(ext):
            return cast(IO[bytes], opener(path, "rb"))
    if name.endswith(".zip"):
        zf = zipfile.ZipFile(path)
        return zf.open(zf.namelist()[0])
    if name.endswith(".zst"):
        import zstandard

        return zstandard.open(os.fspath(path), "rb")
    return open(path, "rb")


_BLOCK = 1 << 20  # 1 MiB: the per-line arrays stay a few MB whatever the file size


def _quoted(path: Path) -> bool:
    try:
        with _open_binary(path) as fh:
            while block := fh.read(_BLOCK):
                if b'"' in block:
                    return True
    except (OSError, EOFError, ValueError, zipfile.BadZipFile, IndexError) as exc:
        raise InputError(f"data file {str(path)!r} could not be read ({exc})") from None
    return False


def _count_plain(path: Path, sep: str, n: int) -> tuple[int | None, int]:
    code = ord(sep)
    lines = 0
    tail = b""
    with _open_binary(path) as fh:
        while True:
            block = fh.read(_BLOCK)
            data = tail + block
            if not block:
                if not data:
                    break
                data += b"\n"  # the last line without its newline
            a = np.frombuffer(data, dtype=np.uint8)
            ends = np.flatnonzero(a == 10)
            if ends.size == 0:
                tail = data
                continue
            upto = int(ends[-1]) + 1
            seps = np.concatenate(([0], np.cumsum(a[:upto] == code, dtype=np.int32)))
            starts = np.concatenate(([0], ends[:-1] + 1))
            fields = seps[ends] - seps[starts] + 1
            length = ends - starts - (a[np.maximum(ends - 1, 0)] == 13)  # without "\r"
            wrong = np.flatnonzero((fields != n) & (length > 0))
            if wrong.size:
                k = int(wrong[0])
                return lines + k + 1, int(fields[k])
            lines += ends.size
            tail = data[upto:]
            if not block:
                break
    return None, n


def _count_csv(path: Path, sep: str, n: int) -> tuple[int | None, int]:
    with _open_text(path) as fh:
        reader = csv.reader(fh, delimiter=sep, skipinitialspace=True)
        last = 0
        try:
            for rec in reader:
                start = last + 1
                last = reader.line_num
                if rec and len(rec) != n:
                    return start, len(rec)
        except (csv.Error, UnicodeDecodeError) as exc:
            raise InputError(f"data file {str(path)!r}: line {last + 1} could not be parsed ({exc})") from None
    return None, n


def data_line(path: Path, fmt: str, row: int, sep: str | None = None) -> int | None:
    """1-based line of the file where 0-based data row ``row`` starts (blank lines skipped as pandas does).

    Found by reading the file again up to that row; only an error message
    pays for it. ``None`` when the file cannot be reopened as text.
    """
    try:
        fh = _open_text(path)
    except (OSError, ValueError, ImportError, zipfile.BadZipFile):
        return None
    with fh:
        reader = csv.reader(fh, delimiter=sep or ("\t" if fmt == "tsv" else ","), skipinitialspace=True)
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


def _open_text(path: Path, encoding: str = "utf-8") -> IO[str]:
    return io.TextIOWrapper(_open_binary(path), encoding=encoding, newline="")
