"""The robust estimator's count of outliers expected from clean data (issue 19, part A, loose end 1b).

``params["flagged_expected_clean"]`` +- ``flagged_expected_se`` comes from the limit simulation (refits with
``ROBUST_STARTS`` random starts). Reference: an independent simulation here, fresh clean Gaussian reference
sets of the same size fitted with the full estimator (``fast_mcd`` with its 500 starts, other seeds), the
rows it flags counted. The count is affine invariant, so the reference sets need not share the baseline's
covariance. Tolerance: 4 standard errors of the difference (the stated s.e. and the spread of the
independent counts over sqrt(repeats)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import whiten
from whiten.estimate.robust import fast_mcd

P, M, REPEATS = 3, 60, 12


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")
def test_expected_outliers_of_clean_data_match_an_independent_simulation():
    rng = np.random.default_rng(1919)
    a = np.array([[1.0, 0.0, 0.0], [0.6, 0.8, 0.0], [-0.3, 0.2, 2.0]])
    b = whiten.fit_baseline(rng.normal(size=(M, P)) @ a.T, estimator="robust")
    stated, stated_se = b.params["flagged_expected_clean"], b.params["flagged_expected_se"]
    names = [f"x{j}" for j in range(P)]
    counts = np.array([(~fast_mcd(rng.normal(size=(M, P)), names, seed=int(rng.integers(2**31))).kept).sum()
                       for _ in range(REPEATS)], dtype=float)
    se = math.hypot(stated_se, counts.std(ddof=1) / math.sqrt(REPEATS))
    assert abs(counts.mean() - stated) < 4 * se, (counts.mean(), stated, se)
    # the context is not the known-parameter count 0.025 m: at m = 60 the reweighting flags several times more
    assert counts.mean() > 0.025 * M + 4 * counts.std(ddof=1) / math.sqrt(REPEATS)
