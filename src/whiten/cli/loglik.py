"""``whiten loglik``: per-row Gaussian log-likelihood of a table under a mean and covariance."""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from ..errors import InputError

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


def add_parser(sub) -> None:
    p = sub.add_parser(
        "loglik", help="per-row Gaussian log-likelihood of a table",
        description="Gaussian log-likelihood of every row of DATA under a mean and covariance given as "
                    "CSV files or by a baseline model file; missing values are marginalized.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("data", metavar="DATA", help="table of rows (.csv)")
    src = p.add_mutually_exclusive_group(required=True)
    src.add_argument("--baseline", metavar="MODEL.json", help="model file from `whiten baseline`")
    src.add_argument("--mean", metavar="FILE", help="CSV with the mean (use with --cov)")
    p.add_argument("--cov", metavar="FILE", help="square CSV covariance with a header of names (use with --mean)")
    p.add_argument("-o", "--output", required=True, metavar="OUT.csv", help="where to write the per-row values")
    p.add_argument("--force", action="store_true", help="replace the output file if it exists")
    p.add_argument("--report", metavar="FILE.html", help="also write a one-file HTML report (whiten.report)")
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
        if sorted(cols) != sorted(names):
            missing = [n for n in names if n not in cols]
            extra = [c for c in cols if c not in names]
            raise InputError(f"--mean file {path!r}: names differ from the covariance's: missing {missing}, "
                             f"extra {extra}")
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


def _chunks(path: str, names: list[str]):
    """Frames of the model's columns: the chunked table reader when present, else one pandas read."""
    try:
        from ..io.tables import read_table_chunks
    except ImportError:
        read_table_chunks = None
    if read_table_chunks is not None:
        yield from read_table_chunks(path, columns=names)
        return
    import pandas as pd

    frame = _read_csv(path, "data")
    frame.columns = [str(c).strip() for c in frame.columns]
    missing = [n for n in names if n not in frame.columns]
    if missing:
        raise InputError(f"data file {path!r}: missing columns {missing} (the model has {names})")
    vals = frame[names].apply(pd.to_numeric, errors="coerce")
    bad = vals.isna().to_numpy() & ~frame[names].isna().to_numpy()
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise InputError(f"data file {path!r}: row {r}, column {names[c]!r} holds {frame[names].iloc[r, c]!r}, "
                         "not a number")
    yield vals


def run(args) -> int:
    from ..io.atomic import atomic_open, check_writable

    check_writable(args.output, force=args.force)
    report = getattr(args, "report", None)
    if report:
        check_writable(report, force=args.force, what="report")
    parts = []  # per-chunk evaluations, kept only for --report
    g, names = _model(args)
    total, evaluated, partial, empty, rows = 0.0, 0, 0, 0, 0
    # streamed into a temporary sibling, renamed into place only when complete
    with atomic_open(args.output, "w", force=args.force) as fh:
        fh.write("row,loglik,d2,n_observed\n")
        for chunk in _chunks(args.data, names):
            ev = g.evaluate(chunk[names].to_numpy(dtype=float), missing="marginalize")
            if report:
                parts.append(ev)
            lines = []
            for k in range(len(ev.logpdf)):
                nobs = int(ev.n_observed[k])
                if nobs == 0:
                    lines.append(f"{rows + k},,,0\n")
                    empty += 1
                    continue
                ll = float(ev.logpdf[k])
                lines.append(f"{rows + k},{ll!r},{float(ev.d2[k])!r},{nobs}\n")
                total += ll
                evaluated += 1
                partial += nobs < len(names)
            fh.write("".join(lines))
            rows += len(ev.logpdf)
    note = f"; {partial} with missing values evaluated on their marginal" if partial else ""
    note += f"; {empty} with no values skipped" if empty else ""
    print(f"total log-likelihood {total:.10g} over {evaluated} of {rows} rows ({len(names)} variables{note})")
    h = g.health
    jit = f", jitter {h.jitter:.3g} added to the diagonal" if h.jitter else ""
    print(f"covariance: about {h.digits_trusted:.0f} significant digits trusted in solves (rcond {h.rcond:.3g}{jit})")
    print(f"wrote {args.output}")
    if report:  # --report: one self-contained HTML file (whiten.report)
        from ..gaussian import RowEvaluation
        from ..report import cli_provenance, likelihood_report

        if not parts:
            raise InputError(f"--report: no rows were read from {args.data!r}; nothing to report")
        ev = RowEvaluation(*(np.concatenate([getattr(e, k) for e in parts]) for k in ("d2", "logpdf", "n_observed")))
        files = [f for f in (args.data, args.mean, args.cov) if f]
        likelihood_report(ev, g, provenance=cli_provenance(args, inputs=files, model=args.baseline)
                          ).write(report, force=args.force)
        print(f"wrote {report}")
    return 0
