"""Charts for monitoring results (matplotlib, Agg backend, imported lazily).

Each function renders into an in-memory PNG and writes it atomically
(:func:`whiten.io.atomic.write_bytes`), refusing to replace an existing file
unless ``force=True``. The pyplot state machine is never touched: figures are
built from :class:`matplotlib.figure.Figure` with an Agg canvas, so charts can
be drawn from threads and servers without a display.

* :func:`distance_chart` -- squared distance per row on a log scale, the
  alarm limit, alarms marked, unscored rows ticked along the bottom.
* :func:`ewma_chart` -- the multivariate EWMA statistic (``ewma=`` of
  :func:`whiten.monitor.score`) with its limit, alarms marked, held rows
  ticked along the bottom.
* :func:`qq_chart` -- ordered squared distances of the reference rows against
  chi-square(p) quantiles: points along the diagonal support the Gaussian
  assumption; a bend upwards at the right means heavier tails than Gaussian.
* :func:`contribution_chart` -- for the worst rows, the ``drop:`` term of each
  sensor as a bar, with the sensor's plain standardized deviation printed
  beside it, so a correlation break (large bar, small deviation) stands out.
"""

from __future__ import annotations

import io
import os
from pathlib import Path
from typing import Any

import numpy as np

from .. import _palette as pal
from ..errors import InputError
from ..io.atomic import check_writable, write_bytes
from .digest import need_score_columns as _need

__all__ = ["distance_chart", "distance_figure", "ewma_chart", "qq_chart", "contribution_chart"]

# whiten's one palette (whiten._palette): steel blue for ordinary rows, sienna for the limit, crimson for alarms
_INK = pal.INK
_OK = pal.PLAIN
_LIMIT = pal.ACCENT
_ALARM = pal.ALARM
_GRID = pal.GRID


def _figure(width: float, height: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=110)
    FigureCanvasAgg(fig)
    return fig


def _style(ax) -> None:
    ax.set_facecolor("white")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(_INK)
    ax.tick_params(colors=_INK, labelsize=8)
    ax.grid(True, color=_GRID, linewidth=0.7)
    ax.set_axisbelow(True)


def _save(fig, path: str | os.PathLike, force: bool) -> Path:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", facecolor="white")
    return write_bytes(path, buf.getvalue(), force=force, what="chart")


def distance_chart(scores: Any, path: str | os.PathLike, *, time: Any = None, title: str | None = None,
                   force: bool = False, spans: Any = None, subtitle: str | None = None) -> Path:
    """Control chart of ``d2`` per row (log scale) with the limit and the alarms.

    Parameters
    ----------
    scores : pandas.DataFrame
        Output of :func:`whiten.monitor.score`, or the trace of a long run
        (:meth:`whiten.monitor.ScoreDigest.trace`), whose points may each pool
        several rows (said in the chart's subtitle).
    path : path of the PNG to write
    time : array_like, optional
        x positions (timestamps or numbers); default: row number.
    title : str, optional
    force : bool
        Replace an existing file.
    spans : sequence of (x0, x1), optional
        Stretches shaded behind the points, in the units of the x axis: the
        alarm episodes (:meth:`whiten.monitor.ScoreDigest.episodes`).
    subtitle : str, optional
        More words for the line under the title (e.g. which model scored).

    Returns
    -------
    pathlib.Path

    Raises
    ------
    InputError
        ``scores`` lacks the score columns, or the file exists without ``force``.

    Notes
    -----
    The limit's value is written at the right end of its line. A time axis
    writes dates, and the year, as the span needs them (matplotlib's concise
    date format). Title, subtitle and legend sit in bands of their own above
    the plot, so no text overlaps whatever the row count.

    Examples
    --------
    >>> import os, tempfile, numpy as np, whiten
    >>> from whiten.monitor import charts, score
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.5], [0.5, 1.0]], columns=["a", "b"])
    >>> s = score(g, np.random.default_rng(0).normal(size=(50, 2)), phase="known")
    >>> png = charts.distance_chart(s, os.path.join(tempfile.mkdtemp(), "d2.png"))
    >>> png.read_bytes()[:4] == b"\\x89PNG"
    True
    """
    check_writable(path, force=force, what="chart")
    fig = distance_figure(scores, time=time, title=title, spans=spans, subtitle=subtitle)
    return _save(fig, path, force)


def distance_figure(scores: Any, *, time: Any = None, title: str | None = None, spans: Any = None,
                    subtitle: str | None = None):
    """The figure :func:`distance_chart` writes (a matplotlib Figure on an Agg canvas), for tests and reuse."""
    _need(scores, ["d2", "limit", "alarm"])
    n = len(scores)
    pooled = int(scores.attrs.get("rows_per_point", 1) or 1)  # a ScoreDigest trace of a long run
    if time is None and pooled > 1 and "first_row" in scores.columns:
        x = scores["first_row"].to_numpy()
    else:
        x = np.arange(n) if time is None else np.asarray(time)
    if len(x) != n:
        raise InputError(f"time: expected {n} positions, got {len(x)}")
    d2 = scores["d2"].to_numpy(dtype=float)
    lim = scores["limit"].to_numpy(dtype=float)
    alarm = scores["alarm"].to_numpy(dtype=bool)
    scored = ~np.isnan(d2)
    floor = np.nanmin(d2[scored & (d2 > 0)]) if np.any(scored & (d2 > 0)) else 1e-3
    shown = np.where(d2 > 0, d2, floor)

    fig = _figure(9.0, 3.9)
    ax = fig.add_subplot(1, 1, 1)
    _style(ax)
    ax.set_yscale("log")
    n_alarm = int(scores.attrs.get("n_alarm", alarm.sum())) if pooled > 1 else int(alarm.sum())
    n_unscored = int(scores.attrs.get("n_not_scored", (~scored).sum())) if pooled > 1 else int((~scored).sum())
    ok = scored & ~alarm
    for k, (x0, x1) in enumerate(spans or []):
        ax.axvspan(x0, x1, color=_ALARM, alpha=0.13, linewidth=0, zorder=0,
                   label=f"alarm episode ({len(spans or [])})" if k == 0 else None)
    ax.plot(x[scored], shown[scored], color=_OK, linewidth=0.6, alpha=0.7, zorder=1)
    ax.scatter(x[ok], shown[ok], s=7, color=_OK, zorder=2, label="row")
    ax.step(x, lim, where="mid", color=_LIMIT, linewidth=1.4, zorder=3, label="alarm limit")
    if alarm.any():
        ax.scatter(x[alarm], shown[alarm], s=22, marker="D", color=_ALARM, zorder=4,
                   label=f"alarm ({n_alarm})")
    if (~scored).any():
        ax.plot(x[~scored], np.full((~scored).sum(), floor), linestyle="none", marker="|",
                color=_INK, markersize=9, label=f"not scored ({n_unscored})")
    _limit_label(ax, lim)
    alpha = scores.attrs.get("alpha")
    phase = scores.attrs.get("phase")
    sub = f"limit at alpha={alpha:g}, phase {phase!r}" if alpha is not None else ""
    if pooled > 1:
        sub = (sub + "; " if sub else "") + f"each point: the largest d2 of {pooled} consecutive rows"
    if subtitle:
        sub = (sub + "; " if sub else "") + subtitle
    _time_ticks(ax, x)
    ax.set_xlabel("row" if time is None else "time", fontsize=9, color=_INK)
    ax.set_ylabel("d2 (log scale)", fontsize=9, color=_INK)
    _heading(fig, ax, title or "Squared Mahalanobis distance per row", sub)
    return fig


def _limit_label(ax, lim: np.ndarray) -> None:
    """The limit's value written at the right end of its line (a range when rows have different limits)."""
    good = lim[np.isfinite(lim)]
    if not good.size:
        return
    lo, hi = float(good.min()), float(good.max())
    text = f"limit {hi:.4g}" if hi - lo <= 1e-9 * abs(hi) else f"limit {lo:.4g} to {hi:.4g}"
    import matplotlib.transforms as mtrans

    ax.annotate(text, xy=(1.0, float(good[-1])), xycoords=mtrans.blended_transform_factory(ax.transAxes, ax.transData),
                xytext=(4, 0), textcoords="offset points", va="center", ha="left", fontsize=8, color=_LIMIT)


def _time_ticks(ax, x: np.ndarray) -> None:
    """Dates on a time axis, with the year (and the day) written when the span needs them."""
    if np.asarray(x).dtype.kind != "M":
        return
    import matplotlib.dates as mdates

    loc = mdates.AutoDateLocator(minticks=3, maxticks=8)
    ax.xaxis.set_major_locator(loc)
    fmt = mdates.ConciseDateFormatter(loc, show_offset=True)
    ax.xaxis.set_major_formatter(fmt)
    ax.xaxis.get_offset_text().set_fontsize(8)


def _heading(fig, ax, title: str, sub: str) -> None:
    """Title, subtitle and legend stacked above the plot in bands of their own, so no text overlaps.

    The subtitle is wrapped to the figure's width; the figure grows by one
    band per extra line, and the plot keeps its height.
    """
    import textwrap

    lines = textwrap.wrap(sub, width=130) if sub else []
    handles, labels = ax.get_legend_handles_labels()
    w, h = fig.get_size_inches()
    band = 0.19  # inches per line of 8-point text
    top_in = 0.3 + band * len(lines) + (0.3 if handles else 0.0) + 0.1
    fig.set_size_inches(w, h + band * max(0, len(lines) - 1))
    h = fig.get_size_inches()[1]
    fig.text(0.01, 1.0 - 0.08 / h, title, ha="left", va="top", fontsize=10, color=_INK)
    for k, line in enumerate(lines):
        fig.text(0.01, 1.0 - (0.36 + band * k) / h, line, ha="left", va="top", fontsize=8, color=_INK)
    fig.subplots_adjust(left=0.08, right=0.86, bottom=0.6 / h, top=1.0 - top_in / h)
    if handles:
        ax.legend(handles, labels, fontsize=7, frameon=False, loc="lower left", bbox_to_anchor=(0.0, 1.0),
                  ncol=min(len(handles), 5), borderaxespad=0.2)


def ewma_chart(scores: Any, path: str | os.PathLike, *, time: Any = None, title: str | None = None,
               force: bool = False) -> Path:
    """Control chart of the MEWMA statistic ``ewma_t2`` per row with its limit and alarms.

    ``scores`` is a score table made with ``ewma=``; other parameters as for
    :func:`distance_chart`. Rows held for a missing reading (no EWMA value)
    are ticked along the bottom.

    Examples
    --------
    >>> import os, tempfile, numpy as np, whiten
    >>> from whiten.monitor import charts, score
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.5], [0.5, 1.0]], columns=["a", "b"])
    >>> s = score(g, np.random.default_rng(0).normal(size=(60, 2)), phase="known", ewma=0.2, ewma_arl=100)
    >>> charts.ewma_chart(s, os.path.join(tempfile.mkdtemp(), "ewma.png")).read_bytes()[:4] == b"\\x89PNG"
    True
    """
    _need(scores, ["ewma_t2", "ewma_limit", "ewma_alarm"])
    check_writable(path, force=force, what="chart")
    n = len(scores)
    x = np.arange(n) if time is None else np.asarray(time)
    if len(x) != n:
        raise InputError(f"time: expected {n} positions, got {len(x)}")
    t2 = scores["ewma_t2"].to_numpy(dtype=float)
    lim = scores["ewma_limit"].to_numpy(dtype=float)
    alarm = scores["ewma_alarm"].to_numpy(dtype=bool)
    ok = ~np.isnan(t2)
    floor = float(np.min(t2[ok & (t2 > 0)])) if np.any(ok & (t2 > 0)) else 1e-3
    t2 = np.where(ok & (t2 <= 0), floor, t2)
    fig = _figure(9.0, 3.2)
    ax = fig.add_subplot(1, 1, 1)
    _style(ax)
    ax.set_yscale("log")
    ax.plot(x[ok], t2[ok], color=_OK, linewidth=0.9, zorder=1, label="EWMA statistic")
    ax.plot(x, lim, color=_LIMIT, linewidth=1.4, zorder=3, label="limit")
    if alarm.any():
        ax.scatter(x[alarm], t2[alarm], s=10, color=_ALARM, zorder=4, label=f"alarm ({int(alarm.sum())})")
    if (~ok).any():
        ax.plot(x[~ok], np.full((~ok).sum(), floor), linestyle="none", marker="|", color=_INK, markersize=9,
                label=f"held: a reading missing ({int((~ok).sum())})")
    lam = scores.attrs.get("ewma_lambda")
    info = scores.attrs.get("ewma_limit") or {}
    if lam is not None and info:
        ax.text(1.0, 1.02, f"lambda {lam:g}; limit for an in-control ARL of {info.get('arl', float('nan')):g} rows",
                transform=ax.transAxes, ha="right", fontsize=8, color=_INK)
    ax.set_title(title or "Multivariate EWMA statistic per row", loc="left", fontsize=10, color=_INK)
    ax.set_xlabel("row" if time is None else "time", fontsize=9, color=_INK)
    ax.set_ylabel("EWMA T2 (log scale)", fontsize=9, color=_INK)
    ax.legend(fontsize=7, frameon=False, loc="upper left", ncol=4)
    fig.tight_layout()
    return _save(fig, path, force)


def qq_chart(d2: Any, p: int, path: str | os.PathLike, *, title: str | None = None,
             force: bool = False) -> Path:
    """Chi-square(p) Q–Q plot of reference squared distances (a check of the Gaussian assumption).

    Parameters
    ----------
    d2 : array_like, shape (m,)
        Squared distances of the reference rows from their own baseline (NaN ignored).
    p : int
        Number of sensors.
    path : path of the PNG to write

    Notes
    -----
    Plotting positions ``(i - 0.5) / m``. With parameters estimated from the
    same rows the points bend slightly below the diagonal at the top (the
    exact law is the bounded Beta of Tracy, Young & Mason 1992); that curve is
    drawn dashed when ``m`` is known from the length of ``d2``.
    """
    from scipy import stats

    d = np.sort(np.asarray(d2, dtype=float)[~np.isnan(np.asarray(d2, dtype=float))])
    m = d.size
    if m < 3:
        raise InputError(f"d2: need at least 3 distances for a Q–Q plot, got {m}")
    if int(p) < 1:
        raise InputError(f"p: expected a positive number of sensors, got {p}")
    check_writable(path, force=force, what="chart")
    pos = (np.arange(1, m + 1) - 0.5) / m
    q = stats.chi2.ppf(pos, p)
    fig = _figure(5.0, 5.0)
    ax = fig.add_subplot(1, 1, 1)
    _style(ax)
    top = max(q[-1], d[-1]) * 1.05
    ax.plot([0, top], [0, top], color=_LIMIT, linewidth=1.2, label="chi-square law")
    if m > p + 1:
        exact = (m - 1) ** 2 / m * stats.beta.ppf(pos, p / 2, (m - p - 1) / 2)
        ax.plot(q, exact, color=_INK, linewidth=0.9, linestyle="--", label="exact law, reference rows")
    ax.scatter(q, d, s=8, color=_OK, edgecolor="none", label=f"reference rows ({m})")
    ax.set_xlim(0, top)
    ax.set_ylim(0, top)
    ax.set_xlabel(f"chi-square({p}) quantile", fontsize=9, color=_INK)
    ax.set_ylabel("ordered d2", fontsize=9, color=_INK)
    ax.set_title(title or "Are the reference rows Gaussian?", loc="left", fontsize=10, color=_INK)
    ax.legend(fontsize=7, frameon=False, loc="upper left")
    fig.tight_layout()
    return _save(fig, path, force)


def contribution_chart(scores: Any, path: str | os.PathLike, *, rows: int = 4, labels: Any = None,
                       title: str | None = None, force: bool = False, in_order: bool = False) -> Path:
    """Bars of the ``drop:`` terms for the ``rows`` rows with the largest d2 (``in_order``: the first ``rows``).

    With ``in_order=True`` the panels are the first ``rows`` scored rows as
    given, e.g. the peak rows of the alarm episodes
    (:meth:`whiten.monitor.ScoreDigest.episode_peaks`), first episodes first.

    Each panel is one row; bar length is how much d2 falls when the sensor is
    left out; the number beside a bar is the sensor's plain standardized
    deviation (``dev:``). Sensors not observed in a row have no bar.

    Raises
    ------
    InputError
        No per-sensor columns, nothing scored, or the file exists without ``force``.
    """
    _need(scores, ["d2"])
    sensors = [c[len("drop:"):] for c in scores.columns if str(c).startswith("drop:")]
    if not sensors:
        raise InputError("scores: no drop:<sensor> columns; pass the DataFrame returned by whiten.monitor.score")
    d2 = scores["d2"].to_numpy(dtype=float)
    scored = np.flatnonzero(~np.isnan(d2))
    if scored.size == 0:
        raise InputError("scores: no row was scored (every row had all sensors missing)")
    check_writable(path, force=force, what="chart")
    k = max(1, min(int(rows), scored.size))
    worst = scored[:k] if in_order else scored[np.argsort(-d2[scored], kind="stable")[:k]]
    fig = _figure(4.2 * k if k < 3 else 3.4 * k, 0.42 * len(sensors) + 1.6)
    ypos = np.arange(len(sensors))[::-1]
    for n, i in enumerate(worst):
        ax = fig.add_subplot(1, k, n + 1)
        _style(ax)
        drop = scores[[f"drop:{s}" for s in sensors]].iloc[i].to_numpy(dtype=float)
        dev = scores[[f"dev:{s}" for s in sensors]].iloc[i].to_numpy(dtype=float) \
            if f"dev:{sensors[0]}" in scores.columns else np.full(len(sensors), np.nan)
        vals = np.nan_to_num(drop, nan=0.0)
        best = int(np.argmax(vals))
        colors = [_ALARM if j == best else _OK for j in range(len(sensors))]
        ax.barh(ypos, vals, color=colors, height=0.62)
        span = vals.max() if vals.max() > 0 else 1.0
        for j in range(len(sensors)):
            txt = "n/a" if np.isnan(drop[j]) else (f"{dev[j]:+.1f} sd" if not np.isnan(dev[j]) else "")
            ax.text(vals[j] + 0.02 * span, ypos[j], txt, va="center", fontsize=7, color=_INK)
        ax.set_xlim(0, span * 1.35)
        ax.set_yticks(ypos)
        ax.set_yticklabels(sensors if n == 0 else [""] * len(sensors), fontsize=8)
        lab = scores.index[i] if labels is None else np.asarray(labels)[i]
        ax.set_title(f"row {lab}: d2 = {d2[i]:.3g}", fontsize=9, color=_INK, loc="left")
        ax.set_xlabel("d2 lost without the sensor", fontsize=8, color=_INK)
    fig.suptitle(title or "What drives the largest distances (number: plain deviation in sd)",
                 fontsize=10, color=_INK, x=0.01, ha="left")
    fig.tight_layout()
    return _save(fig, path, force)
