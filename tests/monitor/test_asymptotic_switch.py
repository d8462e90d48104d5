"""The asymptotic switch of the limit law (issue 19, part A, loose end 1a).

Above ``ASYMPTOTIC_CELLS`` reference cells (m p > 2e5) robust and weighted baselines use the sample
estimator's exact F law with no simulation; shrinkage baselines are simulated whatever m p, because the
sample law failed for them here (p = 20, m = 10001: a false-alarm rate of 0.0069 at alpha 0.01, 17
binomial standard errors low). Reference: an independent simulation (fresh Gaussian reference sets
fitted by ``fit_baseline`` itself, fresh rows scored), against the binomial error of the pooled alarm
count combined with the spread of the per-baseline rates (batch means), plus the stated Monte Carlo
error of a simulated limit.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import whiten
from whiten.monitor.calibrated import ASYMPTOTIC_CELLS

ALPHA = 0.01
P = 10
M = ASYMPTOTIC_CELLS // P + 1  # just above the threshold
REPEATS = 3
FRESH = 100_000


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")
@pytest.mark.parametrize("estimator", ["robust", "weighted", "shrinkage"])
def test_false_alarm_rate_just_above_the_asymptotic_threshold(estimator):
    rng = np.random.default_rng({"robust": 11, "weighted": 12, "shrinkage": 13}[estimator])
    rates, mc = [], []
    for _ in range(REPEATS):
        a = np.eye(P) + 0.3 * rng.normal(size=(P, P))
        x = rng.normal(size=(M, P)) @ a
        kw: dict = {"estimator": "sample" if estimator == "weighted" else estimator}
        if estimator == "weighted":
            kw["weights"] = rng.integers(1, 4, size=M).astype(float)
        b = whiten.fit_baseline(x, **kw)
        s = b.score(rng.normal(size=(FRESH, P)) @ a, alpha=ALPHA)
        if estimator == "shrinkage":
            assert b.limit_law is not None and s.attrs["limit_law"] == "simulated"
            mc.append(b.limit_law.se_at(ALPHA))
        else:  # no simulation ran: the sample law with the baseline's m, stated as asymptotic
            assert b.limit_law is None and s.attrs["limit_law"] == "asymptotic"
            assert s.attrs["limit_basis"].startswith("asymptotic:")
        rates.append(float(s.alarm.mean()))
    r = np.array(rates)
    binom = math.sqrt(ALPHA * (1 - ALPHA) / (REPEATS * FRESH))
    batch = r.std(ddof=1) / math.sqrt(REPEATS)
    limit_se = math.sqrt(np.mean(np.square(mc)) / REPEATS) if mc else 0.0
    tol = 4 * math.sqrt(binom ** 2 + batch ** 2 + limit_se ** 2)
    assert abs(r.mean() - ALPHA) < tol, (estimator, r, tol)
