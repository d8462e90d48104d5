"""``whiten baseline``: fit a reference model from a table of healthy rows and save it."""

from __future__ import annotations

import argparse
import math

from ..errors import InputError
from . import add_progress_options, add_reader_options, command_words, open_data, progress_of

EPILOG = """\
examples:
  whiten baseline healthy_week.csv -o pump_baseline.json
  whiten baseline healthy.parquet -o loop.json --columns supply,return,flow \\
      --index-column timestamp --chunksize 50000
  whiten baseline few_rows.csv -o loop.json --estimator shrinkage --force
  whiten baseline counts.csv -o loop.json --weight-column n_seen
  whiten baseline station_week.csv -o station.json --index-column timestamp --na-values=-9999,ERR

The model file is JSON (format whiten.baseline/4) with a SHA-256 checksum; it
records the settings (index column, sensors, codes, estimator) and where it
came from (source file and its SHA-256, rows, training period, this command);
`whiten inspect MODEL.json` describes it and `whiten score` uses it. Large
files are read in chunks with bounded memory. Rows with a missing reading are
left out and counted (--missing error stops at the first instead).
"""


def add_parser(sub) -> None:
    p = sub.add_parser(
        "baseline", help="fit a reference model (mean and covariance) from healthy rows",
        description="Fit a Gaussian baseline of healthy operation from DATA (CSV/TSV/Parquet) and write it "
                    "to a model file, with a short account of its numerical health.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("data", metavar="DATA", help="table of reference rows (.csv, .tsv, .parquet)")
    p.add_argument("-o", "--output", required=True, metavar="MODEL.json", help="model file to write")
    p.add_argument("--columns", metavar="A,B,...", help="sensors to use, comma-separated (default: all but "
                                                         "the index column)")
    p.add_argument("--estimator", choices=["sample", "shrinkage", "robust"], default="sample",
                   help="sample (default): unbiased covariance; shrinkage: correlation towards the "
                        "identity, for few rows; robust: FastMCD, leaves out gross outliers of the reference data")
    p.add_argument("--shrinkage", choices=["ledoit-wolf", "oas"], default="ledoit-wolf",
                   help="intensity rule for --estimator shrinkage (default ledoit-wolf)")
    p.add_argument("--chunksize", type=int, default=None, metavar="N", help="rows per chunk (default 100000)")
    p.add_argument("--index-column", metavar="COL", help="column that labels rows (e.g. a timestamp)")
    p.add_argument("--weight-column", metavar="COL",
                   help="column of frequency weights (a weight of 3 counts a row three times); sample "
                        "estimator only")
    p.add_argument("--missing", choices=["drop", "error"], default="drop",
                   help="incomplete rows: drop and count them (default) or stop at the first")
    p.add_argument("--force", action="store_true", help="replace the model file if it exists")
    add_reader_options(p)
    add_progress_options(p)
    p.set_defaults(func=run)


def _columns(text: str | None) -> list[str] | None:
    if text is None:
        return None
    cols = [c.strip() for c in text.split(",") if c.strip()]
    if not cols:
        raise InputError("--columns: give at least one column name, e.g. --columns supply,return")
    return cols


def health_lines(b) -> list[str]:
    """A short plain-words account of a baseline's fit and numerical health."""
    h = b.health
    out = []
    kept = f"{b.n} used"
    if h.n_dropped:
        kept += f" ({h.n_dropped} incomplete row(s) left out)"
    out.append(f"rows: {h.n_rows_read} read, {kept}, in {h.n_chunks} chunk(s)")
    out.append(f"sensors ({b.dim}): {', '.join(b.columns)}")
    prm = b.params
    if b.estimator == "sample":
        route = {"gram": "shifted Gram matrix + Cholesky", "tsqr": "tall-skinny QR of the centred data",
                 "updated": "rank-one updates"}.get(h.method, h.method)
        why = ""
        if h.gram_digits_lost is not None and h.method == "tsqr":
            why = f" (the Gram route would lose {h.gram_digits_lost:.1f} digits)"
        out.append(f"estimator: sample covariance, divisor {prm.get('divisor', 'n - 1')}; route: {route}{why}")
    elif b.estimator == "shrinkage":
        out.append(f"estimator: shrinkage of the correlation towards the identity ({prm.get('shrinkage')}), intensity "
                   f"{prm.get('intensity', float('nan')):.4g}")
    else:
        flagged = prm.get("flagged_labels", prm.get("flagged_rows", []))
        show = ", ".join(str(v) for v in flagged[:8]) + (" ..." if len(flagged) > 8 else "")
        out.append(f"estimator: robust (FastMCD, h = {prm.get('h')} of {prm.get('n_total')} rows, reweighted); "
                   f"{prm.get('n_flagged', 0)} reference row(s) left out as outliers" + (f": {show}" if show else ""))
    cond = h.condition
    cond_s = "inf" if not math.isfinite(cond) else f"{cond:.3g}"
    out.append(f"condition (correlation scale): {cond_s}; about {h.digits_lost:.1f} digits lost, "
               f"~{h.digits_trusted:.0f} trusted")
    law = getattr(b, "limit_law", None)
    from ..monitor.calibrated import ASYMPTOTIC_CELLS, asymptotic_serves
    from ..monitor.limits import screen_check, t2_limit

    if law is not None:
        out.append("limit of new rows (simulated law): " + law.describe(0.001))
        lim = law.isf(0.001)
    elif b.estimator == "sample" and not prm.get("weighted"):
        out.append(f"limit of new rows (exact law): the F law of the sample estimator with m = {b.n} "
                   "(Tracy, Young & Mason 1992)")
        lim = float(t2_limit(0.001, b.dim, b.n, phase="new"))
    elif asymptotic_serves(b.estimator, int(prm.get("n_total", b.n)), b.dim):
        out.append(f"limit of new rows (asymptotic law): the sample estimator's F law with m = {b.n} "
                   f"(m p = {int(prm.get('n_total', b.n)) * b.dim} > {ASYMPTOTIC_CELLS} reference cells)")
        lim = float(t2_limit(0.001, b.dim, b.n, phase="new"))
    else:
        out.append("limit of new rows (approximate law): the sample estimator's F law; this model carries no "
                   "simulated law, refit it for a limit that holds")
        lim = float(t2_limit(0.001, b.dim, b.n, phase="new")) if b.n > b.dim else math.inf
    from .score import weak_lines

    out.extend(weak_lines(screen_check(lim, 0.001, b.dim, b.n)))
    if law is not None and law.flagged_mean is not None:
        out.append(f"clean Gaussian data of {law.m} rows would give {law.flagged_mean:.1f} +- {law.flagged_se:.1f} "
                   f"outlier(s) at this cut (simulated; {0.025 * law.m:.1f} if the parameters were known)")
    out.append("jitter: none" if h.jitter == 0 else
               f"jitter: {h.jitter:.3g} added to the diagonal ({h.jitter_relative:.1e} of the mean variance)")
    return out


def run(args) -> int:
    from .. import fit_baseline
    from ..io.atomic import check_writable, refuse_inputs

    check_writable(args.output, force=args.force, what="model")  # before the work, not after
    refuse_inputs({"-o": args.output}, {"data": args.data})
    b = fit_baseline(open_data(args), estimator=args.estimator, columns=_columns(args.columns),
                     chunksize=args.chunksize, index_column=args.index_column, missing=args.missing,
                     shrinkage=args.shrinkage, weights=args.weight_column, progress=progress_of(args),
                     call=command_words(args))
    path = b.save(args.output, force=args.force)
    print(f"baseline from {args.data}")
    for line in health_lines(b):
        print(f"  {line}")
    print(f"wrote {path}")
    return 0

