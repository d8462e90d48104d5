"""Machine constants, the digits rules, and the one JSON rule for numbers.

Every module that needs the unit roundoff, a "digits lost" figure or a
JSON-ready number takes it from here, so the words mean one thing everywhere:

* ``digits_lost`` is ``log10`` of a condition number estimate (``1 / rcond``
  from LAPACK's ``pocon``/``trcon``, or a 2-norm condition where only that is
  at hand): the number of significant decimal digits a backward-stable solve
  with that matrix may lose. ``inf`` for a singular matrix, never negative.
* ``digits_trusted`` is what is left of the ``DIGITS`` (about 15.65) decimal
  digits of a double after ``digits_lost``, never negative.
* JSON: finite numbers are numbers; NaN is ``null``; infinities are the strings
  ``"inf"`` and ``"-inf"`` (JSON has no infinity, and ``null`` would lose the
  sign). :func:`json_ready` writes that rule, :func:`from_json_number` reads it.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from typing import Any

import numpy as np

__all__ = ["EPS", "DIGITS", "digits_lost", "digits_lost_from_rcond", "digits_trusted", "json_ready", "json_number",
           "from_json_number", "pow2_level_scale", "column_norms", "EXTREME_EXPONENT"]

#: unit roundoff of float64 (2**-52, the spacing of doubles at 1.0)
EPS: float = float(np.finfo(np.float64).eps)
#: decimal digits carried by a double: -log10(2**-52) = 15.65
DIGITS: float = -math.log10(EPS)


#: a column whose largest magnitude is beyond 2**+-EXTREME_EXPONENT is equilibrated before any
#: product: its squares (and those of n rows of it) would leave float64's normal range
EXTREME_EXPONENT = 100


def pow2_level_scale(level: np.ndarray, *, only_extreme: bool = True) -> np.ndarray:
    """Powers of two ``c_j`` with ``c_j * level_j`` in [0.5, 1) (1 for a zero or non-finite level).

    ``level`` holds each column's largest magnitude. Multiplying a column by a
    power of two is exact (barring underflow below 2**-1022 * eps, where a
    value is already beneath every other value of its column by 2**-52 and
    more), so equilibrated data hold the same digits and the results map back
    without rounding. With ``only_extreme`` (default), columns whose level lies
    within ``2**+-EXTREME_EXPONENT`` keep ``c_j = 1``: their squares cannot
    overflow or underflow, and ordinary data take the exact same arithmetic as
    before.

    >>> pow2_level_scale(np.array([3e-160, 1.0, 0.0, 5e200])).tolist()[1:3]
    [1.0, 1.0]
    >>> bool(0.5 <= (pow2_level_scale(np.array([3e-160])) * 3e-160)[0] < 1)
    True
    """
    lv = np.asarray(level, dtype=np.float64)
    ok = (lv > 0) & np.isfinite(lv)
    e = np.frexp(np.where(ok, lv, 1.0))[1].astype(np.int64)  # lv = m * 2**e, m in [0.5, 1)
    if only_extreme:
        e = np.where(np.abs(e) > EXTREME_EXPONENT, e, 0)
    e = np.where(ok, e, 0)
    return np.ldexp(1.0, -e)


def column_norms(a: np.ndarray) -> np.ndarray:
    """Euclidean norms of the columns of a 2-D array without overflow or underflow.

    Each column is first divided by a power of two near its largest magnitude
    (exact), so a column of 1e-200s or 1e+160s has the norm it should have
    rather than 0 or inf (the same care as LAPACK ``dnrm2``). Cost two passes.

    >>> bool(np.allclose(column_norms(np.array([[3e-200, 3e160], [4e-200, 4e160]])) / [5e-200, 5e160], 1))
    True
    """
    arr = np.asarray(a, dtype=np.float64)
    if arr.size == 0:
        return np.zeros(arr.shape[1] if arr.ndim == 2 else 0)
    c = pow2_level_scale(np.max(np.abs(arr), axis=0), only_extreme=False)
    b = arr * c[None, :]
    return np.sqrt(np.einsum("ij,ij->j", b, b)) / c


def digits_lost(condition: float) -> float:
    """``log10(condition)`` clipped at 0; ``inf`` for a non-finite or non-positive input.

    >>> digits_lost(1e6), digits_lost(0.5), digits_lost(math.inf)
    (6.0, 0.0, inf)
    """
    condition = float(condition)
    if not math.isfinite(condition) or condition <= 0:
        return math.inf
    return max(0.0, math.log10(condition))


def digits_lost_from_rcond(rcond: float) -> float:
    """:func:`digits_lost` of ``1 / rcond`` (``inf`` when ``rcond <= 0``).

    >>> digits_lost_from_rcond(1e-8)
    8.0
    """
    rcond = float(rcond)
    if not rcond > 0:
        return math.inf
    return max(0.0, -math.log10(rcond))


def digits_trusted(lost: float) -> float:
    """Digits of a double left after losing ``lost`` digits (0 when all are gone).

    >>> round(digits_trusted(5.0), 2), digits_trusted(math.inf)
    (10.65, 0.0)
    """
    lost = float(lost)
    if not math.isfinite(lost):
        return 0.0
    return max(0.0, DIGITS - lost)


def json_number(v: Any) -> Any:
    """One number in the project's JSON rule (NaN -> None, +-inf -> "inf"/"-inf").

    >>> json_number(float("nan")), json_number(-math.inf), json_number(np.int64(3)), json_number(True)
    (None, '-inf', 3, True)
    """
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if math.isnan(v):
            return None
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return v
    return v


def from_json_number(v: Any) -> float:
    """Read back a number written by :func:`json_number` (None -> NaN, "inf" -> inf).

    >>> from_json_number(None), from_json_number("-inf"), from_json_number(2)
    (nan, -inf, 2.0)
    """
    if v is None:
        return math.nan
    if isinstance(v, str):
        if v in ("inf", "-inf"):
            return float(v)
        raise ValueError(f"not a number in whiten's JSON rule: {v!r}")
    return float(v)


def json_ready(v: Any, other: Callable[[Any], Any] | None = None) -> Any:
    """``v`` with every number in the JSON rule: dicts, lists, tuples, arrays and records recursively.

    Records (objects with ``to_dict``) are turned into their dicts; dataclasses
    without one into their public fields. A leaf that is not a number, string
    or None is passed to ``other`` when given (e.g. ``str`` for time stamps),
    else left as it is.

    >>> json_ready({"a": np.array([1.0, np.nan, np.inf]), "b": (2, None)})
    {'a': [1.0, None, 'inf'], 'b': [2, None]}
    """
    if isinstance(v, dict):
        return {str(k): json_ready(x, other) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [json_ready(x, other) for x in v]
    if isinstance(v, np.ndarray):
        return [json_ready(x, other) for x in v.tolist()]
    if hasattr(v, "to_dict") and not isinstance(v, type):
        return json_ready(v.to_dict(), other)
    if dataclasses.is_dataclass(v) and not isinstance(v, type):
        return {f.name: json_ready(getattr(v, f.name), other)
                for f in dataclasses.fields(v) if not f.name.startswith("_")}
    out = json_number(v)
    if other is not None and not (out is None or isinstance(out, (bool, int, float, str))):
        return other(out)
    return out
