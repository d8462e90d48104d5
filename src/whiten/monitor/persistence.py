"""A persistence rule for the per-row distance: alarm when k of the last m rows exceed a limit.

A drift or a small sustained shift pushes many rows a little over a limit
rather than one row far over it. The rule counts, for each row, how many of
the last ``m`` rows (the row itself included) have a p-value below a per-row
level ``a`` and alarms when the count reaches ``k``.

For independent in-control rows each exceeds with probability ``a``, so a row
with m rows behind it alarms with probability the binomial tail

    rate = P(Binomial(m, a) >= k).

By default ``a`` is solved from that equation so that the rule's per-row
false-alarm rate equals the T² screen's ``alpha``: the two can then be
compared at the same in-control rate. Rows that could not be scored count as
not exceeding; the first m - 1 rows of a run have a shorter window (a lower
rate). With ``phase="new"`` the rows share one estimated baseline, so their
exceedances are not quite independent; the binomial rate holds exactly for
known parameters and approximately otherwise. Autocorrelated readings make
exceedances cluster and the rule fire more often than stated.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..errors import InputError

__all__ = ["Persistence", "parse_persist", "persist_rate", "persist_row_level"]


def parse_persist(persist: Any, name: str = "persist") -> tuple[int, int]:
    """``(k, m)`` from a pair or a text ``"k/m"``, checked: 1 <= k <= m <= 10000."""
    if isinstance(persist, str):
        parts = persist.replace(" ", "").split("/")
        if len(parts) != 2:
            raise InputError(f"{name}: expected K/M (alarm when K of the last M rows exceed), got {persist!r}")
        persist = parts
    try:
        k, m = (int(v) for v in persist)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected two integers K and M (alarm when K of the last M rows exceed), "
                         f"got {persist!r}") from None
    if not (1 <= k <= m <= 10_000):
        raise InputError(f"{name}: need 1 <= K <= M <= 10000, got K={k}, M={m}")
    return k, m


def persist_rate(k: int, m: int, a: float) -> float:
    """P(Binomial(m, a) >= k): the rule's per-row false-alarm rate for independent rows."""
    from scipy import stats

    return float(stats.binom.sf(k - 1, m, a))


def persist_row_level(k: int, m: int, rate: float) -> float:
    """The per-row level ``a`` with P(Binomial(m, a) >= k) = rate (monotone in a; Brent's method)."""
    from scipy import optimize

    if k == 1 and m == 1:
        return rate
    f = lambda a: math.log(max(persist_rate(k, m, a), 1e-320)) - math.log(rate)  # noqa: E731
    # the union bound P(Bin(m, a) >= k) <= C(m, k) a^k puts the root above a0 = (rate / C(m, k))^(1/k)
    lo = min((rate / math.comb(m, k)) ** (1.0 / k), 0.5)
    hi = 1.0 - 1e-15
    if f(lo) >= 0.0:
        return lo
    return float(optimize.brentq(f, lo, hi, xtol=1e-300, rtol=1e-13, maxiter=500))


class Persistence:
    """The k-of-m rule's state across batches: the last m - 1 exceedance flags.

    Parameters
    ----------
    k, m : int
        Alarm when at least k of the last m rows exceed.
    rate : float
        Per-row false-alarm rate the rule is set to (independent rows);
        the per-row level is ``row_level = a`` solving the binomial tail.
    """

    def __init__(self, k: int, m: int, rate: float):
        self.k, self.m = int(k), int(m)
        self.rate = float(rate)
        self.row_level = persist_row_level(self.k, self.m, self.rate)
        self._tail = np.zeros(0, dtype=bool)
        self.n_alarm = 0
        self.first_alarm: int | None = None
        self._rows = 0

    def update(self, p_value: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(count, alarm) per row: exceedances among the last m rows, and count >= k."""
        pv = np.asarray(p_value, dtype=float)
        exceed = np.zeros(pv.shape[0], dtype=bool)
        ok = ~np.isnan(pv)
        exceed[ok] = pv[ok] < self.row_level
        seq = np.concatenate([self._tail, exceed])
        csum = np.concatenate([[0], np.cumsum(seq, dtype=np.int64)])
        end = np.arange(self._tail.size + 1, seq.size + 1)
        count = csum[end] - csum[np.maximum(end - self.m, 0)]
        alarm = count >= self.k
        self._tail = seq[max(0, seq.size - (self.m - 1)):] if self.m > 1 else np.zeros(0, dtype=bool)
        if alarm.any() and self.first_alarm is None:
            self.first_alarm = self._rows + int(np.flatnonzero(alarm)[0])
        self.n_alarm += int(alarm.sum())
        self._rows += pv.shape[0]
        return count, alarm

    def describe(self) -> str:
        return (f"persistence: alarm when {self.k} of the last {self.m} rows have p < {self.row_level:.3g}; "
                f"per-row false-alarm rate {self.rate:.3g} for independent in-control rows "
                f"(binomial tail P(Bin({self.m}, {self.row_level:.3g}) >= {self.k}))")

    def attrs(self) -> dict:
        return {"persist": [self.k, self.m], "persist_row_level": self.row_level, "persist_rate": self.rate,
                "persist_basis": self.describe()}
