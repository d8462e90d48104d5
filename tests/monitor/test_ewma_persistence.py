"""The k-of-m persistence rule: its stated false-alarm rate (binomial tail) checked by simulation."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

import whiten
from whiten.monitor.persistence import Persistence, persist_rate, persist_row_level


@pytest.mark.parametrize("k, m, rate", [(1, 1, 0.01), (2, 3, 0.01), (3, 5, 0.001), (5, 10, 0.002)])
def test_row_level_solves_the_binomial_tail(k, m, rate):
    a = persist_row_level(k, m, rate)
    assert 0.0 < a < 1.0
    # scipy.stats.binom: the tail at the solved level is the rate asked for
    assert abs(stats.binom.sf(k - 1, m, a) - rate) < 1e-10 * rate
    assert persist_rate(k, m, a) == pytest.approx(rate, rel=1e-10)


@pytest.mark.parametrize("k, m, rate", [(2, 3, 0.01), (3, 5, 0.005)])
def test_rate_under_independence_by_simulation(k, m, rate):
    rng = np.random.default_rng(k * 100 + m)
    n = 400_000
    pv = rng.uniform(size=n)  # in-control p-values of independent rows are uniform
    rule = Persistence(k, m, rate)
    count, alarm = rule.update(pv)
    frac = alarm[m - 1:].mean()
    # overlapping windows make alarms of rows less than m apart dependent: the variance of the mean is at
    # most (2m - 1) rate (1 - rate) / n; allow 4 such standard errors
    se = np.sqrt((2 * m - 1) * rate * (1 - rate) / n)
    assert abs(frac - rate) < 4.0 * se
    # the count is the plain sliding-window sum (numpy.convolve)
    ref = np.convolve(pv < rule.row_level, np.ones(m, dtype=int))[:n]
    assert np.array_equal(count, ref)


def test_chunks_give_the_same_alarms_and_unscored_rows_do_not_count():
    rng = np.random.default_rng(3)
    pv = rng.uniform(size=1000) ** 3  # many small p-values
    pv[[10, 11, 500]] = np.nan
    whole = Persistence(3, 6, 0.01).update(pv)
    rule = Persistence(3, 6, 0.01)
    parts = [rule.update(pv[a:b]) for a, b in ((0, 1), (1, 9), (9, 400), (400, 1000))]
    assert np.array_equal(np.concatenate([c for c, _ in parts]), whole[0])
    assert np.array_equal(np.concatenate([a for _, a in parts]), whole[1])
    assert rule.n_alarm == int(whole[1].sum())


def test_scoring_with_persistence_holds_alpha_on_healthy_rows():
    # known Gaussian, 3 sensors, alpha 0.01: the rule's alarm rate on healthy rows is alpha
    g = whiten.Gaussian(np.zeros(3), [[1.0, 0.3, 0.1], [0.3, 1.0, 0.2], [0.1, 0.2, 1.0]], columns=["a", "b", "c"])
    x = np.random.default_rng(9).multivariate_normal(np.zeros(3), g.matrix if hasattr(g, "matrix") else
                                                     [[1.0, 0.3, 0.1], [0.3, 1.0, 0.2], [0.1, 0.2, 1.0]],
                                                     size=100_000)
    s = whiten.monitor.score(g, x, phase="known", alpha=0.01, persist=(2, 4))
    m = 4
    frac = s["persist_alarm"].to_numpy()[m - 1:].mean()
    assert abs(frac - 0.01) < 4.0 * np.sqrt((2 * m - 1) * 0.01 / len(x))
    lvl = s.attrs["persist_row_level"]
    # persist_limit is the d2 limit at the per-row level: chi-square(3) quantile (scipy.stats)
    assert s["persist_limit"].iloc[0] == pytest.approx(stats.chi2.isf(lvl, 3), rel=1e-12)
    assert "binomial tail" in s.attrs["persist_basis"]
