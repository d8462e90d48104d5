"""The weak-screen statement for robust and shrinkage baselines says what it computes (issue 19, part A, 1c).

The limit it quotes is the baseline's own (simulated) limit; the rows needed are those of the sample
estimator's exact F law (``rows_within``), and the message says so. Reference: scipy.stats' chi-square and
F laws, computed here independently of ``rows_within``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

import whiten

ALPHA = 0.01


def _f_limit(alpha: float, p: int, m: int) -> float:  # Tracy, Young & Mason (1992), via scipy.stats
    return p * (m + 1) * (m - 1) / (m * (m - p)) * stats.f.isf(alpha, p, m - p)


@pytest.mark.parametrize("estimator,m", [("shrinkage", 6), ("robust", 14)])
def test_weak_screen_of_a_simulated_limit_quotes_the_sample_law_rows(estimator, m):
    p = 4
    x = np.random.default_rng(44).normal(size=(m, p))
    with pytest.warns(whiten.WeakScreenWarning):
        b = whiten.fit_baseline(x, estimator=estimator)
    with pytest.warns(whiten.WeakScreenWarning, match="the sample estimator's exact law"):
        s = b.score(x, alpha=ALPHA)
    ws = s.attrs["weak_screen"]
    chi = stats.chi2.isf(ALPHA, p)
    assert ws["limit"] == pytest.approx(b.limit_law.isf(ALPHA), rel=1e-12) == pytest.approx(s.limit[0])
    assert ws["chi2_limit"] == pytest.approx(chi, rel=1e-12) and ws["limit"] > 1.5 * chi
    need = ws["rows_needed"]  # the fewest m whose F limit is within 10% of chi-square
    assert _f_limit(ALPHA, p, need) <= 1.1 * chi < _f_limit(ALPHA, p, need - 1)
    assert ws["reference_rows"] == b.n
