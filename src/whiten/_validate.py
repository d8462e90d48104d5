"""Input checking shared by every layer.

Everything that enters the library passes through here and leaves as a
float64 ndarray plus (optionally) column names and a row index. Problems are
reported as :class:`~whiten.errors.InputError` naming the row and column.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from .errors import InputError

__all__ = [
    "as_float_array",
    "select_columns",
    "as_rows",
    "as_square",
    "check_names",
    "first_nonfinite",
    "describe_position",
    "scale_problems",
    "check_scale",
    "SCALE_BIG",
    "SCALE_SMALL",
]

#: Magnitudes whose squares stay comfortably inside float64: beyond SCALE_BIG a sum of squares
#: overflows, and a spread below SCALE_SMALL squares to (almost) nothing.
SCALE_BIG = 1e150
SCALE_SMALL = 1e-150
_EPS = float(np.finfo(np.float64).eps)


def _is_frame(obj: Any) -> bool:
    return hasattr(obj, "columns") and hasattr(obj, "dtypes") and hasattr(obj, "to_numpy")


def _is_series(obj: Any) -> bool:
    return hasattr(obj, "dtype") and hasattr(obj, "index") and hasattr(obj, "to_numpy") and not _is_frame(obj)


def describe_position(row: int, col: int, names: Sequence[str] | None, index: Any = None) -> str:
    """Human-readable 'row R, column C' (using labels when there are any)."""
    rlabel = f"row {row}"
    if index is not None:
        try:
            lab = index[row]
            if lab != row:
                rlabel = f"row {row} (index {lab!r})"
        except Exception:  # pragma: no cover - exotic index types
            pass
    clabel = f"column {col}" if names is None else f"column {names[col]!r}"
    return f"{rlabel}, {clabel}"


def first_nonfinite(a: np.ndarray, *, allow_nan: bool = False) -> tuple[int, int] | None:
    """(row, col) of the first non-finite entry of a 2-D array, or None."""
    bad = np.isinf(a) if allow_nan else ~np.isfinite(a)
    if not bad.any():
        return None
    r, c = np.argwhere(bad)[0]
    return int(r), int(c)


def _frame_to_array(df, name: str) -> tuple[np.ndarray, list[str], Any]:
    names = [str(c) for c in df.columns]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise InputError(f"{name}: duplicated column name(s) {dup}; give every column a unique name")
    for col, dt in zip(df.columns, df.dtypes):
        if dt.kind not in "biuf":
            if dt.kind == "c":
                raise InputError(f"{name}: column {str(col)!r} is complex; whiten works with real numbers")
            # find the first cell that is not a number, to name it
            s = df[col]
            coerced = _coerce_numeric(s)
            bad = coerced.isna() & ~_is_missing(s)
            if bad.any():
                pos = int(np.flatnonzero(bad.to_numpy())[0])
                raise InputError(
                    f"{name}: column {str(col)!r} is not numeric: row {pos} "
                    f"(index {df.index[pos]!r}) holds {s.iloc[pos]!r}. Convert or drop the column "
                    f"(e.g. select numeric columns with columns=[...])"
                )
            if dt.kind == "b":
                continue
            df = df.assign(**{col: coerced})
    ints = [(str(col), df[col].to_numpy()) for col, dt in zip(df.columns, df.dtypes) if dt.kind in "iu"]
    if ints:
        disclose_integer_rounding(ints, None, name=name)
    try:
        values = df.to_numpy(dtype=np.float64, na_value=np.nan)
    except (TypeError, ValueError) as exc:  # pragma: no cover - guarded above
        raise InputError(f"{name}: could not convert to numbers ({exc})") from None
    return values, names, df.index


#: the largest magnitude below which every integer is a double: 2**53
EXACT_INTEGER_LIMIT = 2 ** 53


def _inexact_integers(col: np.ndarray) -> np.ndarray:
    """Positions of the entries of an integer array that float64 does not hold exactly."""
    if col.dtype.kind == "O":  # Python integers of any size
        return np.flatnonzero([abs(v) > EXACT_INTEGER_LIMIT and int(float(v)) != v for v in col.tolist()])
    cand = np.flatnonzero((col > EXACT_INTEGER_LIMIT) | (col < -EXACT_INTEGER_LIMIT))
    if cand.size == 0:
        return cand
    vals = col[cand]
    f = vals.astype(np.float64)
    if np.finfo(np.longdouble).nmant >= 63:  # x86 extended precision holds every 64-bit integer
        return cand[vals.astype(np.longdouble) != f.astype(np.longdouble)]
    return cand[[int(v) != int(g) for v, g in zip(vals.tolist(), f.tolist())]]  # pragma: no cover


def disclose_integer_rounding(values: Any, names: Sequence[str] | None, *, name: str,
                              first_row: int = 0, where: Any = None) -> None:
    """Warn (:class:`~whiten.errors.IntegerPrecisionWarning`) per column of integers beyond 2**53
    that the conversion to float64 rounds, naming the column, the first such row and the change.

    ``values`` is an integer array (1-D or 2-D) or a sequence of (column name, integer array)
    pairs; ``where(row)`` may word a row (e.g. with its file line).
    """
    from ._warn import warn
    from .errors import IntegerPrecisionWarning

    if isinstance(values, np.ndarray):
        v2 = values.reshape(values.shape[0], -1) if values.ndim >= 2 else values.reshape(-1, 1)
        cols = [(names[j] if names is not None else (None if values.ndim == 1 else j), v2[:, j])
                for j in range(v2.shape[1])]
    else:
        cols = list(values)
    for label, col in cols:
        arr = np.asarray(col) if not isinstance(col, list) else np.array(col, dtype=object)
        bad = _inexact_integers(arr)
        if bad.size == 0:
            continue
        r = int(bad[0])
        v = int(arr[r])
        row = where(first_row + r) if where is not None else f"row {first_row + r}"
        what = "" if label is None else (f" column {label!r}" if isinstance(label, str) else f" column {label}")
        warn(IntegerPrecisionWarning,
             f"{name}:{what} holds {bad.size} integer(s) beyond 2**53 that float64 cannot hold exactly; "
             f"they were rounded (first: {row}, {v} became {float(v):.17g}, a change of "
             f"{int(float(v)) - v:+d}). Subtract a reference value or use other units if the last digits matter")


def _as_ndarray(data: Any, name: str) -> np.ndarray:
    """``np.asarray(data)``, with a ragged nested list named instead of numpy's ValueError."""
    try:
        return np.asarray(data)
    except ValueError:
        lengths = []
        if isinstance(data, (list, tuple)):
            lengths = sorted({len(r) for r in data if isinstance(r, (list, tuple, np.ndarray))})
        got = f" (rows of length {', '.join(map(str, lengths))})" if len(lengths) > 1 else ""
        raise InputError(f"{name}: the nested lists are ragged{got}; every row must have the same "
                         "number of entries") from None


def _coerce_numeric(s):
    import pandas as pd

    return pd.to_numeric(s, errors="coerce")


def _is_missing(s):
    import pandas as pd

    return pd.isna(s)


def as_float_array(
    data: Any,
    *,
    name: str = "data",
    ndim: tuple[int, ...] = (1, 2),
    allow_nan: bool = False,
    check_finite: bool = True,
) -> tuple[np.ndarray, list[str] | None, Any]:
    """Convert ``data`` to a float64 array with names and index.

    Parameters
    ----------
    data : array_like or pandas.DataFrame or pandas.Series
    name : str
        What to call the argument in messages.
    ndim : tuple of int
        Accepted dimensionalities.
    allow_nan : bool
        Let NaN through (missing values); infinities are always refused.
    check_finite : bool
        ``False`` skips the scan for NaN/inf: for callers whose own arithmetic
        reveals non-finite rows (a NaN or inf propagates into the row's result)
        and who then raise :func:`nonfinite_error`, saving a pass over the data.

    Returns
    -------
    values : ndarray, float64
        A new array or a read-only view; callers never write into it.
    names : list of str or None
    index : pandas.Index or None

    Raises
    ------
    InputError
        Non-numeric, complex, wrong dimensionality, or non-finite entries.
    """
    names = None
    index = None
    if _is_frame(data):
        values, names, index = _frame_to_array(data, name)
    elif _is_series(data):
        index = data.index
        try:
            values = data.to_numpy(dtype=np.float64, na_value=np.nan)
        except (TypeError, ValueError):
            raise InputError(f"{name}: series {getattr(data, 'name', '')!r} is not numeric") from None
    else:
        arr = _as_ndarray(data, name)
        if arr.dtype.kind == "c":
            raise InputError(f"{name}: complex values are not supported; whiten works with real numbers")
        if arr.dtype.kind in "iu":
            disclose_integer_rounding(arr, None, name=name)
        elif arr.dtype.kind == "O" and arr.size and type(arr.flat[0]) is int:  # Python ints beyond 64 bits
            v2 = arr.reshape(arr.shape[0], -1) if arr.ndim >= 2 else arr.reshape(-1, 1)
            disclose_integer_rounding([(j, [int(v) if type(v) is int else 0 for v in v2[:, j]])
                                       for j in range(v2.shape[1])], None, name=name)
        if arr.dtype.kind not in "biuf":
            try:
                arr = arr.astype(np.float64)
            except (TypeError, ValueError):
                raise InputError(
                    f"{name}: could not read as numbers (dtype {arr.dtype}); pass a numeric array"
                ) from None
        values = np.asarray(arr, dtype=np.float64)
    if values.ndim not in ndim:
        raise InputError(
            f"{name}: expected a {' or '.join(f'{d}-D' for d in ndim)} array, got shape {values.shape}"
        )
    # one cheap pass first: the sum is finite exactly when every entry is (barring overflow)
    if check_finite and values.size and not np.isfinite(np.add.reduce(values, axis=None)):
        v2 = values.reshape(values.shape[0], -1) if values.ndim >= 2 else values.reshape(1, -1)
        pos = first_nonfinite(v2, allow_nan=allow_nan)
        if pos is not None:
            raise nonfinite_error(v2, pos[0], pos[1], names, index, name=name, allow_nan=allow_nan,
                                  one_d=values.ndim == 1)
    return values, names, index


def nonfinite_error(v2: np.ndarray, r: int, c: int, names, index, *, name: str, allow_nan: bool = False,
                    one_d: bool = False) -> InputError:
    """The InputError for the non-finite entry (r, c) of the 2-D view ``v2``."""
    what = v2[r, c]
    if one_d:
        where = f"entry {c}" + (f" (index {index[c]!r})" if index is not None else "")
    else:
        where = describe_position(r, c, names, index)
    hint = "" if allow_nan else " (missing values are not allowed here)"
    return InputError(f"{name}: {where} is {what}{hint}; every value must be a finite number")


def _power_of_ten(x: float) -> str:
    return f"1e{int(np.floor(np.log10(x))):+d}"


def scale_problems(lo: np.ndarray, hi: np.ndarray, names: Sequence[str] | None, *,
                   small: bool = True) -> str | None:
    """The one message for every column whose scale float64 arithmetic cannot carry, or None.

    ``lo`` and ``hi`` are each column's smallest and largest value. A column is
    too large when a value exceeds :data:`SCALE_BIG` in magnitude (its squares
    overflow); with ``small``, it is too small when it varies by less than
    :data:`SCALE_SMALL` while that variation is more than rounding of its level
    (its squared deviations underflow). The test depends only on the data,
    never on an absolute threshold for "constant".
    """
    lab = (lambda j: repr(str(names[j]))) if names is not None else (lambda j: str(j))
    with np.errstate(over="ignore", invalid="ignore"):
        level = np.maximum(np.abs(lo), np.abs(hi))
        spread = hi - lo
    parts = []
    for j in range(level.shape[0]):
        if level[j] > SCALE_BIG:
            parts.append(f"column {lab(j)} reaches {level[j]:.3g} in magnitude, beyond the ~{SCALE_BIG:g} "
                         f"whose squares float64 can hold: divide it by {_power_of_ten(level[j])} "
                         "(other units)")
        elif small and 0 < spread[j] < SCALE_SMALL and spread[j] > 8 * _EPS * level[j]:
            parts.append(f"column {lab(j)} varies, but only by {spread[j]:.3g}, below the ~{SCALE_SMALL:g} "
                         f"whose squares float64 can hold: multiply it by {_power_of_ten(1 / spread[j])} "
                         "(other units)")
    if not parts:
        return None
    return "a scale problem, not bad data: " + "; ".join(parts) + "; then fit again"


def check_scale(values: np.ndarray, names: Sequence[str] | None, *, name: str, small: bool = False) -> None:
    """Raise the :func:`scale_problems` message for the columns of a finite 2-D array, if any."""
    if values.size == 0:
        return
    msg = scale_problems(values.min(axis=0), values.max(axis=0), names, small=small)
    if msg is not None:
        raise InputError(f"{name}: {msg}")


def check_names(given: Sequence[str] | None, expected: Sequence[str] | None, *, name: str = "data") -> None:
    """Raise when the column names of the data differ from the model's."""
    if given is None or expected is None:
        return
    given = list(given)
    expected = list(expected)
    if given == expected:
        return
    select_columns(given, expected, where=name, what="the model", exact=True)
    raise InputError(
        f"{name}: columns are in a different order than the model's; expected {expected}. "
        "Reorder with data[model_columns]"
    )


def as_rows(
    x: Any,
    p: int,
    *,
    names: Sequence[str] | None = None,
    name: str = "x",
    allow_nan: bool = False,
    check_finite: bool = True,
) -> tuple[np.ndarray, bool, Any]:
    """Rows of observations as a float64 (N, p) array.

    A 1-D input of length p is one row. A DataFrame whose columns are a
    superset of ``names`` is reordered/selected by name.

    Returns
    -------
    rows : ndarray, shape (N, p)
    was_1d : bool
    index : pandas.Index or None
    """
    if _is_frame(x) and names is not None:
        cols = [str(c) for c in x.columns]
        if cols != list(names):
            select_columns(cols, names, where=name, what="the model")
            x = x[[c for c in x.columns if str(c) in set(names)]]
            x = x[[c for c in x.columns]]
            order = {c: i for i, c in enumerate(names)}
            x = x[sorted(x.columns, key=lambda c: order[str(c)])]
    values, _, index = as_float_array(x, name=name, ndim=(1, 2), allow_nan=allow_nan,
                                      check_finite=check_finite)
    was_1d = values.ndim == 1
    if was_1d:
        if values.shape[0] != p:
            raise InputError(f"{name}: a single observation must have length {p}, got {values.shape[0]}")
        values = values[None, :]
    elif values.shape[1] != p:
        raise InputError(f"{name}: expected {p} columns, got {values.shape[1]} (shape {values.shape})")
    return values, was_1d, index


def as_square(
    a: Any,
    *,
    name: str = "a",
    symmetry_rtol: float | None = None,
) -> tuple[np.ndarray, list[str] | None]:
    """A finite, square, symmetric float64 matrix (a new Fortran-ordered array, never the caller's).

    The symmetry check is relative to ``max|a|``; the message gives the
    largest asymmetry and where it is. The returned matrix is exactly
    symmetric (the lower triangle is mirrored), so later steps see one matrix.
    """
    from ._settings import current

    values, names, _ = as_float_array(a, name=name, ndim=(2,))
    n, m = values.shape
    if n != m:
        raise InputError(f"{name}: must be square, got shape {values.shape}")
    if n == 0:
        raise InputError(f"{name}: is empty (0 x 0)")
    rtol = current().symmetry_rtol if symmetry_rtol is None else symmetry_rtol
    scale = max(float(values.max()), -float(values.min()))
    # Tiles of 256 x 256 (512 KB): the check and the mirroring read each pair of tiles once
    # while they are in cache, and no n x n temporary is made besides the owned copy.
    tile = 256
    # the owned copy is written tile by tile straight from the caller's array (never modified)
    sym = np.empty((n, n), dtype=np.float64, order="C")
    worst, wi, wj = 0.0, 0, 0
    for i0 in range(0, n, tile):
        i1 = min(n, i0 + tile)
        for j0 in range(0, i0 + 1, tile):
            j1 = min(n, j0 + tile)
            low = values[i0:i1, j0:j1]
            d = np.abs(low - values[j0:j1, i0:i1].T)
            k = int(np.argmax(d))
            if d.flat[k] > worst:
                worst = float(d.flat[k])
                r, c = divmod(k, j1 - j0)
                wi, wj = i0 + r, j0 + c
            sym[i0:i1, j0:j1] = low
            if i0 == j0:  # diagonal tile: mirror its own lower triangle
                out = sym[i0:i1, j0:j1]
                iu = np.triu_indices(i1 - i0, 1)
                out[iu] = out.T[iu]
            else:
                sym[j0:j1, i0:i1] = low.T
    if scale > 0 and worst > rtol * scale:
        i, j = wi, wj
        lab = (lambda k: repr(names[k])) if names is not None else (lambda k: str(k))
        raise InputError(
            f"{name}: is not symmetric: largest asymmetry |a[{lab(i)},{lab(j)}] - a[{lab(j)},{lab(i)}]| = "
            f"{worst:.3g} ({worst / scale:.2g} of max|a|, tolerance {rtol:g}). "
            "Symmetrize with (a + a.T) / 2 if the difference is rounding"
        )
    # exactly symmetric, so the transpose is the same matrix, in the Fortran order LAPACK wants
    return sym.T, names


def select_columns(available: Sequence[Any], wanted: Sequence[Any] | None = None, *, where: str,
                   index_column: str | None = None, what: str = "the columns asked for",
                   also: Sequence[str] = (), exact: bool = False) -> list[str]:
    """Check a choice of columns against the columns there are; the value columns chosen, in order.

    The one place that words a column mismatch, so a file and an in-memory
    frame say the same thing.

    Parameters
    ----------
    available : sequence
        The columns there are (a file's header, a DataFrame's columns).
    wanted : sequence of str, optional
        The value columns asked for, in the order wanted. Default: every
        available column except ``index_column`` and ``also``.
    where : str
        What holds the columns, as the message should name it (e.g.
        ``"data file 'week32.csv'"``).
    index_column : str, optional
        A column that labels rows; it must exist and is not a value column.
    what : str
        What the columns are compared with, for the message (e.g. ``"the model"``).
    also : sequence of str
        Further columns that must exist, kept out of the default choice (e.g. a
        weight column).
    exact : bool
        Also refuse available columns that were not asked for.

    Returns
    -------
    list of str

    Raises
    ------
    InputError
        ``"<where> does not match <what>: missing columns [...], extra columns [...]"``;
        a missing index or ``also`` column; a column asked for twice; no value column left.

    Examples
    --------
    >>> from whiten.io.tables import select_columns  # re-exported there, beside the reader
    >>> select_columns(["t", "a", "b"], ["b", "a"], where="frame", index_column="t")
    ['b', 'a']
    """
    have = [str(c) for c in available]
    if index_column is not None and index_column not in have:
        raise InputError(f"{where}: index column {index_column!r} not found; the columns are {have}")
    skip = set(also) | ({index_column} if index_column is not None else set())
    if wanted is None:
        cols = [c for c in have if c not in skip]
    else:
        cols = [str(c) for c in wanted]
        if len(set(cols)) != len(cols):
            dup = sorted({c for c in cols if cols.count(c) > 1})
            raise InputError(f"{where}: columns {dup} asked for more than once")
        missing = [c for c in cols if c not in have]
        extra = [c for c in have if c not in cols and c not in skip]
        if missing or (exact and extra):
            raise InputError(f"{where} does not match {what}: missing columns {missing}, extra columns {extra}")
    for c in also:
        if c not in have:
            raise InputError(f"{where}: column {c!r} not found; the columns are {have}")
    if not cols:
        raise InputError(f"{where} has no data columns besides the index column")
    return cols
