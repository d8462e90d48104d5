"""Score rows of sensor data against a baseline: distance, p-value, alarm, and why.

Output columns of :func:`score` (one row per input row, input order and index)
------------------------------------------------------------------------------
``d2``              squared Mahalanobis distance on the sensors observed
``p_value``         upper-tail probability of d2 under the law of ``phase``
``limit``           the d2 the row would need to exceed for an alarm at ``alpha``
``alarm``           ``p_value < alpha`` (False when the row could not be scored)
``n_observed``      sensors present in the row
``top_contributor`` sensor with the largest ``drop:`` term (empty when not scored)
``note``            plain words for partial or unscored rows (empty otherwise)
``p_bh``, ``alarm_fdr``  only with ``fdr=q``: Benjamini–Hochberg adjusted
                    p-value and ``p_bh <= q`` across the batch

Per-sensor columns follow one pattern, ``<kind>:<sensor>``:

``drop:<sensor>``   d2 minus the d2 without that sensor (order free)
``chain:<sensor>``  the sensor's term of the conditional decomposition along
                    ``order``; the chain terms of a row sum to d2
``dev:<sensor>``    plain standardized deviation (x - mean) / sd

Unobserved sensors get NaN in all three.

With ``ewma=`` and ``persist=`` the drift columns of :mod:`whiten.monitor.drift`
follow (``ewma_t2``, ``ewma_limit``, ``ewma_alarm``, ``ewma_top``, ``ewma_rows``,
``smooth:<sensor>``; ``persist_count``, ``persist_limit``, ``persist_alarm``).
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import Any

from .. import _engines
from ..errors import InputError
from ..io.tables import open_table
from .drift import DriftRules
from .fdr import add_fdr
from .scorer import KINDS, Scorer, column_name

__all__ = ["score", "Scorer", "KINDS", "column_name", "add_fdr"]


def _read_path(path: str | os.PathLike, columns: Sequence[str], sep: str | None = None,
               decimal: str | None = None):
    """The model's columns of a table file as one DataFrame (whiten.io.tables, in chunks)."""
    import pandas as pd

    table = open_table(path, sep=sep, decimal=decimal)
    cols = table.select(columns, what="the model")
    return pd.concat(list(table.chunks(cols)))


def score(baseline: Any, data: Any, *, alpha: float = 0.001, missing: str = "marginalize",
          phase: str = "new", fdr: float | None = None, order: Sequence[str] | None = None,
          ewma: float | None = None, ewma_arl: float | None = None, persist: Any = None,
          sep: str | None = None, decimal: str | None = None):
    """Score rows against a baseline: squared distance, exact p-value, alarm, and contributions.

    Parameters
    ----------
    baseline : Baseline or Gaussian
        A fitted reference model (``whiten.fit_baseline``); a
        :class:`whiten.Gaussian` works with ``phase="known"``.
    data : DataFrame, ndarray (N, p) or (p,), or path to a CSV file
        DataFrame columns are matched to the baseline's sensors by name (extra
        columns are ignored; missing ones are an error). An ndarray must have
        the sensors in the baseline's order. NaN marks a missing reading.
    alpha : float
        False-alarm probability per row.
    missing : {"marginalize", "error"}
        ``"marginalize"`` scores each row on the sensors it has (marginal
        Gaussian; limits with the number observed); ``"error"`` raises on NaN.
    phase : {"new", "reference", "known"}
        Which exact law gives the p-value (see :mod:`whiten.monitor.limits`):
        new rows against an estimated baseline (default), the reference rows
        themselves, or parameters known exactly.
    fdr : float, optional
        Also control the false-discovery rate across this batch at level
        ``fdr`` (Benjamini & Hochberg, 1995): adds ``p_bh`` and ``alarm_fdr``.
        ``alarm`` stays the per-row test.
    order : sequence of str, optional
        Sensor order of the ``chain:`` decomposition (default: the baseline's).
    ewma : float, optional
        Also chart the multivariate EWMA statistic (Lowry et al. 1992) with
        smoothing weight ``ewma`` = lambda in (0, 1] (0.05-0.2 for slow
        drifts), rows taken in input order; see :mod:`whiten.monitor.ewma`.
    ewma_arl : float, optional
        In-control average run length (rows) the EWMA limit is set for, by
        simulation; default ``1 / alpha``, the run length of the per-row
        screen, so both alarm equally often on healthy rows.
    persist : (k, m) or "k/m", optional
        Also the persistence rule: alarm when k of the last m rows exceed a
        per-row level chosen so that the rule's false-alarm rate per row is
        ``alpha`` for independent rows (binomial tail); see
        :mod:`whiten.monitor.persistence`.
    sep, decimal : str, optional
        How a CSV file given as ``data`` separates fields and writes decimals
        (see :func:`whiten.io.tables.open_table`).

    Returns
    -------
    pandas.DataFrame, shape (N, 7 + 3p) (+2 with ``fdr``, +5+p with ``ewma``, +3 with ``persist``)
        Columns as listed in the module docstring; ``.attrs`` records alpha,
        phase, the law used (``limit_basis``) and the baseline's digits trusted;
        with ``ewma`` the limit, its Monte Carlo error and a caution
        (``ewma_limit``, ``ewma_basis``, ``ewma_caution``); with ``persist``
        ``persist_row_level``, ``persist_rate`` and ``persist_basis``.

    Raises
    ------
    InputError
        Column mismatch (lists missing and extra), non-numeric cells (row and
        column), NaN with ``missing="error"``, alpha/fdr outside (0, 1), unknown
        phase, too few reference rows for the phase (m <= p); ewma outside
        (0, 1], ewma_arl not above 1, persist not 1 <= k <= m; ewma or persist
        with a dask collection (compute it, or use score_file).

    Notes
    -----
    Rows are processed in blocks of ``whiten.current_settings().block_rows``; each
    block costs two BLAS-3 triangular solves (``z = L^{-1} d`` and
    ``w = L^{-T} z``), 2 N p^2 flops, plus one more when ``order`` differs from
    the baseline's. Rows with missing sensors are grouped by pattern and each
    pattern's sub-factor is built once. No row is dropped; a row with no sensor
    gets NaN distance, no alarm and a note.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.8], [0.8, 1.0]], columns=["a", "b"])
    >>> s = whiten.monitor.score(g, np.array([[1.0, 1.0], [1.0, -1.0]]), phase="known")
    >>> bool(s.d2[1] > s.d2[0]) and bool(np.allclose(s.filter(like="chain:").sum(axis=1), s.d2))
    True
    """
    engine = _engines.engine_for(data)
    if engine is not None:  # e.g. dask input: a lazy frame back from that engine
        if ewma is not None or ewma_arl is not None or persist is not None:
            raise InputError("ewma/persist: the drift rules need the rows in order in one pass; compute the dask "
                             "collection first, or write it to a file and use whiten.monitor.score_file")
        return engine.score(baseline, data, alpha=alpha, missing=missing, phase=phase, fdr=fdr, order=order)
    scorer = Scorer(baseline, alpha=alpha, missing=missing, phase=phase, order=order)
    if isinstance(data, (str, os.PathLike)):
        data = _read_path(data, scorer.columns, sep, decimal)
    elif sep is not None or decimal is not None:
        raise InputError("sep, decimal: read options of a table file; the data given is not a file path")
    drift = DriftRules(scorer, ewma=ewma, ewma_arl=ewma_arl, persist=persist)
    if not drift.active:
        return scorer.frame(data, fdr=fdr)
    import pandas as pd

    x, index = scorer.rows(data)
    cols = scorer.score_array(x)
    drift.add(x, cols)
    if fdr is not None:
        add_fdr(cols, fdr)
    df = pd.DataFrame(cols, index=index if index is not None else pd.RangeIndex(x.shape[0]))
    df.attrs.update(scorer.attrs(fdr))
    df.attrs.update(drift.attrs())
    return df
