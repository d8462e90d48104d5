"""Report for a monitoring run: alarms, the worst rows and their sensors, the control chart."""

from __future__ import annotations

import math
import tempfile
from pathlib import Path
from typing import Any

import numpy as np

from .._settings import current
from ..baseline.health import redundancy
from ..errors import InputError
from .blocks import CAUTION_INDEPENDENT_ROWS
from .document import Report, format_number
from .provenance import Provenance

__all__ = ["monitoring_report", "worst_rows"]

_NEED = ("d2", "p_value", "limit", "alarm")


def _check_scores(scores: Any) -> None:
    cols = set(getattr(scores, "columns", []))
    gone = [c for c in _NEED if c not in cols]
    if gone or not hasattr(scores, "attrs"):
        raise InputError(f"scores: expected the DataFrame returned by whiten.monitor.score; missing columns {gone}")
    if len(scores) == 0:
        raise InputError("scores: no rows; there is nothing to report")


def worst_rows(scores: Any, k: int = 5, top: int = 3):
    """The ``k`` rows with the smallest p-value (ties: larger d2 first), with their top sensors.

    Parameters
    ----------
    scores : pandas.DataFrame
        Output of :func:`whiten.monitor.score`.
    k : int
        Rows to return (fewer when fewer were scored).
    top : int
        Sensors named per row, by the ``drop:`` term (d2 lost without the sensor).

    Returns
    -------
    pandas.DataFrame
        Indexed by the row labels of ``scores``; columns ``d2``, ``limit``,
        ``p_value``, ``alarm``, ``top sensors`` (text) and ``note``.

    Raises
    ------
    InputError
        ``scores`` lacks the score columns.

    Examples
    --------
    >>> import numpy as np, whiten, whiten.monitor
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.0], [0.0, 1.0]], columns=["inlet", "outlet"])
    >>> s = whiten.monitor.score(g, np.array([[0.1, 0.0], [0.0, 6.0], [3.0, 0.0]]), phase="known")
    >>> w = worst_rows(s, 2)
    >>> list(w.index), w["top sensors"].iloc[0].startswith("outlet")
    ([1, 2], True)
    """
    import pandas as pd

    _check_scores(scores)
    d2 = scores["d2"].to_numpy(dtype=float)
    pv = scores["p_value"].to_numpy(dtype=float)
    scored = np.flatnonzero(~np.isnan(pv))
    order = scored[np.lexsort((-d2[scored], pv[scored]))][: max(0, int(k))]
    sensors = [str(c)[5:] for c in scores.columns if str(c).startswith("drop:")]
    drops = scores[[f"drop:{s}" for s in sensors]].to_numpy(dtype=float) if sensors else None
    tops = []
    for i in order:
        if drops is None:
            tops.append("")
            continue
        row = np.nan_to_num(drops[i], nan=-np.inf)
        best = [j for j in np.argsort(-row, kind="stable")[: int(top)] if np.isfinite(row[j])]
        tops.append(", ".join(f"{sensors[j]} ({format_number(drops[i, j], 3)})" for j in best))
    note = scores["note"].to_numpy(dtype=object)[order] if "note" in scores.columns else [""] * len(order)
    note = [v if isinstance(v, str) else "" for v in note]  # a CSV read back gives NaN for empty notes
    out = pd.DataFrame({
        "d2": d2[order], "limit": scores["limit"].to_numpy(dtype=float)[order], "p_value": pv[order],
        "alarm": scores["alarm"].to_numpy(dtype=bool)[order], "top sensors": tops, "note": list(note),
    }, index=pd.Index(scores.index[order], name=scores.index.name or "row"))
    return out


def _rows(k: int) -> str:
    return f"{k} row" + ("" if k == 1 else "s")


#: a sensor whose variance is explained by the others up to this fraction is called redundant
REDUNDANT = 1e-6


def _redundancy(rep: Report, baseline: Any) -> None:
    """Name sensors that are (nearly) linear combinations of others (pivoted Cholesky, LAPACK dpstrf)."""
    factor = getattr(baseline, "factor", None)
    if factor is None:
        return
    try:
        rr = redundancy(factor, REDUNDANT, getattr(baseline, "columns", None) or None)
    except InputError:  # pragma: no cover - the factor's matrix is square and finite
        return
    if rr.full_rank:
        rep.health("Redundancy", f"No sensor is a linear combination of the others: each keeps more than "
                   f"{REDUNDANT:g} of its variance beyond what the others explain (pivoted Cholesky).", "good")
        return
    parts = [f"{d} ({format_number(rr.residual_variance.get(d, 0.0), 2)} of its variance unexplained)"
             for d in rr.dependent]
    rep.health("Redundancy", "Nearly redundant sensors: " + "; ".join(rr.describe()) + ". Residual shares: "
               + ", ".join(parts) + ". Distances along these directions rest on very little variance; "
               "consider leaving such a sensor out of the baseline.", "note")


def _health_words(rep: Report, baseline: Any, attrs: dict) -> None:
    basis = attrs.get("limit_basis")
    if basis:
        kind = str(attrs.get("limit_law") or str(basis).split(":", 1)[0])
        words = {"exact": "The exact law of the estimator is used", "simulated": "The law is simulated (parametric "
                 "bootstrap of the whole fit)", "asymptotic": "An asymptotic law is used (many reference rows per "
                 "sensor)", "approximate": "An approximate law is used", "known-parameter": "The parameters are "
                 "taken as known (chi-square law)"}.get(kind, "Law used")
        weak = attrs.get("weak_screen")
        extra = "" if not weak else (f" Weak screen: the limit {format_number(weak['limit'], 4)} is "
                                     f"{format_number(weak['ratio'], 3)} times the chi-square limit "
                                     f"{format_number(weak['chi2_limit'], 4)}; about {weak['rows_needed']} reference "
                                     "rows would bring it within 10%.")
        rep.health("Alarm limit", f"{words} for p-values and limits ({kind}). {basis}.{extra}",
                   "note" if kind == "approximate" or weak else "good")
    h = getattr(baseline, "health", None) if baseline is not None else None
    if h is None and baseline is not None and hasattr(baseline, "factor"):
        h = baseline.factor.health
    digits_warn = current().digits_warn
    if h is not None and hasattr(h, "rcond_scaled"):
        lost = float(h.digits_lost)
        cond = math.inf if h.rcond_scaled <= 0 else 1.0 / float(h.rcond_scaled)
        tone = "alert" if lost > digits_warn else ("note" if lost > 6 else "good")
        rep.health("Condition", f"The baseline covariance, scaled to unit diagonal, has a condition estimate "
                   f"of {format_number(cond, 3)} (LAPACK dpocon), so a distance may lose about {lost:.1f} of "
                   f"about 16 significant digits; about {float(h.digits_trusted):.1f} digits can be trusted.",
                   tone)
        jit = float(getattr(h, "jitter", 0.0))
        if jit > 0:
            rep.health("Jitter", f"{format_number(jit, 3)} was added to the diagonal of the covariance "
                       f"({float(h.jitter_relative):.1e} of its mean variance) so that it could be factored; "
                       "the distances describe that repaired matrix.", "alert")
        else:
            rep.health("Jitter", "None: the covariance factored as estimated, without repair.", "good")
        route = getattr(h, "method", None)
        est = attrs.get("estimator") or getattr(baseline, "estimator", None)
        m = attrs.get("reference_rows")
        if est is None and not m:
            words = "mean and covariance supplied as known (not estimated here)"
        else:
            words = f"{est or 'unnamed'} estimate" + (f" from {m} reference rows" if m else "")
        if route:
            words += f"; numerical route: {route}"
        gram = getattr(h, "gram_digits_lost", None)
        if gram is not None and route == "tsqr":
            words += (f" (the Gram route would have lost {float(gram):.1f} digits, so the factor was "
                      "recomputed from a QR of the centred data)")
        rep.health("Estimator", words + ".", "good")
        _redundancy(rep, baseline)
    else:
        dt = attrs.get("digits_trusted")
        if dt is not None:
            rep.health("Digits", f"About {float(dt):.1f} significant digits of each distance can be trusted "
                       "(from the baseline's condition estimate).", "good" if float(dt) >= 8 else "note")
        added = attrs.get("jitter")
        if added:
            rep.health("Jitter", f"{format_number(added, 3)} was added to the covariance diagonal before "
                       "factoring; the distances describe that repaired matrix.", "alert")


_EPISODES = 20  # episodes listed in the report


def _spans(dig: Any, time: Any) -> list[tuple]:
    """The episodes as shaded stretches of the control chart (rows; times when the axis shows times)."""
    if not dig.n_episodes:
        return []
    import numpy as np
    import pandas as pd

    ep = dig.episodes()
    if time is not None and np.asarray(time).dtype.kind == "M":
        try:
            return list(zip(pd.to_datetime(ep["start"]).to_numpy(), pd.to_datetime(ep["end"]).to_numpy()))
        except (ValueError, TypeError):
            return []
    if time is not None:
        return []
    return list(zip(ep["first_row"].to_numpy(), ep["last_row"].to_numpy() + 1))


def monitoring_report(scores: Any, baseline: Any = None, *, provenance: Provenance | None = None,
                      title: str | None = None, worst: int = 5, time: Any = None,
                      charts: bool = True) -> Report:
    """Build the report of a monitoring run from the scores (and, optionally, the baseline).

    Parameters
    ----------
    scores : pandas.DataFrame or ScoreDigest
        Output of :func:`whiten.monitor.score` (or ``Baseline.score``), whose
        ``attrs`` carry alpha, the phase and the law used; or the
        :class:`~whiten.monitor.ScoreDigest` of a streamed run (what
        ``whiten score --report`` passes: no score table is held in memory).
    baseline : Baseline or Gaussian, optional
        Adds the condition, jitter and estimator route to the trust block.
    provenance : Provenance, optional
        What was run (see :meth:`Provenance.collect`).
    title : str, optional
    worst : int
        Rows listed (and charted) in "worst rows".
    time : array_like, optional
        x positions of the control chart, one per chart point (default: row number).
    charts : bool
        Draw the control chart and the contribution bars (matplotlib).

    Returns
    -------
    Report
        Call ``.write(path)`` or ``.to_html()``.

    Raises
    ------
    InputError
        ``scores`` is not a score table, or has no rows.

    Notes
    -----
    Key figures: the number of alarms (``alarm`` is the per-row test at
    ``alpha``), how many a healthy batch would give by chance
    (``alpha`` times the rows scored), the worst row, the Benjamini-Hochberg
    flags when ``fdr`` was used, and the rows not fully scored. Cost: one sort
    of the p-values plus the charts (linear in the rows).

    Examples
    --------
    >>> import numpy as np, whiten, whiten.monitor
    >>> from whiten.report import monitoring_report
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.6], [0.6, 1.0]], columns=["inlet", "outlet"])
    >>> s = whiten.monitor.score(g, np.array([[0.1, 0.2], [4.0, -4.0]]), phase="known")
    >>> rep = monitoring_report(s, g, charts=False)
    >>> [f.value for f in rep.figures if f.key == "alarms"] == [int(s.alarm.sum())]
    True
    """
    from ..monitor.digest import ScoreDigest

    if isinstance(scores, ScoreDigest):
        dig = scores
    else:
        _check_scores(scores)
        dig = ScoreDigest.from_frame(scores, worst=max(int(worst), 4))
    if dig.n_rows == 0:
        raise InputError("scores: no rows; there is nothing to report")
    attrs = dict(dig.attrs)
    n, n_scored, n_alarm = dig.n_rows, dig.n_scored, dig.n_alarm
    alpha = attrs.get("alpha")
    p = len(dig.sensors)
    n_none, n_partial = dig.n_none, dig.n_partial

    rep = Report(title or "Sensor rows screened against a baseline", job="monitoring",
                 lede=(f"{n} rows scored on {p} sensors"
                       + (f" at a false-alarm probability of {alpha:g} per row" if alpha is not None else "")
                       + (f", phase {attrs.get('phase')!r}" if attrs.get("phase") else "") + "."),
                 provenance=provenance)
    rep.caution(CAUTION_INDEPENDENT_ROWS)
    rep.key_figure("Alarms", n_alarm, note=f"of {n_scored} rows scored", key="alarms",
                   tone="alert" if n_alarm else "good")
    if alpha is not None:
        rep.key_figure("Expected by chance", float(alpha) * n_scored, digits=3, key="expected",
                       note="alarms a batch of healthy, independent rows would give")
    if dig.n_fdr is not None:
        n_fdr = dig.n_fdr
        rep.key_figure("Flagged by false-discovery control", n_fdr, key="fdr-flags",
                       note=f"Benjamini-Hochberg at q = {attrs.get('fdr')}", tone="alert" if n_fdr else "good")
    table = worst_rows(dig.worst_by_p(), worst) if n_scored else None
    if table is not None and len(table):
        lab = table.index[0]
        rep.key_figure("Largest distance", float(table["d2"].iloc[0]), digits=4, key="worst-d2",
                       note=f"row {lab}; limit {format_number(table['limit'].iloc[0], 4)}",
                       tone="alert" if bool(table["alarm"].iloc[0]) else "plain")
    n_ep = dig.n_episodes
    rep.key_figure("Alarm episodes", n_ep, key="episodes", tone="alert" if n_ep else "good",
                   note=f"runs of alarms joined across gaps of up to {dig.gap} quiet rows")
    if n_partial or n_none:
        rep.key_figure("Rows not fully scored", n_partial + n_none, key="partial", tone="note",
                       note=f"{n_partial} on fewer sensors, {n_none} not at all")

    _health_words(rep, baseline, attrs)
    if n_partial or n_none:
        rep.health("Missing readings", f"{_rows(n_partial)} scored on the sensors present (the marginal "
                   f"model of those sensors, limits with the number observed); {_rows(n_none)} with no sensor, "
                   "not scored. No row was dropped.", "note")

    if n_ep:
        ep = dig.episodes()
        shown = ep.head(_EPISODES)[["start", "end", "rows", "alarm_rows", "peak", "peak_d2", "lead_1", "share_1",
                                    "lead_2", "share_2"]]
        sec = rep.section("Alarm episodes", key="episode-list")
        sec.paragraph(f"Each episode is a run of alarming rows in file order; two runs separated by at most "
                      f"{dig.gap} quiet rows are one episode. The leading sensors are those whose removal lowers "
                      "the squared distance of the episode's peak row most; their share is that loss divided by "
                      "the peak's d2." + (f" The first {_EPISODES} of {n_ep} are listed." if n_ep > _EPISODES else ""))
        sec.table(shown, f"Alarm episodes ({n_ep})", key="episodes",
                  formats={"peak_d2": ".5g", "share_1": ".0%", "share_2": ".0%"})
    if table is not None and len(table):
        sec = rep.section("Worst rows", key="worst")
        sec.paragraph("The rows least like the baseline, smallest p-value first. The sensors named are those "
                      "whose removal lowers the squared distance most (number in brackets: d2 lost without "
                      "the sensor); a large loss from a sensor whose own reading is unremarkable points at a "
                      "broken relation between sensors rather than one odd reading.")
        sec.table(table, f"The {len(table)} rows with the smallest p-values", key="worst-rows",
                  formats={"d2": ".5g", "limit": ".4g", "p_value": ".3g"})
    if n_alarm and dig.leaders:
        import pandas as pd

        lead = dig.leaders.most_common()
        frame = pd.DataFrame({"alarms it leads": [c for _, c in lead]},
                             index=pd.Index([s for s, _ in lead], name="sensor"))
        rep.section("Which sensors lead the alarms", key="leaders").table(
            frame, "Alarms counted by the sensor with the largest contribution", key="leaders")

    if charts and n_scored:
        from ..monitor.charts import contribution_chart, distance_chart

        trace = dig.trace()
        pooled = dig.rows_per_point
        with tempfile.TemporaryDirectory(prefix="whiten-report-") as tmp:
            chart = distance_chart(trace, Path(tmp) / "d2.png", time=time, spans=_spans(dig, time))
            above = f"{n_alarm} rows are above it" if n_alarm else "no row is above it"
            each = (f" (each point is the largest of {pooled} consecutive rows, so every alarm stays visible)"
                    if pooled > 1 else "")
            sec = rep.section("Control chart", key="chart")
            sec.figure(chart, alt=(f"Control chart of the squared Mahalanobis distance of {n} rows{each} on a "
                                   f"log scale with the alarm limit as a line; {above}; the largest distance is "
                                   f"{format_number(dig.d2_max, 4)}."),
                       caption=f"Squared distance per row and the alarm limit ({attrs.get('limit_basis', '')}).",
                       key="control-chart")
            bars_from = dig.worst_by_d2()
            if any(str(c).startswith("drop:") for c in bars_from.columns):
                k = min(4, n_scored)
                bars = contribution_chart(bars_from, Path(tmp) / "drop.png", rows=k)
                sec.figure(bars, alt=(f"Bar charts for the {k} rows with the largest distance: for each sensor, "
                                      "how much the squared distance falls when that sensor is left out, with "
                                      "its plain standardized deviation written beside the bar."),
                           caption="What drives the largest distances.", key="contributions")
    _ewma_panel(rep, scores, dig, charts, time)
    rep.section("How to read this", key="reading").paragraph(
        "Each row's squared Mahalanobis distance d2 measures how far its sensor readings are from the "
        "baseline's mean, in units of the baseline's own spread and correlation. The p-value is the chance "
        "that a healthy row would be at least this far; a row alarms when its p-value is below alpha, so in "
        "a healthy batch about alpha times the rows alarm by chance alone.")
    return rep


def _ewma_panel(rep: Report, scores: Any, dig: Any, charts: bool, time: Any) -> None:
    """The drift panel: the multivariate EWMA statistic, its limit and alarms (scores made with ``ewma=``)."""
    from ..monitor.ewma import EWMA_CAUTION

    attrs = dict(dig.attrs)
    frame = scores if hasattr(scores, "columns") and "ewma_t2" in scores.columns else None
    counts = (dig.drift or {}).get("ewma")
    if frame is None and counts is None and attrs.get("ewma_lambda") is None:
        return
    n_alarm: int | None = None
    first: int | None = None
    if frame is not None:
        alarm = frame["ewma_alarm"].to_numpy(dtype=bool)
        hits = np.flatnonzero(alarm)
        n_alarm, first = int(alarm.sum()), (int(hits[0]) if hits.size else None)
    elif counts is not None:
        n_alarm = int(counts.get("n_alarm", 0))
        first = counts.get("first_alarm_row")
    lam = attrs.get("ewma_lambda")
    info = attrs.get("ewma_limit") or {}
    if n_alarm is not None:
        rep.key_figure("EWMA alarms", n_alarm, key="ewma-alarms", tone="alert" if n_alarm else "good",
                       note=(f"first at row {first}" if first is not None else "no drift alarm")
                       + (f"; lambda {lam:g}" if lam is not None else ""))
    caution = str(attrs.get("ewma_caution") or EWMA_CAUTION)
    rep.health("Drift statistic", caution, "note")
    sec = rep.section("Drift (multivariate EWMA)", key="ewma")
    arl = info.get("arl")
    sec.paragraph("The multivariate EWMA statistic (Lowry, Woodall, Champ & Rigdon 1992) smooths the rows with "
                  f"weight {format_number(lam, 3) if lam is not None else 'lambda'} on the newest and measures the "
                  "smoothed vector against its own exact covariance, so a slow drift that no single row shows "
                  "builds up until it crosses the limit"
                  + (f", set by simulation for an in-control average run length of {format_number(arl, 4)} rows"
                     if arl is not None else "") + ". "
                  + (f"{attrs['ewma_basis']}. " if attrs.get("ewma_basis") else "") + caution)
    if frame is None:
        sec.paragraph("This run was streamed: the counts above come from its digest; the EWMA chart needs the "
                      "score table (whiten.monitor.score with ewma=).")
        return
    if charts and len(frame):
        from ..monitor.charts import ewma_chart

        above = f"{n_alarm} rows are above it, the first at row {first}" if n_alarm else "no row is above it"
        with tempfile.TemporaryDirectory(prefix="whiten-report-") as tmp:
            png = ewma_chart(frame, Path(tmp) / "ewma.png", time=time)
            sec.figure(png, alt=(f"Chart of the multivariate EWMA statistic of {len(frame)} rows on a log scale "
                                 f"with its limit as a line; {above}."),
                       caption="Multivariate EWMA statistic per row and its limit. " + caution, key="ewma-chart")
