"""``whiten loglik``: per-row Gaussian log-likelihood of a table under a mean and covariance."""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..io.tables import select_columns
from . import add_progress_options, add_reader_options, open_data, progress_of

EPILOG = """\
examples:
  whiten loglik batch7.csv --mean mean.csv --cov cov.csv -o batch7_loglik.csv
  whiten loglik batch7.csv --baseline probe_baseline.json -o batch7_loglik.csv --force

--mean is a CSV with one row under a header of variable names, or a single
column of values in the order of the covariance's names. --cov is a square
CSV whose header row names the variables (an optional first column repeating
the names is allowed). DATA must have a column for every variable; other
columns are ignored.

The output has one line per input row, in input order: row, loglik (natural
log-density of the row's observed values), d2 (squared Mahalanobis distance
of those values), n_observed. A row with missing values is evaluated on the
marginal of the variables it has; a row with none gets empty cells. The total
log-likelihood over the evaluated rows is printed.
"""


LAW_SENTENCE = ("p-values (--report): the upper tail of chi-square(n_observed) at d2, the law of a row when the mean "
                "and covariance are known exactly; `whiten score` uses the law of the estimated baseline (exact F, "
                "simulated or asymptotic), so its p-value for the same row is larger")


def add_parser(sub) -> None:
    p = sub.add_parser(
        "loglik", help="per-row Gaussian log-likelihood of a table",
        description="Gaussian log-likelihood of every row of DATA under a mean and covariance given as "
                    "CSV files or by a baseline model file; missing values are marginalized.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("data", metavar="DATA", help="table of rows (.csv, .tsv, .parquet)")
    src = p.add_mutually_exclusive_group(required=True)
    src.add_argument("--baseline", metavar="MODEL.json", help="model file from `whiten baseline`")
    src.add_argument("--mean", metavar="FILE", help="CSV with the mean (use with --cov)")
    p.add_argument("--cov", metavar="FILE", help="square CSV covariance with a header of names (use with --mean)")
    p.add_argument("-o", "--output", required=True, metavar="OUT.csv",
                   help="where to write the per-row values; the name chooses the format: .csv, .tsv, .csv.gz, "
                        ".tsv.gz or .parquet (e.g. -o loglik.parquet)")
    p.add_argument("--force", action="store_true", help="replace the output file if it exists")
    p.add_argument("--report", metavar="FILE.html", help="also write a one-file HTML report (whiten.report)")
    add_reader_options(p)
    add_progress_options(p)
    p.set_defaults(func=run)


def _read_csv(path: str, what: str):
    import pandas as pd

    p = Path(path)
    if not p.is_file():
        raise InputError(f"{what} file {str(p)!r} not found" if not p.exists() else
                         f"{what} path {str(p)!r} is a folder, not a file")
    try:
        return pd.read_csv(p, skipinitialspace=True)
    except pd.errors.EmptyDataError:
        raise InputError(f"{what} file {str(p)!r} is empty") from None
    except (pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise InputError(f"{what} file {str(p)!r} could not be parsed as CSV ({str(exc).splitlines()[0]})") from None


def _numbers(frame, what: str, path: str) -> np.ndarray:
    import pandas as pd

    vals = frame.apply(pd.to_numeric, errors="coerce")
    bad = vals.isna().to_numpy() | ~np.isfinite(vals.to_numpy(dtype=float, na_value=np.nan))
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise InputError(f"{what} file {path!r}: row {r}, column {str(frame.columns[c])!r} holds "
                         f"{frame.iloc[r, c]!r}; every entry must be a finite number")
    return vals.to_numpy(dtype=float)


def _read_cov(path: str):
    frame = _read_csv(path, "--cov")
    names = [str(c).strip() for c in frame.columns]
    # an optional first column repeating the names (a labelled square table)
    if frame.shape[1] == frame.shape[0] + 1 and frame.iloc[:, 0].dtype.kind == "O":
        labels = [str(v).strip() for v in frame.iloc[:, 0]]
        frame = frame.iloc[:, 1:]
        names = names[1:]
        if labels != names:
            raise InputError(f"--cov file {path!r}: row labels {labels} differ from the header {names}")
    if frame.shape[0] != frame.shape[1]:
        raise InputError(f"--cov file {path!r}: has {frame.shape[0]} rows under {frame.shape[1]} named columns; "
                         "a covariance is square, one row per header name")
    if len(set(names)) != len(names):
        raise InputError(f"--cov file {path!r}: repeated names in the header {names}")
    return _numbers(frame, "--cov", path), names


def _read_mean(path: str, names: list[str]) -> np.ndarray:
    frame = _read_csv(path, "--mean")
    cols = [str(c).strip() for c in frame.columns]
    if frame.shape[0] == 1 and frame.shape[1] == len(names):
        select_columns(cols, names, where=f"--mean file {path!r}", what="the covariance's names", exact=True)
        frame.columns = cols
        return _numbers(frame[names], "--mean", path)[0]
    if frame.shape[1] == 1 and frame.shape[0] == len(names):
        return _numbers(frame, "--mean", path)[:, 0]
    raise InputError(f"--mean file {path!r}: expected one row under a header of the {len(names)} names "
                     f"{names}, or one column of {len(names)} values; got {frame.shape[0]} rows x "
                     f"{frame.shape[1]} columns")


def _model(args):
    from ..gaussian import Gaussian
    from ..linalg.cholesky import cholesky

    if args.baseline is not None:
        if args.cov is not None:
            raise InputError("--cov goes with --mean, not with --baseline")
        import whiten

        loader = getattr(whiten, "load_baseline", None)
        if loader is None:
            raise InputError("--baseline: this installation of whiten cannot read baseline model files "
                             "(whiten.load_baseline is missing); pass --mean FILE --cov FILE instead")
        b = loader(args.baseline)
        names = list(b.columns)
        return Gaussian(b.mean, b.factor, columns=names), names
    if args.cov is None:
        raise InputError("--mean needs --cov FILE (the covariance matrix as a square CSV)")
    cov, names = _read_cov(args.cov)
    mean = _read_mean(args.mean, names)
    return Gaussian(mean, cholesky(cov, columns=names), columns=names), names


def run(args) -> int:
    from ..io.atomic import check_writable, refuse_inputs
    from ..io.writers import output_format
    from ..likelihood.stream import loglik_file

    check_writable(args.output, force=args.force)
    report = getattr(args, "report", None)
    refuse_inputs({"-o": args.output, "--report": report},
                  {"data": args.data, "--baseline": args.baseline, "--mean": args.mean, "--cov": args.cov})
    output_format(args.output, option="-o")  # the name chooses the format; refused before any work
    if report:
        check_writable(report, force=args.force, what="report")
    g, names = _model(args)
    # streamed into a temporary sibling, renamed into place only when complete
    res = loglik_file(g, open_data(args), args.output, columns=names, force=args.force, keep_rows=bool(report),
                      progress=progress_of(args))
    total, evaluated, partial, empty, rows = res.total, res.evaluated, res.partial, res.empty, res.rows
    note = f"; {partial} with missing values evaluated on their marginal" if partial else ""
    note += f"; {empty} with no values skipped" if empty else ""
    print(f"total log-likelihood {total:.10g} over {evaluated} of {rows} rows ({len(names)} variables{note})")
    h = g.health
    jit = f", jitter {h.jitter:.3g} added to the diagonal" if h.jitter else ""
    print(f"covariance: about {h.digits_trusted:.0f} significant digits trusted in solves (rcond {h.rcond:.3g}{jit})")
    print(LAW_SENTENCE)
    print(f"wrote {args.output}")
    if report:  # --report: one self-contained HTML file (whiten.report)
        from ..report import cli_provenance, likelihood_report

        ev = res.evaluation
        if ev is None:
            raise InputError(f"--report: no rows were read from {args.data!r}; nothing to report")
        files = [f for f in (args.data, args.mean, args.cov) if f]
        likelihood_report(ev, g, provenance=cli_provenance(args, inputs=files, model=args.baseline)
                          ).write(report, force=args.force)
        print(f"wrote {report}")
    return 0
