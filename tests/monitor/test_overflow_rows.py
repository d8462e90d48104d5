"""A reading far beyond the double range of its sensor's spread: scored, alarmed and noted, no numpy warning.

Reference: the arithmetic itself (d2 of a 1e300 reading against unit spreads exceeds the largest
double, about 1.8e308, so inf is the correct rounding; common practice for IEEE 754 overflow).
"""

from __future__ import annotations

import warnings

import numpy as np

import whiten


def test_overflowing_row_is_alarmed_and_noted_without_runtime_warning():
    x = np.random.default_rng(3).normal(size=(60, 3))
    b = whiten.fit_baseline(x)
    rows = np.r_[x[:5], [[1e300, 0.1, 0.2]], x[5:10]]
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        warnings.simplefilter("ignore", UserWarning)
        s = b.score(rows, ewma=0.2)
    assert np.isinf(s.d2[5]) and bool(s.alarm[5]) and s.p_value[5] == 0.0
    assert "overflows double precision" in s.note[5]
    assert np.isfinite(s.d2.drop(5)).all() and not s.note.drop(5).str.contains("overflows").any()
    assert s.top_contributor[5] == "x0"
