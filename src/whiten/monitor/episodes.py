"""Alarm episodes: runs of alarming rows, joined across short gaps, each with its peak and leading sensors.

What a shift reads first is not the worst rows of a file but its episodes:
when each run of alarms started and ended, how long it lasted, how high it
went and which sensors led it.

The gap rule
------------
Rows are taken in file order. An episode starts at an alarming row
(``alarm`` true) and goes on while the next alarming row comes after at most
``gap`` rows without an alarm; a longer quiet stretch ends it. With
``gap=0`` an episode is one unbroken run of alarms; the default ``gap=2``
joins runs separated by one or two quiet rows (a fault that flickers around
its limit is one event, not many). Rows that could not be scored count as
quiet rows. ``rows`` is the span from the first to the last alarming row,
quiet rows in between included; ``alarm_rows`` counts the alarming ones.

Fields of each episode (:data:`EPISODE_COLUMNS`)
------------------------------------------------
``episode`` (1, 2, ... in file order), ``start`` and ``end`` (row labels of
the first and last alarming rows), ``first_row`` and ``last_row`` (their
0-based data rows), ``rows``, ``alarm_rows``, ``peak`` (label of the row with
the largest d2 among the alarming rows; the first such row on a tie),
``peak_row``, ``peak_d2``, ``peak_p_value``, then ``lead_1``..``lead_3`` and
``share_1``..``share_3``: the sensors with the largest ``drop:`` terms at the
peak and each one's share of the peak's distance, ``drop / d2`` (the part of
d2 that goes when the sensor is left out; shares need not add to 1).

The episodes of a streamed file are gathered chunk by chunk
(:class:`EpisodeTracker`, kept by :class:`~whiten.monitor.ScoreDigest`);
:func:`episodes` gives the same table from an in-memory score table.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from ..errors import InputError

__all__ = ["episodes", "EpisodeTracker", "EPISODE_COLUMNS", "DEFAULT_GAP", "LEADERS", "check_gap"]

DEFAULT_GAP = 2
"""Quiet rows that may separate two runs of alarms joined into one episode."""
LEADERS = 3
"""Leading sensors named per episode."""
EPISODE_COLUMNS = ["episode", "start", "end", "first_row", "last_row", "rows", "alarm_rows", "peak", "peak_row",
                   "peak_d2", "peak_p_value"] + [f"{k}_{i}" for i in range(1, LEADERS + 1) for k in ("lead", "share")]


def check_gap(gap: Any, name: str = "gap") -> int:
    """``gap`` as a whole number of rows >= 0, else InputError."""
    if isinstance(gap, bool) or not isinstance(gap, (int, np.integer)) or gap < 0:
        raise InputError(f"{name}: expected a whole number of quiet rows >= 0 (e.g. 2), got {gap!r}")
    return int(gap)


class EpisodeTracker:
    """Episodes of a scoring run, fed one chunk of score columns at a time (memory: one record per episode).

    Examples
    --------
    >>> import numpy as np
    >>> t = EpisodeTracker(["a", "b"], gap=1)
    >>> alarm = np.array([0, 1, 1, 0, 1, 0, 0, 1], dtype=bool)
    >>> d2 = np.array([1, 20, 30, 2, 25, 1, 1, 40.0])
    >>> t.add({"d2": d2, "p_value": 1 / d2, "alarm": alarm, "drop:a": d2 / 2, "drop:b": d2 / 4})
    >>> [(e["first_row"], e["last_row"], e["alarm_rows"], e["peak_row"]) for e in t.records()]
    [(1, 4, 3, 2), (7, 7, 1, 7)]
    """

    def __init__(self, sensors: Sequence[str], *, gap: int = DEFAULT_GAP):
        self.sensors = [str(s) for s in sensors]
        self.gap = check_gap(gap)
        self._done: list[dict] = []
        self._open: dict | None = None
        self._rows = 0

    def add(self, cols: dict, index: Any = None) -> None:
        """Take one chunk of score columns (``d2``, ``p_value``, ``alarm``, ``drop:``/``dev:``) and labels."""
        alarm = np.asarray(cols["alarm"], dtype=bool)
        k = alarm.shape[0]
        first = self._rows
        self._rows += k
        pos = np.flatnonzero(alarm)
        if pos.size == 0:
            return
        d2 = np.asarray(cols["d2"], dtype=float)

        def label(i: int) -> Any:
            if index is None:
                return first + i
            v = index[i]
            return v.item() if hasattr(v, "item") else v

        # alarm rows split where more than `gap` quiet rows separate them
        cuts = np.flatnonzero(np.diff(pos) > self.gap + 1) + 1
        for group in np.split(pos, cuts):
            a, b = int(group[0]), int(group[-1])
            top = int(group[np.argmax(np.where(np.isnan(d2[group]), -np.inf, d2[group]))])
            part = {"first_row": first + a, "last_row": first + b, "alarm_rows": int(group.size),
                    "start": label(a), "end": label(b), "peak_row": first + top, "peak": label(top),
                    "peak_d2": float(d2[top]), "_peak": {c: np.asarray(v)[top] for c, v in cols.items()}}
            op = self._open
            if op is not None and part["first_row"] - op["last_row"] <= self.gap + 1:
                op.update(last_row=part["last_row"], end=part["end"], alarm_rows=op["alarm_rows"] + part["alarm_rows"])
                if part["peak_d2"] > op["peak_d2"]:
                    op.update(peak_row=part["peak_row"], peak=part["peak"], peak_d2=part["peak_d2"],
                              _peak=part["_peak"])
            else:
                if op is not None:
                    self._done.append(op)
                self._open = part

    def records(self) -> list[dict]:
        """Every episode so far (the last one may still grow), in file order, as plain dicts."""
        eps = self._done + ([self._open] if self._open is not None else [])
        out = []
        for n, e in enumerate(eps, start=1):
            peak = e["_peak"]
            rec = {"episode": n, "start": e["start"], "end": e["end"], "first_row": e["first_row"],
                   "last_row": e["last_row"], "rows": e["last_row"] - e["first_row"] + 1,
                   "alarm_rows": e["alarm_rows"], "peak": e["peak"], "peak_row": e["peak_row"],
                   "peak_d2": e["peak_d2"], "peak_p_value": float(peak.get("p_value", np.nan))}
            drops = np.array([float(peak.get(f"drop:{s}", np.nan)) for s in self.sensors])
            order = [j for j in np.argsort(-np.nan_to_num(drops, nan=-np.inf), kind="stable")
                     if np.isfinite(drops[j])][:LEADERS]
            for i in range(LEADERS):
                j = order[i] if i < len(order) else None
                rec[f"lead_{i + 1}"] = self.sensors[j] if j is not None else ""
                rec[f"share_{i + 1}"] = (float(drops[j] / e["peak_d2"]) if j is not None and e["peak_d2"] > 0
                                         else np.nan)
            out.append(rec)
        return out

    def frame(self, *, index_name: str | None = None):
        """The episodes as a DataFrame with :data:`EPISODE_COLUMNS` (indexed by ``episode``)."""
        import pandas as pd

        df = pd.DataFrame(self.records(), columns=EPISODE_COLUMNS).set_index("episode")
        df.attrs["gap"] = self.gap
        df.attrs["index_name"] = index_name or "row"
        return df

    def peak_rows(self, limit: int | None = None):
        """The peak row of each episode (every score column), first episodes first, at most ``limit``."""
        import pandas as pd

        eps = (self._done + ([self._open] if self._open is not None else []))[:limit]
        if not eps:
            return pd.DataFrame(columns=["d2"])
        return pd.DataFrame([e["_peak"] for e in eps], index=pd.Index([e["peak"] for e in eps]))

    def __len__(self) -> int:
        return len(self._done) + (self._open is not None)


def episodes(scores: Any, *, gap: int = DEFAULT_GAP):
    """The alarm episodes of a score table (from :func:`whiten.monitor.score`), by the gap rule above.

    Parameters
    ----------
    scores : pandas.DataFrame
        A score table, rows in time order; its index labels ``start``/``end``/``peak``.
    gap : int
        Quiet rows that may separate two runs of alarms in one episode (default 2).

    Returns
    -------
    pandas.DataFrame
        One row per episode, columns :data:`EPISODE_COLUMNS` (``episode`` is the index);
        ``attrs["gap"]`` is the rule used.

    Raises
    ------
    InputError
        Not a score table, or ``gap`` not a whole number >= 0.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.0], [0.0, 1.0]], columns=["a", "b"])
    >>> x = np.zeros((10, 2)); x[[3, 4, 6], 0] = 8.0
    >>> ep = whiten.monitor.episodes(whiten.monitor.score(g, x, phase="known"), gap=1)
    >>> ep[["first_row", "last_row", "alarm_rows", "lead_1"]].values.tolist()
    [[3, 6, 3, 'a']]
    """
    have = set(getattr(scores, "columns", []))
    gone = [c for c in ("d2", "p_value", "alarm") if c not in have]
    if gone or not hasattr(scores, "attrs"):
        raise InputError(f"scores: expected the DataFrame returned by whiten.monitor.score; missing columns {gone}")
    sensors = [str(c)[5:] for c in scores.columns if str(c).startswith("drop:")]
    t = EpisodeTracker(sensors, gap=gap)
    t.add({str(c): scores[c].to_numpy() for c in scores.columns}, index=scores.index)
    return t.frame(index_name=scores.index.name)
