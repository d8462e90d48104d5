"""Integers beyond 2**53 are disclosed when float64 rounds them (issue 13, item 4).

Reference: Python's exact integers. ``int(float(v)) != v`` says whether the conversion to a double
changed a value; the tests build values on both sides of 2**53 and check that the warning fires
exactly when some value of a column changed, and names that column.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.errors import IntegerPrecisionWarning

RNG = np.random.default_rng(1964)


def _near(top: int, n: int = 30) -> list[int]:
    """Odd integers just below ``top``; above 2**53 most of them are not doubles."""
    return [top - 1 - 2 * int(k) for k in RNG.integers(0, 10**6, n)]


def _quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("error", IntegerPrecisionWarning)
        return fn()


def test_integer_frame_near_2_64_warns_and_names_the_column():
    big = np.array(_near(2**63), dtype=np.int64)
    assert any(int(float(v)) != int(v) for v in big)  # the reference: some values change
    df = pd.DataFrame({"count": big, "flow": RNG.normal(size=big.size), "label": np.arange(big.size)})
    with pytest.warns(IntegerPrecisionWarning, match=r"'count'.*beyond 2\*\*53.*first: row 0"):
        whiten.fit_baseline(df)


def test_uint64_array_warns_for_regression():
    u = np.array(_near(2**64), dtype=np.uint64)
    x = np.column_stack([RNG.normal(size=u.size), RNG.normal(size=u.size)])
    with pytest.warns(IntegerPrecisionWarning, match=r"X: column 0"):
        whiten.fit_linear(u[:, None].astype(np.uint64), x[:, 0])
    with pytest.warns(IntegerPrecisionWarning, match=r"^y:"):
        whiten.fit_linear(x, u)


def test_python_integers_beyond_64_bits_warn():
    rows = [[2**70 + 2 * k + 1, k] for k in range(12)]
    with pytest.warns(IntegerPrecisionWarning, match=r"column 0"):
        whiten.fit_linear(rows, np.arange(12.0))


def test_integers_below_2_53_do_not_warn():
    ok = np.array(_near(2**53), dtype=np.int64)
    assert all(int(float(v)) == int(v) for v in ok)
    df = pd.DataFrame({"count": ok, "flow": RNG.normal(size=ok.size)})
    _quiet(lambda: whiten.fit_baseline(df))
    _quiet(lambda: whiten.fit_linear(ok.astype(np.int64), RNG.normal(size=ok.size)))
    # large but exact integers (multiples of a power of two) are doubles: no warning either
    exact = np.array([2**62 + (k << 10) for k in range(30)], dtype=np.int64)
    _quiet(lambda: whiten.fit_linear(exact, RNG.normal(size=exact.size)))


@pytest.mark.parametrize("top", [2**63, 2**64, 2**72])
def test_csv_integer_literals_that_do_not_survive_are_named(tmp_path, top):
    vals = _near(top)
    path = tmp_path / "ref.csv"
    with open(path, "w") as fh:
        fh.write("flow,serial\n")
        for v in vals:
            fh.write(f"{RNG.normal():.6f},{v}\n")
    with pytest.warns(IntegerPrecisionWarning, match=r"ref\.csv.*'serial'.*line 2"):
        try:
            whiten.fit_baseline(str(path))
        except whiten.InputError:  # 2**72: every value rounds to a handful of doubles; the point is the warning
            pass


def test_csv_integers_below_2_53_do_not_warn(tmp_path):
    path = tmp_path / "ref.csv"
    with open(path, "w") as fh:
        fh.write("flow,serial\n")
        for v in _near(2**53):
            fh.write(f"{RNG.normal():.6f},{v}\n")
    _quiet(lambda: whiten.fit_baseline(str(path)))
