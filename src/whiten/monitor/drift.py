"""The drift options of scoring (``ewma=``, ``persist=``), shared by :func:`score` and :func:`score_file`.

Columns added (after the per-row ones; state carries across the chunks of a file)
--------------------------------------------------------------------------------
``ewma_t2``           multivariate EWMA statistic z_t' S_t^{-1} z_t (NaN on held rows)
``ewma_limit``        its limit h for the in-control ARL asked for
``ewma_alarm``        ``ewma_t2 > ewma_limit``
``ewma_top``          sensor with the largest ``smooth:`` term
``ewma_rows``         complete rows smoothed in so far (held rows do not count)
``smooth:<sensor>``   the smoothed statistic minus its value without that sensor
``persist_count``     rows among the last m with p_value below the rule's per-row level
``persist_limit``     the d2 that per-row level corresponds to
``persist_alarm``     ``persist_count >= k``

See :mod:`whiten.monitor.ewma` and :mod:`whiten.monitor.persistence`.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .ewma import DEFAULT_DRAWS, DEFAULT_SEED, EwmaSmoother, _check_arl, check_lambda, mewma_limit
from .limits import t2_limit
from .persistence import Persistence, parse_persist

__all__ = ["DriftRules"]

_HELD = "ewma: held, not smoothed in (a reading is missing)"


class DriftRules:
    """The EWMA chart and the persistence rule set up for one scorer, fed batch after batch."""

    def __init__(self, scorer: Any, *, ewma: float | None = None, ewma_arl: float | None = None,
                 persist: Any = None):
        self.scorer = scorer
        self.ewma: EwmaSmoother | None = None
        self.persist: Persistence | None = None
        if ewma is None and ewma_arl is not None:
            from ..errors import InputError

            raise InputError("ewma_arl: given without ewma; set ewma=LAMBDA (e.g. 0.1) to chart the EWMA statistic")
        if ewma is not None:
            lam = check_lambda(ewma)
            # default: the run length of the per-row screen, 1 / alpha, so both share one in-control rate
            arl = _check_arl(1.0 / scorer.alpha if ewma_arl is None else ewma_arl)
            lim = mewma_limit(scorer.p, lam, arl, draws=DEFAULT_DRAWS, seed=DEFAULT_SEED)
            self.ewma = EwmaSmoother(scorer.mean, scorer.factor, scorer.columns, lam, lim)
        if persist is not None:
            k, m = parse_persist(persist)
            self.persist = Persistence(k, m, scorer.alpha)

    @property
    def active(self) -> bool:
        return self.ewma is not None or self.persist is not None

    def add(self, x: np.ndarray, cols: dict[str, np.ndarray]) -> None:
        """Append the drift columns for the rows ``x`` (model order) to the score columns ``cols``."""
        if self.ewma is not None:
            held = np.isnan(x).any(axis=1)
            cols.update(self.ewma.update(x))
            if held.any():
                note = cols["note"]
                for i in np.flatnonzero(held):
                    note[i] = f"{note[i]}; {_HELD}" if note[i] else _HELD
        if self.persist is not None:
            count, alarm = self.persist.update(cols["p_value"])
            sc = self.scorer
            lim = t2_limit(self.persist.row_level, cols["n_observed"], sc.m, phase=sc.phase)
            cols["persist_count"] = count
            cols["persist_limit"] = np.asarray(lim, dtype=float)
            cols["persist_alarm"] = alarm

    def attrs(self) -> dict:
        out: dict = {}
        if self.ewma is not None:
            out.update(self.ewma.attrs())
        if self.persist is not None:
            out.update(self.persist.attrs())
        return out

    def summary(self) -> dict:
        """Counts for a digest: alarms and the 0-based row of the first, per rule."""
        out: dict = {}
        if self.ewma is not None:
            out["ewma"] = {"n_alarm": self.ewma.n_alarm, "first_alarm_row": self.ewma.first_alarm,
                           "n_held": self.ewma.n_held}
        if self.persist is not None:
            out["persist"] = {"n_alarm": self.persist.n_alarm, "first_alarm_row": self.persist.first_alarm}
        return out
