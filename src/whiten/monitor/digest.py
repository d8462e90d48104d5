"""What a summary, a chart or a report of a scoring run needs, gathered chunk by chunk.

Scoring a file of tens of millions of rows streams: each chunk is scored,
written and forgotten. :class:`ScoreDigest` is what is kept: counts (rows,
alarms, false-discovery flags, rows not fully scored), the sensors that lead
the alarms, the few worst rows whole, and a trace of ``d2`` for the control
chart whose size is bounded. Up to ``chart_points`` rows the trace is every
row; beyond, consecutive rows are pooled into bins of a power-of-two width,
each bin keeping its largest ``d2``, its lowest limit and whether any row in it
alarmed, so no alarm disappears from the chart however long the file.

The same digest is built from an in-memory score table
(:meth:`ScoreDigest.from_frame`), so the command line and
:func:`whiten.report.monitoring_report` share one path.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..errors import InputError
from .episodes import DEFAULT_GAP, EpisodeTracker

__all__ = ["ScoreDigest"]

_NEED = ("d2", "p_value", "limit", "alarm")


def need_score_columns(scores: Any, columns: Sequence[str]) -> None:
    """Refuse anything but a score table (from :func:`whiten.monitor.score`) holding ``columns``."""
    have = set(getattr(scores, "columns", []))
    gone = [c for c in columns if c not in have]
    if gone or not hasattr(scores, "attrs"):
        raise InputError(f"scores: expected the DataFrame returned by whiten.monitor.score; missing columns {gone}")


class ScoreDigest:
    """Bounded-memory record of a scoring run, fed one chunk of score columns at a time.

    Parameters
    ----------
    sensors : sequence of str
        The model's sensors (the ``drop:``/``dev:`` columns name them).
    attrs : dict, optional
        Run settings (alpha, phase, limit basis, ...) as in a score table's ``attrs``.
    worst : int
        Rows kept whole: the ``worst`` smallest p-values and the ``worst``
        largest distances.
    chart_points : int
        Rows kept one by one for the control chart before pooling into bins
        (default 20000: more points than a chart is pixels wide, and a few
        hundred kilobytes however long the run).
    gap : int
        The episode gap rule (:mod:`whiten.monitor.episodes`): quiet rows
        that may separate two runs of alarms in one episode (default 2).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> from whiten.monitor import Scorer, ScoreDigest
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.5], [0.5, 1.0]], columns=["a", "b"])
    >>> sc = Scorer(g, phase="known")
    >>> dig = ScoreDigest(sc.columns, attrs=sc.attrs(), chart_points=4)
    >>> x = np.random.default_rng(1).normal(size=(10, 2)); x[7] = [5.0, -5.0]
    >>> for part in (x[:6], x[6:]):
    ...     dig.add(sc.score_array(part))
    >>> dig.n_rows, dig.n_alarm, dig.rows_per_point, int(dig.worst_by_p().index[0])
    (10, 1, 4, 7)
    """

    def __init__(self, sensors: Sequence[str], *, attrs: dict | None = None, worst: int = 5,
                 chart_points: int = 20_000, gap: int = DEFAULT_GAP):
        if int(worst) < 1 or int(chart_points) < 1:
            raise InputError(f"worst and chart_points must be positive, got {worst} and {chart_points}")
        self.sensors = [str(s) for s in sensors]
        self.attrs = dict(attrs or {})
        self.k = int(worst)
        self.cap = int(chart_points)
        self.n_rows = self.n_scored = self.n_alarm = self.n_partial = self.n_none = 0
        self.n_fdr: int | None = None
        self.d2_max = -np.inf
        self.leaders: Counter = Counter()
        self.rows_per_point = 1
        self._pt = {"d2": np.empty(0), "limit": np.empty(0), "alarm": np.empty(0, dtype=bool),
                    "bin": np.empty(0, dtype=np.int64), "label": np.empty(0, dtype=np.int64)}
        self._by_p = None  # small DataFrames of whole rows
        self._by_d2 = None
        self.index_name: str | None = None
        # what whiten.monitor.score_file read: the file, and its columns not in the model
        self.source: str | None = None
        self.ignored_columns: list[str] = []
        self.notes: list[str] = []  # plain-words remarks of the run (e.g. no index column)
        self.index_column: str | None = None  # the column that labelled the rows, if any
        self._episodes = EpisodeTracker(self.sensors, gap=gap)
        self.drift: dict = {}  # per drift rule (ewma=, persist=): alarms and first alarm row, set by score_file

    # ------------------------------------------------------------------ feed
    @classmethod
    def from_frame(cls, scores: Any, *, worst: int = 5, chart_points: int | None = None,
                   gap: int = DEFAULT_GAP) -> ScoreDigest:
        """The digest of an in-memory score table (every row on the chart unless ``chart_points``)."""
        need_score_columns(scores, _NEED)
        attrs = dict(scores.attrs)
        sensors = attrs.get("sensors") or [str(c)[5:] for c in scores.columns if str(c).startswith("drop:")]
        dig = cls(sensors, attrs=attrs, worst=worst, chart_points=chart_points or max(1, len(scores)), gap=gap)
        dig.add({str(c): scores[c].to_numpy() for c in scores.columns}, index=scores.index)
        dig.index_name = scores.index.name
        return dig

    def add(self, cols: dict, index: Any = None) -> None:
        """Take one chunk of score columns (as from :meth:`Scorer.score_array`) and its row labels."""
        import pandas as pd

        d2 = np.asarray(cols["d2"], dtype=float)
        k = d2.shape[0]
        if k == 0:
            return
        if index is not None and len(index) != k:
            raise InputError(f"index: expected {k} row labels, got {len(index)}")
        if index is not None and getattr(index, "name", None) is not None:
            self.index_name = index.name
        first = self.n_rows

        def labels(pos: np.ndarray) -> np.ndarray:
            # row labels of chunk positions, made only where needed, in their own dtype
            # (int64 row numbers, datetime64 stamps; object only for text labels)
            if index is None:
                return (first + pos).astype(np.int64)
            return np.asarray(index.take(pos) if hasattr(index, "take") else np.asarray(index)[pos])

        pv = np.asarray(cols["p_value"], dtype=float)
        lim = np.asarray(cols["limit"], dtype=float)
        alarm = np.asarray(cols["alarm"], dtype=bool)
        scored = ~np.isnan(d2)
        p = len(self.sensors)
        if "n_observed" in cols:
            nobs = np.asarray(cols["n_observed"])
            self.n_none += int(np.sum(nobs == 0))
            self.n_partial += int(np.sum((nobs > 0) & (nobs < p))) if p else 0
        else:
            self.n_none += int((~scored).sum())
        n_scored = int(scored.sum())
        self.n_scored += n_scored
        self.n_alarm += int(alarm.sum())
        if "alarm_fdr" in cols:
            self.n_fdr = (self.n_fdr or 0) + int(np.asarray(cols["alarm_fdr"], dtype=bool).sum())
        if n_scored:
            self.d2_max = max(self.d2_max, float(np.nanmax(d2)))
        if alarm.any() and "top_contributor" in cols:
            self.leaders.update(str(v) for v in np.asarray(cols["top_contributor"], dtype=object)[alarm])
        self._trace(d2, lim, alarm, labels)
        self._episodes.add(cols, index=index if index is not None else pd.RangeIndex(first, first + k))
        # whole rows: this chunk's candidates (every row tied with the k-th, so the order stays exact),
        # merged with those kept so far
        if n_scored:
            idx = np.flatnonzero(scored) if n_scored < k else np.arange(k)
            # the k first under the final order (p-value, larger d2, file order); a partition finds
            # the candidates, a sort of those few (ties with the k-th included) picks them exactly
            cand = _smallest(pv[idx], self.k, idx)
            pick_p = cand[np.lexsort((cand, -d2[cand], pv[cand]))[: self.k]]
            cand = _smallest(-d2[idx], self.k, idx)
            pick_d = cand[np.lexsort((cand, -d2[cand]))[: self.k]]
            both = np.union1d(pick_p, pick_d)
            part = pd.DataFrame({c: np.asarray(v)[both] for c, v in cols.items()},
                                index=pd.Index(labels(both)))
            part["_order"] = self.n_rows + both
            self._by_p = self._keep(self._by_p, part, by_p=True)
            self._by_d2 = self._keep(self._by_d2, part, by_p=False)
        self.n_rows += k

    def _keep(self, kept, part, *, by_p: bool):
        import pandas as pd

        frame = part if kept is None else pd.concat([kept, part])
        d2 = frame["d2"].to_numpy(dtype=float)
        order = frame["_order"].to_numpy()
        if by_p:
            sel = np.lexsort((order, -d2, frame["p_value"].to_numpy(dtype=float)))
        else:
            sel = np.lexsort((order, -d2))
        return frame.iloc[sel[: self.k]]

    def _trace(self, d2, lim, alarm, labels) -> None:
        rows = np.arange(self.n_rows, self.n_rows + d2.shape[0])
        new = _pool(d2, lim, alarm, rows // self.rows_per_point)
        new["label"] = labels(new.pop("start"))
        pt = self._pt
        if pt["bin"].size and new["bin"].size and pt["bin"][-1] == new["bin"][0]:
            # the chunk continues the last bin: pool the two points
            two = {key: np.concatenate([pt[key][-1:], new[key][:1]]) for key in pt}
            merged = _pool(two["d2"], two["limit"], two["alarm"], two["bin"])
            merged["label"] = two["label"][merged.pop("start")]
            pt = {key: np.concatenate([v[:-1], merged[key], new[key][1:]]) for key, v in pt.items()}
        else:
            pt = {key: np.concatenate([v, new[key]]) for key, v in pt.items()}
        while pt["bin"].size > self.cap:
            self.rows_per_point *= 2
            label = pt["label"]
            pt = _pool(pt["d2"], pt["limit"], pt["alarm"], pt["bin"] // 2)
            pt["label"] = label[pt.pop("start")]
        self._pt = pt

    # ------------------------------------------------------------- results
    def trace(self):
        """The control-chart points: a DataFrame with ``d2``, ``limit``, ``alarm`` and ``first_row``.

        With ``rows_per_point > 1`` each point is a bin of that many consecutive
        rows: its largest ``d2``, its lowest limit, and ``alarm`` when any row in
        it alarmed. ``attrs`` carries the run settings plus ``rows_per_point``
        and the exact ``n_alarm``.
        """
        import pandas as pd

        pt = self._pt
        out = pd.DataFrame({"d2": pt["d2"], "limit": pt["limit"], "alarm": pt["alarm"],
                            "first_row": pt["bin"] * self.rows_per_point},
                           index=pd.Index(pt["label"], name=self.index_name or "row"))
        out.attrs.update(self.attrs)
        out.attrs.update({"rows_per_point": self.rows_per_point, "n_alarm": self.n_alarm,
                          "n_not_scored": self.n_none})
        return out

    def _rows(self, kept):
        import pandas as pd

        if kept is None:
            return pd.DataFrame(columns=list(_NEED))
        out = kept.drop(columns="_order")
        out.index.name = self.index_name or "row"
        out.attrs.update(self.attrs)
        return out

    def worst_by_p(self):
        """The kept rows (every score column) with the smallest p-values, ties by larger d2, then file order."""
        return self._rows(self._by_p)

    def worst_by_d2(self):
        """The kept rows (every score column) with the largest distances."""
        return self._rows(self._by_d2)

    def episodes(self):
        """The alarm episodes so far (:mod:`whiten.monitor.episodes`): one row each, in file order."""
        out = self._episodes.frame(index_name=self.index_name)
        out.attrs.update({k: v for k, v in self.attrs.items() if k in ("alpha", "phase", "model")})
        return out

    def episode_peaks(self, limit: int | None = None):
        """The peak row (every score column) of the first ``limit`` episodes, first episodes first."""
        out = self._episodes.peak_rows(limit)
        out.index.name = self.index_name or "row"
        out.attrs.update(self.attrs)
        return out

    @property
    def gap(self) -> int:
        """The episode gap rule: quiet rows that may separate two runs of alarms in one episode."""
        return self._episodes.gap

    @property
    def n_episodes(self) -> int:
        return len(self._episodes)


def _smallest(v: np.ndarray, k: int, idx: np.ndarray) -> np.ndarray:
    """Entries of ``idx`` whose ``v`` is among the k smallest, ties with the k-th included."""
    if v.size <= k:
        return idx
    kth = np.partition(v, k - 1)[k - 1]
    return idx[v <= kth]


def _pool(d2, lim, alarm, bins) -> dict:
    """Points of consecutive equal ``bins`` pooled: largest d2, lowest limit, any alarm; ``start`` is
    each point's first position (for its label)."""
    if bins.size == 0:
        return {"d2": d2, "limit": lim, "alarm": alarm, "bin": bins, "start": np.empty(0, dtype=np.intp)}
    starts = np.flatnonzero(np.r_[True, bins[1:] != bins[:-1]])
    if starts.size == bins.size:  # nothing to pool
        return {"d2": d2.copy(), "limit": lim.copy(), "alarm": alarm.copy(), "bin": bins.copy(), "start": starts}
    filled = np.where(np.isnan(d2), -np.inf, d2)
    top = np.maximum.reduceat(filled, starts)
    top = np.where(np.isneginf(top), np.nan, top)  # a bin of unscored rows stays unscored
    low = np.fmin.reduceat(lim, starts)
    return {"d2": top, "limit": low, "alarm": np.logical_or.reduceat(alarm, starts), "bin": bins[starts],
            "start": starts}
