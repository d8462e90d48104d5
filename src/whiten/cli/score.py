"""``whiten score``: score a (large) table of sensor rows against a saved baseline."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

import numpy as np

from ..errors import InputError
from . import add_progress_options, add_reader_options, open_data, progress_of

EPILOG = """\
examples:
  whiten score week32.csv --baseline pump_baseline.json -o week32_scores.csv
  whiten score week32.csv --baseline pump_baseline.json -o scores.csv \\
      --index-column timestamp --alpha 0.0001 --fdr 0.05 --chart week32.png \\
      --contributions week32_why.png
  whiten score station_test.csv --baseline station.json -o scores.parquet \
      --episodes episodes.csv --episode-gap 5 --rename P1=suction_bar,P2=discharge_bar \
      --na-values=-9999,ERR

The model's index column and missing-value codes are used unless given;
the summary names the model by its checksum and training period and lists
the alarm episodes (runs of alarms joined across gaps of up to
--episode-gap quiet rows) with their peak and leading sensors.

The output has one line per input row, in input order: d2 (squared
Mahalanobis distance), p_value, limit, alarm, n_observed, top_contributor,
note, then per sensor drop:<sensor> (d2 lost when the sensor is left out),
chain:<sensor> (conditional terms along the baseline's sensor order; they sum
to d2) and dev:<sensor> (plain standardized deviation). Rows with missing
readings are scored on the sensors they have. Large files are read in
chunks of --chunksize rows; the output is written to a temporary file and
renamed into place at the end.

With --ewma LAMBDA the multivariate EWMA statistic (Lowry et al. 1992) is
charted too, rows taken in file order: ewma_t2, ewma_limit, ewma_alarm,
ewma_top (sensor leading the smoothed vector), ewma_rows and smooth:<sensor>.
Its limit is simulated for an in-control average run length of --ewma-arl rows
(default 1/alpha, the run length of the per-row screen). Rows with a missing
reading are held: not smoothed in, no EWMA value. With --persist K/M a row
alarms when K of the last M rows exceed a per-row level set so that the rule
alarms at rate alpha per healthy row (persist_count, persist_limit,
persist_alarm). Both assume independent rows: autocorrelated readings
shorten run lengths and raise the false-alarm rate.

This is a statistical screen, not a protective function: alarms do not replace
the plant's safety systems, and local codes take precedence.
"""

CAUTION = ("Caution: a statistical screen, not a protective function; act on alarms through the plant's "
           "own procedures and safety systems, and defer to local codes.")

_WORST = 5
_PEAKS = 6  # episode peaks drawn by --contributions
_SHOWN = 10  # episodes listed on standard output


def add_parser(sub) -> None:
    p = sub.add_parser(
        "score", help="score sensor rows against a baseline model",
        description="Score every row of DATA (CSV/TSV/Parquet) against a baseline fitted with "
                    "`whiten baseline`: squared Mahalanobis distance, exact p-value, alarm, and the "
                    "sensors that drive it.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("data", metavar="DATA", help="table of sensor rows (.csv, .tsv, .parquet)")
    p.add_argument("--baseline", required=True, metavar="MODEL.json", help="model file from `whiten baseline`")
    p.add_argument("-o", "--output", required=True, metavar="SCORES.csv",
                   help="where to write the scores; the name chooses the format: .csv, .tsv, .csv.gz, .tsv.gz or "
                        ".parquet (Parquet needs pyarrow), e.g. -o week32_scores.parquet")
    p.add_argument("--alpha", type=float, default=0.001, help="false-alarm probability per row (default 0.001)")
    p.add_argument("--phase", choices=["new", "reference", "known"], default="new",
                   help="law of the distance: new rows (default), the reference rows themselves, "
                        "or parameters known exactly")
    p.add_argument("--fdr", type=float, default=None, metavar="Q",
                   help="also flag rows by Benjamini-Hochberg at false-discovery rate Q across the file "
                        "(reads the file twice)")
    p.add_argument("--chart", metavar="FILE.png", help="write a control chart of d2 with the limit and alarms "
                   "(x axis: the --index-column when it holds times or numbers, else the row number)")
    p.add_argument("--contributions", metavar="FILE.png",
                   help="write bar charts of the drop contributions at the peak row of each alarm episode, first "
                        f"episodes first (at most {_PEAKS}; the worst rows when nothing alarmed), e.g. "
                        "--contributions week32_why.png")
    p.add_argument("--episodes", metavar="FILE.csv",
                   help="also write the alarm episodes, one line each (start, end, rows, peak d2 and its row, "
                        "leading sensors with their share of d2); the name chooses the format, e.g. "
                        "--episodes week32_episodes.csv")
    p.add_argument("--episode-gap", type=int, default=2, metavar="ROWS",
                   help="quiet rows that may separate two runs of alarms in one episode (default 2; 0: only "
                        "unbroken runs), e.g. --episode-gap 10")
    p.add_argument("--index-column", metavar="COL",
                   help="column that labels rows (e.g. a timestamp); kept in the output (default: the model's "
                        "own index column, when the file has it)")
    p.add_argument("--rename", metavar="OLD=NEW,...",
                   help="rename file columns onto the model's sensor names, e.g. --rename P1=suction_bar,"
                        "P2=discharge_bar; unmatched names are listed as missing and extra columns")
    p.add_argument("--chunksize", type=int, default=None, metavar="N", help="rows per chunk (default 100000)")
    p.add_argument("--force", action="store_true", help="replace output files that already exist")
    p.add_argument("--report", metavar="FILE.html",
                   help="also write a one-file HTML report (whiten.report), built while scoring: "
                        "the scores are not read back")
    p.add_argument("--chart-points", type=int, default=20_000, metavar="N",
                   help="rows drawn one by one on the control chart (--chart, --report); a longer file is "
                        "pooled into bins of consecutive rows, each showing its largest d2, so no alarm "
                        "is hidden and memory stays flat (default: 20000)")
    p.add_argument("--ewma", type=float, default=None, metavar="LAMBDA",
                   help="also chart the multivariate EWMA drift statistic with smoothing weight LAMBDA in (0, 1] "
                        "(0.05-0.2 for slow drifts)")
    p.add_argument("--ewma-arl", type=float, default=None, metavar="ROWS",
                   help="in-control average run length the EWMA limit is simulated for (default 1/alpha)")
    p.add_argument("--persist", default=None, metavar="K/M",
                   help="also alarm when K of the last M rows exceed a per-row level chosen so that this rule's "
                        "false-alarm rate per healthy row is alpha (e.g. 3/5)")
    add_reader_options(p)
    add_progress_options(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from .. import load_baseline
    from ..io.atomic import check_writable, refuse_inputs
    from ..monitor.limits import check_alpha
    from ..monitor.stream import score_file

    check_alpha(args.alpha)
    if args.fdr is not None:
        check_alpha(args.fdr, "--fdr")
    if args.ewma is not None:
        from ..monitor.ewma import _check_arl, check_lambda

        check_lambda(args.ewma, "--ewma")
        if args.ewma_arl is not None:
            _check_arl(args.ewma_arl, "--ewma-arl")
    elif args.ewma_arl is not None:
        raise InputError("--ewma-arl: given without --ewma; add --ewma LAMBDA (e.g. --ewma 0.1)")
    if args.persist is not None:
        from ..monitor.persistence import parse_persist

        parse_persist(args.persist, "--persist")
    if args.chunksize is not None and args.chunksize < 1:
        raise InputError(f"--chunksize: must be a positive integer, got {args.chunksize}")
    from ..monitor.episodes import check_gap

    check_gap(args.episode_gap, "--episode-gap")
    if args.chart_points < 1:
        raise InputError(f"--chart-points: must be a positive integer, got {args.chart_points}")
    model_path = Path(args.baseline)
    if not model_path.exists():
        raise InputError(f"model file {str(model_path)!r} not found; fit one with `whiten baseline`")
    out = Path(args.output)
    check_writable(out, force=args.force, what="output")
    if args.chart:
        check_writable(args.chart, force=args.force, what="chart")
        if Path(args.chart).resolve() == out.resolve():
            raise InputError("--chart and -o name the same file")
    if args.contributions:
        check_writable(args.contributions, force=args.force, what="chart")
        if Path(args.contributions).resolve() in {out.resolve(), Path(args.chart or out).resolve()}:
            raise InputError("--contributions names the same file as -o or --chart")
    if getattr(args, "report", None):
        check_writable(args.report, force=args.force, what="report")
    if args.episodes:
        check_writable(args.episodes, force=args.force, what="episodes")
    refuse_inputs({"-o": out, "--chart": args.chart, "--contributions": args.contributions,
                   "--report": getattr(args, "report", None), "--episodes": args.episodes},
                  {"data": args.data, "--baseline": model_path})
    from ..io.writers import output_format

    output_format(args.output, option="-o")  # the name chooses the format; refused before any work
    if args.episodes:
        output_format(args.episodes, option="--episodes")
    baseline = load_baseline(model_path)
    # the summary, the charts and the report come from the digest (whiten.monitor.ScoreDigest):
    # counts, the worst rows whole and a control-chart trace pooled beyond --chart-points rows
    digest = score_file(baseline, open_data(args, na_values=False), out, alpha=args.alpha, phase=args.phase,
                        fdr=args.fdr,
                        index_column=args.index_column, chunksize=args.chunksize, force=args.force,
                        chart_points=args.chart_points, worst=_WORST, progress=progress_of(args),
                        ewma=args.ewma, ewma_arl=args.ewma_arl, persist=args.persist,
                        gap=args.episode_gap, episodes_path=args.episodes, na_values=args.na_values,
                        rename=args.rename)
    at = digest.attrs
    sensors = list(at["sensors"])
    n_rows = digest.n_rows
    tag = baseline.tag()
    lines = [
        f"scored {n_rows} rows of {args.data} against {args.baseline} "
        f"({len(sensors)} sensors, {at['reference_rows']} reference rows, phase {at['phase']!r})",
        f"model: {tag}" if tag else f"model: {args.baseline} (format {baseline.model_format}: no provenance; "
                                    "refit it to have one)",
        f"limit ({at.get('limit_law', 'law')} law): {at['limit_basis']}",
        f"model accuracy: distances trusted to about {at['digits_trusted']:.0f} significant "
        f"digits (jitter {at['jitter']:g})",
        f"alarms at alpha={at['alpha']:g}: {digest.n_alarm} ({100.0 * digest.n_alarm / max(n_rows, 1):.2f}%); "
        f"about {at['alpha'] * (n_rows - digest.n_none):.1f} expected by chance if all rows were healthy",
    ]
    lines.extend(weak_lines(at.get("weak_screen")))
    if args.fdr is not None:
        lines.append(f"flagged by Benjamini-Hochberg at FDR {args.fdr:g} across the file: {digest.n_fdr or 0}")
    lines.extend(_drift_lines(digest))
    if digest.n_partial or digest.n_none:
        lines.append(f"rows with missing readings: {digest.n_partial} scored on the sensors present, "
                     f"{digest.n_none} with no sensor (not scored)")
    if digest.ignored_columns:
        lines.append(f"columns not in the model (ignored): {', '.join(digest.ignored_columns)}")
    lines.extend(episode_lines(digest, args.episode_gap))
    if digest.n_episodes == 0:
        lines.extend(_worst_lines(digest, sensors))
    lines.append(f"scores written to {out}")
    if args.episodes:
        lines.append(f"episodes written to {args.episodes} ({digest.n_episodes})")
    for note in digest.notes:
        lines.append(f"note: {note}")
    trace = digest.trace() if (args.chart or getattr(args, "report", None)) else None
    time_axis = None
    if trace is not None and digest.index_column is not None:
        # each chart point's label (a pooled point: its first row's), as times or numbers when they are
        time_axis = _time_axis([trace.index.to_numpy()])
    if args.chart:
        from ..monitor.charts import distance_chart

        distance_chart(trace, args.chart, force=args.force, time=time_axis, spans=episode_spans(digest, time_axis),
                       title=f"Squared Mahalanobis distance per row: {os.path.basename(str(args.data))}",
                       subtitle=tag or None)
        lines.append(f"chart written to {args.chart}"
                     + (f" (each point: the largest d2 of {digest.rows_per_point} consecutive rows)"
                        if digest.rows_per_point > 1 else ""))
    if args.contributions:
        from ..monitor.charts import contribution_chart

        if digest.n_episodes:
            pick = digest.episode_peaks(_PEAKS)
            contribution_chart(pick, args.contributions, rows=len(pick), in_order=True, force=args.force,
                               title="At the peak of each alarm episode (number: plain deviation in sd)")
            shown = (f"the peak rows of the first {len(pick)} of {digest.n_episodes} episodes (at most {_PEAKS})"
                     if digest.n_episodes > len(pick) else f"the peak row of each of the {len(pick)} episode(s)")
            lines.append(f"contribution chart written to {args.contributions}: {shown}")
        else:
            pick = digest.worst_by_d2()
            if len(pick):
                contribution_chart(pick, args.contributions, rows=min(4, len(pick)), force=args.force)
                lines.append(f"contribution chart written to {args.contributions}: no alarm, so the "
                             f"{min(4, len(pick))} rows with the largest d2")
            else:
                lines.append("no row could be scored: no contribution chart written")
    if getattr(args, "report", None):  # --report: one self-contained HTML file (whiten.report), from the digest
        from ..report import cli_provenance, monitoring_report

        monitoring_report(digest, baseline, title=f"Scores of {os.path.basename(str(args.data))}"
                          + (f" ({tag})" if tag else ""),
                          time=time_axis,
                          provenance=cli_provenance(args, inputs=[args.data], model=args.baseline)
                          ).write(args.report, force=args.force)
        lines.append(f"report written to {args.report}")
    lines.append(CAUTION)
    try:
        print("\n".join(lines))
        sys.stdout.flush()
    except BrokenPipeError:  # e.g. `whiten score ... | head`: the files are written; stop quietly
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    return 0


def _worst_lines(digest, sensors) -> list[str]:
    """The worst rows by p-value (shown when no row alarmed)."""
    worst = digest.worst_by_p()
    if not len(worst):
        return []
    lines = ["largest distances (no alarm; drop contribution: d2 lost without the sensor):"]
    drop_cols = [f"drop:{c}" for c in sensors]
    drops = worst[drop_cols].to_numpy(dtype=float)
    for i, lab in enumerate(worst.index[:3]):
        row = np.nan_to_num(drops[i], nan=-np.inf)
        top = [j for j in np.argsort(-row, kind="stable")[:3] if np.isfinite(row[j])]
        top_txt = ", ".join(f"{sensors[j]} {drops[i, j]:.3g}" for j in top)
        lines.append(f"  row {lab}: d2 {worst['d2'].iloc[i]:.4g}, p {worst['p_value'].iloc[i]:.2g}; "
                     f"top sensors: {top_txt}")
    return lines


def episode_lines(digest, gap: int) -> list[str]:
    """The episode table of the summary: one line per episode, the first few, and how many more."""
    n = digest.n_episodes
    rule = f"runs of alarms, joined across gaps of up to {gap} quiet row(s)"
    if n == 0:
        return [f"alarm episodes ({rule}): none"]
    ep = digest.episodes()
    out = [f"alarm episodes ({rule}): {n}",
           "  #  start .. end  rows (alarms)  peak d2 at  leading sensors (share of d2 at the peak)"]
    for num, e in ep.head(_SHOWN).iterrows():
        leads = ", ".join(f"{e[f'lead_{i}']} {100 * e[f'share_{i}']:.0f}%" for i in (1, 2, 3)
                          if e[f"lead_{i}"] and np.isfinite(e[f"share_{i}"]))
        out.append(f"  {num}  {e['start']} .. {e['end']}  {e['rows']} ({e['alarm_rows']})  "
                   f"{e['peak_d2']:.4g} at {e['peak']}  {leads}")
    if n > _SHOWN:
        out.append(f"  ... and {n - _SHOWN} more episode(s); --episodes FILE writes every one")
    return out


def weak_lines(weak) -> list[str]:
    """The weak-screen line (``attrs["weak_screen"]`` or ``screen_check``'s dict), or none."""
    if not weak:
        return []
    return [f"weak screen: the limit {weak['limit']:.4g} at alpha={weak['alpha']:g} is {weak['ratio']:.3g} times the "
            f"known-parameter chi-square limit {weak['chi2_limit']:.4g}; about {weak['rows_needed']} reference rows "
            f"(now {weak['reference_rows']}) would bring it within 10% (by the sample estimator's exact law); "
            "faults can go unseen until then"]


def _drift_lines(digest) -> list[str]:
    """The EWMA and persistence lines of the summary (from the digest), with their caution."""
    drift = getattr(digest, "drift", None) or {}
    at = digest.attrs
    out: list[str] = []
    if "ewma" in drift:
        ew = drift["ewma"]
        first = "none" if ew["first_alarm_row"] is None else f"first at data row {ew['first_alarm_row']}"
        out.append(f"drift (EWMA): {at['ewma_basis']}")
        out.append(f"  EWMA alarms: {ew['n_alarm']} ({first}); {ew['n_held']} rows held for a missing reading")
    if "persist" in drift:
        pr = drift["persist"]
        first = "none" if pr["first_alarm_row"] is None else f"first at data row {pr['first_alarm_row']}"
        out.append(f"drift ({at['persist_basis']})")
        out.append(f"  persistence alarms: {pr['n_alarm']} ({first})")
    if out:
        from ..monitor.ewma import EWMA_CAUTION

        out.append(f"  {EWMA_CAUTION}")
    return out


def episode_spans(digest, time_axis) -> list[tuple]:
    """The episodes as (x0, x1) stretches of the chart's axis: times when it shows times, else rows."""
    if not digest.n_episodes:
        return []
    ep = digest.episodes()
    if time_axis is not None:
        ends = _time_axis([ep["start"].to_numpy(), ep["end"].to_numpy()])
        if ends is not None and len(ends) == 2 * len(ep):
            return list(zip(ends[: len(ep)], ends[len(ep):]))
    return list(zip(ep["first_row"].to_numpy(), ep["last_row"].to_numpy() + 1))


def _time_axis(labels):
    """x positions for the chart from the index column: times or numbers, else None (row number)."""
    if not labels:
        return None
    import pandas as pd

    lab = np.concatenate(labels)
    if lab.dtype.kind in "iuf":
        return lab
    import warnings

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # pandas' format-inference notice is not the user's concern
            t = pd.to_datetime(pd.Series(lab), errors="raise")
    except (ValueError, TypeError, OverflowError):
        return None
    return t.to_numpy()
