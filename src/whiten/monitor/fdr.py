"""False-discovery control across a batch of rows (Benjamini & Hochberg, 1995).

Per-row limits keep the chance of a false alarm on *each* row at alpha, so a
batch of 100 000 healthy rows still raises about 100 000·alpha alarms. The
step-up procedure of Benjamini & Hochberg (1995, "Controlling the false
discovery rate", J. R. Statist. Soc. B 57, 289-300) instead bounds the
expected *fraction* of false alarms among the rows flagged, at level q, for
independent (or positively dependent) p-values.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .limits import check_alpha

__all__ = ["bh_adjust", "bh_threshold", "add_fdr"]


def bh_adjust(p_values: Any) -> np.ndarray:
    """Benjamini–Hochberg adjusted p-values; a row is flagged at level q when its value is <= q.

    Parameters
    ----------
    p_values : array_like, shape (N,)
        NaN entries (rows that could not be scored) are left out of the count
        N and stay NaN.

    Returns
    -------
    ndarray, shape (N,)
        ``min over j >= i of p_(j) · N / j`` for the i-th smallest p-value,
        capped at 1, in the input order.

    Notes
    -----
    One sort, O(N log N); a reverse cumulative minimum makes the adjusted
    values monotone in p.

    Examples
    --------
    >>> import numpy as np
    >>> from whiten.monitor import bh_adjust
    >>> adj = bh_adjust([0.01, 0.04, 0.03, 0.5])
    >>> bool(np.all(adj >= [0.01, 0.04, 0.03, 0.5]))
    True
    """
    p = np.asarray(p_values, dtype=np.float64).reshape(-1)
    out = np.full(p.shape, np.nan)
    ok = np.flatnonzero(~np.isnan(p))
    n = ok.size
    if n == 0:
        return out
    order = ok[np.argsort(p[ok], kind="mergesort")]
    ranked = p[order] * n / np.arange(1, n + 1)
    ranked = np.minimum.accumulate(ranked[::-1])[::-1]
    out[order] = np.minimum(ranked, 1.0)
    return out


def bh_threshold(p_values: Any, q: float) -> float:
    """Largest p-value flagged by the step-up procedure at level ``q`` (-inf when none)."""
    q = check_alpha(q, "fdr")
    p = np.asarray(p_values, dtype=np.float64).reshape(-1)
    p = np.sort(p[~np.isnan(p)])
    n = p.size
    if n == 0:
        return -np.inf
    hits = np.flatnonzero(p <= q * np.arange(1, n + 1) / n)
    return float(p[hits[-1]]) if hits.size else -np.inf


def add_fdr(cols: dict, q: float, adjusted: Any = None) -> None:
    """Insert ``p_bh`` and ``alarm_fdr`` (after ``alarm``) into a dict of score columns.

    ``adjusted`` gives the adjusted p-values of these rows when they were
    computed over a larger batch (the whole file, in the streaming scorer);
    by default they are adjusted across ``cols`` itself.
    """
    q = check_alpha(q, "fdr")
    adj = bh_adjust(cols["p_value"]) if adjusted is None else np.asarray(adjusted, dtype=float)
    flag = np.zeros(adj.shape, dtype=bool)
    ok = ~np.isnan(adj)
    flag[ok] = adj[ok] <= q
    items = list(cols.items())
    cols.clear()
    for k, v in items:
        cols[k] = v
        if k == "alarm":
            cols["p_bh"] = adj
            cols["alarm_fdr"] = flag
