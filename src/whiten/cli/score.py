"""``whiten score``: score a (large) table of sensor rows against a saved baseline."""

from __future__ import annotations

import argparse
import heapq
import os
import sys
from pathlib import Path

import numpy as np

from ..io.tables import write_csv_chunk
from ..errors import InputError

EPILOG = """\
examples:
  whiten score week32.csv --baseline pump_baseline.json -o week32_scores.csv
  whiten score week32.csv --baseline pump_baseline.json -o scores.csv \\
      --index-column timestamp --alpha 0.0001 --fdr 0.05 --chart week32.png \\
      --contributions week32_why.png

The output has one line per input row, in input order: d2 (squared
Mahalanobis distance), p_value, limit, alarm, n_observed, top_contributor,
note, then per sensor drop:<sensor> (d2 lost when the sensor is left out),
chain:<sensor> (conditional terms along the baseline's sensor order; they sum
to d2) and dev:<sensor> (plain standardized deviation). Rows with missing
readings are scored on the sensors they have. Large files are read in
chunks of --chunksize rows; the output is written to a temporary file and
renamed into place at the end.

This is a statistical screen, not a protective function: alarms do not replace
the plant's safety systems, and local codes take precedence.
"""

CAUTION = ("Caution: a statistical screen, not a protective function; act on alarms through the plant's "
           "own procedures and safety systems, and defer to local codes.")

_WORST = 5


def add_parser(sub) -> None:
    p = sub.add_parser(
        "score", help="score sensor rows against a baseline model",
        description="Score every row of DATA (CSV/TSV/Parquet) against a baseline fitted with "
                    "`whiten baseline`: squared Mahalanobis distance, exact p-value, alarm, and the "
                    "sensors that drive it.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("data", metavar="DATA", help="table of sensor rows (.csv, .tsv, .parquet)")
    p.add_argument("--baseline", required=True, metavar="MODEL.json", help="model file from `whiten baseline`")
    p.add_argument("-o", "--output", required=True, metavar="SCORES.csv", help="where to write the scores")
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
                   help="write bar charts of the drop contributions for the worst rows")
    p.add_argument("--index-column", metavar="COL", help="column that labels rows (e.g. a timestamp); kept in the output")
    p.add_argument("--chunksize", type=int, default=None, metavar="N", help="rows per chunk (default 100000)")
    p.add_argument("--force", action="store_true", help="replace output files that already exist")
    p.add_argument("--report", metavar="FILE.html",
                   help="also write a one-file HTML report (whiten.report); reads the scores back once")
    p.set_defaults(func=run)


def _chunks(args, columns):
    from ..io.tables import read_table_chunks

    return read_table_chunks(args.data, columns=columns, chunksize=args.chunksize,
                             index_column=args.index_column)


def _progress(it, desc):
    from ..io.tables import progress

    return progress(it, desc=desc, unit="chunk")


def run(args) -> int:
    import pandas as pd

    from .. import load_baseline
    from ..io.atomic import atomic_open, check_writable
    from ..io.tables import table_columns
    from ..monitor.fdr import bh_adjust
    from ..monitor.limits import check_alpha
    from ..monitor.score import Scorer

    check_alpha(args.alpha)
    if args.fdr is not None:
        check_alpha(args.fdr, "--fdr")
    if args.chunksize is not None and args.chunksize < 1:
        raise InputError(f"--chunksize: must be a positive integer, got {args.chunksize}")
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
    baseline = load_baseline(model_path)
    scorer = Scorer(baseline, alpha=args.alpha, phase=args.phase)
    header = table_columns(args.data)
    ignored = [c for c in header if c not in scorer.columns and c != args.index_column]
    missing = [c for c in scorer.columns if c not in header]
    if missing:
        raise InputError(f"data file {args.data!r} does not match the model: missing columns {missing}, "
                         f"extra columns {ignored}")

    adjusted = None
    if args.fdr is not None:
        # pass 1: every p-value, so the step-up threshold sees the whole file
        ps = [scorer.score_array(ch.to_numpy())["p_value"] for ch in _progress(_chunks(args, scorer.columns), "pass 1/2")]
        adjusted = bh_adjust(np.concatenate(ps)) if ps else np.empty(0)

    n_rows = n_alarm = n_fdr = n_partial = n_none = 0
    worst: list[tuple[float, int, str, float, list[tuple[str, float]]]] = []
    d2_all, lim_all, alarm_all, labels = [], [], [], []
    drop_cols = [f"drop:{c}" for c in scorer.columns]
    with atomic_open(out, "w", force=args.force, what="output") as fh:
        first = True
        for chunk in _progress(_chunks(args, scorer.columns), "scoring" if adjusted is None else "pass 2/2"):
            cols = scorer.score_array(chunk.to_numpy())
            k = len(chunk)
            if adjusted is not None:
                adj = adjusted[n_rows:n_rows + k]
                flag = np.zeros(k, dtype=bool)
                ok = ~np.isnan(adj)
                flag[ok] = adj[ok] <= args.fdr
                items = list(cols.items())
                cols = {}
                for key, val in items:
                    cols[key] = val
                    if key == "alarm":
                        cols["p_bh"] = adj
                        cols["alarm_fdr"] = flag
                n_fdr += int(flag.sum())
            idx = chunk.index
            frame = pd.DataFrame(cols, index=idx)
            if args.index_column is None:
                frame.index.name = "row"
            write_csv_chunk(frame, fh, header=first)
            first = False
            d2 = cols["d2"]
            n_alarm += int(cols["alarm"].sum())
            nobs = cols["n_observed"]
            n_none += int(np.sum(nobs == 0))
            n_partial += int(np.sum((nobs > 0) & (nobs < scorer.p)))
            if args.chart:  # the chart needs every row's d2 (17 bytes a row); otherwise keep nothing per row
                d2_all.append(d2)
                lim_all.append(cols["limit"])
                alarm_all.append(cols["alarm"])
            if args.chart and args.index_column is not None:
                labels.append(np.asarray(idx))
            # keep the few worst rows (by p-value, then d2) with their top sensors
            scored = np.flatnonzero(~np.isnan(cols["p_value"]))
            if scored.size:
                pick = scored[np.lexsort((-d2[scored], cols["p_value"][scored]))[:_WORST]]
                drops = frame[drop_cols].to_numpy(dtype=float)
                for i in pick:
                    row = np.nan_to_num(drops[i], nan=-np.inf)
                    top = np.argsort(-row)[:3]
                    tops = [(scorer.columns[j], float(drops[i, j])) for j in top if np.isfinite(row[j])]
                    item = (-float(cols["p_value"][i]), float(d2[i]), n_rows + int(i), str(idx[i]), tops,
                            frame.iloc[int(i)] if args.contributions else None)
                    if len(worst) < _WORST:
                        heapq.heappush(worst, item)
                    else:
                        heapq.heappushpop(worst, item)
            n_rows += k

    lines = [
        f"scored {n_rows} rows of {args.data} against {args.baseline} "
        f"({scorer.p} sensors, {scorer.m} reference rows, phase {scorer.phase!r})",
        f"limit: {scorer.limit_basis}",
        f"model accuracy: distances trusted to about {scorer.factor.health.digits_trusted:.0f} significant "
        f"digits (jitter {scorer.factor.health.jitter:g})",
        f"alarms at alpha={scorer.alpha:g}: {n_alarm} ({100.0 * n_alarm / max(n_rows, 1):.2f}%); "
        f"about {scorer.alpha * (n_rows - n_none):.1f} expected by chance if all rows were healthy",
    ]
    if args.fdr is not None:
        lines.append(f"flagged by Benjamini-Hochberg at FDR {args.fdr:g} across the file: {n_fdr}")
    if n_partial or n_none:
        lines.append(f"rows with missing readings: {n_partial} scored on the sensors present, "
                     f"{n_none} with no sensor (not scored)")
    if ignored:
        lines.append(f"columns not in the model (ignored): {', '.join(ignored)}")
    if worst:
        lines.append("worst rows (drop contribution: d2 lost without the sensor):")
        for negp, d2v, _, lab, tops, _ in sorted(worst, key=lambda t: (-t[0], -t[1])):
            top_txt = ", ".join(f"{s} {v:.3g}" for s, v in tops)
            lines.append(f"  row {lab}: d2 {d2v:.4g}, p {-negp:.2g}; top sensors: {top_txt}")
    lines.append(f"scores written to {out}")
    if args.chart:
        from ..monitor.charts import distance_chart

        frame = pd.DataFrame({"d2": np.concatenate(d2_all), "limit": np.concatenate(lim_all),
                              "alarm": np.concatenate(alarm_all)})
        frame.attrs.update({"alpha": scorer.alpha, "phase": scorer.phase})
        distance_chart(frame, args.chart, force=args.force, time=_time_axis(labels),
                       title=f"Squared Mahalanobis distance per row: {os.path.basename(str(args.data))}")
        lines.append(f"chart written to {args.chart}")
    if args.contributions:
        from ..monitor.charts import contribution_chart

        rows = [t[5] for t in sorted(worst, key=lambda t: (-t[0], -t[1]))[:4]]
        if rows:
            pick = pd.DataFrame(rows)
            pick.attrs.update({"alpha": scorer.alpha, "phase": scorer.phase})
            contribution_chart(pick, args.contributions, rows=len(rows), force=args.force)
            lines.append(f"contribution chart written to {args.contributions}")
        else:
            lines.append("no row could be scored: no contribution chart written")
    if getattr(args, "report", None):  # --report: one self-contained HTML file (whiten.report)
        from ..report import cli_provenance, monitoring_report

        scores = pd.read_csv(out, index_col=0, usecols=lambda c: not str(c).startswith("chain:"))
        scores.attrs.update(scorer.attrs(args.fdr))
        monitoring_report(scores, baseline, title=f"Scores of {os.path.basename(str(args.data))}",
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
