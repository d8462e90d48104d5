"""``whiten regress``: least-squares (or ridge) fit of one column of a table on others."""

from __future__ import annotations

import argparse
import io
import json
import math
import os

from ..errors import InputError
from . import add_reader_options

EPILOG = """\
examples (the file comes with `whiten demo --out demo-output`, in demo-output/kiln_energy):
  whiten regress kiln_energy.csv --response energy_kwh --weights meter_weight -o kiln_fit.json
  whiten regress kiln_energy.csv --response energy_kwh \\
      --predictors zone_c_upper,zone_c_lower,load_t,fan_rpm,ambient_c \\
      --weights meter_weight --chart kiln_fit.png -o kiln_fit.json
  whiten regress kiln_energy.csv --response energy_kwh --ridge gcv --standardize \\
      --chart ridge.png -o ridge.json

What you get on screen: every coefficient with its interval, a numerical-health
block (condition number of the design with unit-length columns and as given, how
many digits of the coefficients can be trusted, how the solve was refined) and
the collinearity findings in plain words (which columns are nearly or exactly
dependent, and on what). FIT.json holds all of it plus VIFs, condition indices
and variance-decomposition proportions. With --chart: residuals against fitted
values and leverage against deleted (externally studentized) residuals; for ridge, the coefficient
paths and the criterion curve over the penalty grid.

Rules: every row of DATA is used (a missing or non-numeric cell in a used column
is an error naming its row and column, never silently dropped); an exactly
dependent column is set aside (the later one in --predictors order) and named
with the columns it depends on; existing output files are replaced only with
--force.
"""


def add_parser(sub) -> None:
    p = sub.add_parser(
        "regress", help="fit a regression on (nearly) collinear columns, with trustworthy digits",
        description="Fit RESPONSE on PREDICTORS from a CSV table by equilibrated Householder QR with "
                    "extended-precision refinement (or ridge), report intervals, numerical health and "
                    "collinearity, and save the fit as JSON.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("data", metavar="DATA.csv", help="table with a header row (CSV; .tsv is read tab-separated)")
    p.add_argument("--response", required=True, metavar="COL", help="column to explain")
    p.add_argument("--predictors", metavar="A,B,...",
                   help="comma-separated predictor columns (default: every other column except --weights)")
    p.add_argument("--weights", metavar="COL", help="column of positive row weights (weighted least squares)")
    p.add_argument("--ridge", metavar="gcv|loocv|VALUE",
                   help="ridge penalty on the predictors (intercept unpenalised): a number, or gcv / loocv to "
                        "choose it on a log grid")
    p.add_argument("--standardize", action="store_true",
                   help="with --ridge: penalise predictors scaled to unit standard deviation")
    p.add_argument("--no-intercept", action="store_true", help="fit without a constant term")
    p.add_argument("--rank-policy", choices=["nan", "drop", "raise", "minimum-norm"], default="nan",
                   help="what to do with exactly dependent columns (default: nan = set aside, reported as NaN)")
    p.add_argument("--coverage", type=float, default=0.95, help="interval coverage (default 0.95)")
    p.add_argument("-o", "--output", required=True, metavar="FIT.json", help="where to write the fit")
    p.add_argument("--chart", metavar="FILE.png", help="write diagnostic charts (PNG)")
    p.add_argument("--force", action="store_true", help="replace output files that already exist")
    p.add_argument("--report", metavar="FILE.html", help="also write a one-file HTML report (whiten.report)")
    add_reader_options(p)
    p.set_defaults(func=run)


def _read_table(path: str, args=None):
    """The table, opened by the one reader (whiten.io.tables): file checked, header read."""
    from ..io.tables import open_table

    return open_table(path, sep=getattr(args, "sep", None), decimal=getattr(args, "decimal", None),
                      na_values=getattr(args, "na_values", None))


def _select(table, args):
    """(predictors, the used columns as one float64 frame); every row kept, NaN left to the fit to name."""
    import pandas as pd

    wanted = [args.response] + ([args.weights] if args.weights else [])
    if args.predictors:
        preds = [c.strip() for c in args.predictors.split(",") if c.strip()]
        if not preds:
            raise InputError("--predictors: give at least one column name, e.g. --predictors a,b")
        if args.response in preds:
            raise InputError(f"--predictors: the response {args.response!r} cannot also be a predictor")
        dup = sorted({c for c in preds if preds.count(c) > 1})
        if dup:
            raise InputError(f"--predictors: {dup} listed more than once")
    else:
        preds = None
    preds = table.select(preds, what="--response/--predictors/--weights", also=wanted)
    used = list(dict.fromkeys(wanted + preds))
    return preds, pd.concat(list(table.chunks(used)))


def _fmt(v: float, width: int = 0) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        s = "n/a"
    elif isinstance(v, float) and math.isinf(v):
        s = "inf" if v > 0 else "-inf"
    else:
        s = f"{v:.6g}"
    return s.rjust(width) if width else s


def _report(fit, args, preds) -> str:
    h = fit.health
    lines = []
    kind = {"none": "least squares", "wls": "weighted least squares", "gls": "generalised least squares"}[fit.weighted]
    if fit.ridge is not None:
        kind = f"ridge ({'chosen by ' + fit.ridge.criterion if fit.ridge.criterion != 'fixed' else 'fixed'} " \
               f"penalty {fit.ridge.penalty:.4g}{', standardized' if fit.ridge.standardized else ''})"
    lines.append(f"== {args.response} explained by {len(preds)} predictor(s) over {fit.n_rows} rows, {kind} ==")
    lines.append("")
    pct = f"{100 * args.coverage:g}%"
    lines.append(f"-- coefficients, each with its {pct} interval --")
    ci = fit.coef_interval(args.coverage)
    pred_pos = {n: i for i, n in enumerate(fit.columns)}
    wname = max(len(n) for n in fit.names)
    for i, name in enumerate(fit.names):
        est = fit.coef[i]
        if math.isnan(est):
            lines.append(f"  {name.ljust(wname)}  set aside (a combination of other columns; see collinearity below)")
            continue
        extra = []
        if not math.isnan(fit.p_value[i]):
            extra.append(f"p {fit.p_value[i]:.2g}")
        if name in pred_pos and not math.isnan(fit.vif[pred_pos[name]]):
            extra.append(f"VIF {_fmt(float(fit.vif[pred_pos[name]]))}")
        lines.append(f"  {name.ljust(wname)}  {_fmt(float(est), 13)}   from {_fmt(float(ci[i, 0]))} to "
                     f"{_fmt(float(ci[i, 1]))}   (std error {_fmt(float(fit.std_error[i]))}"
                     + (", " + ", ".join(extra) if extra else "") + ")")
    lines.append("")
    lines.append("-- how well it fits --")
    about = "of the variation" if fit.intercept else "of the sum of squares about zero (no intercept)"
    lines.append(f"  explains {100 * fit.r_squared:.4g}% {about} (adjusted {100 * fit.adj_r_squared:.4g}%); "
                 f"residual sd {_fmt(fit.residual_sd)} on {_fmt(float(fit.dof))} degrees of freedom")
    if not math.isnan(fit.f_statistic):
        lines.append(f"  all-slopes-zero test: F = {_fmt(fit.f_statistic)}, p = {fit.f_p_value:.2g}")
    lines.append(f"  log-likelihood {_fmt(fit.loglik)}, AIC {_fmt(fit.aic)}, BIC {_fmt(fit.bic)}")
    lines.append("")
    lines.append("-- numerical health --")
    lines.append(f"  condition number {h.condition:.3g} with unit-length columns "
                 f"({h.condition_raw:.3g} as given; {h.condition_fitted:.3g} for the columns fitted)")
    lines.append(f"  digits you can trust: {h.digits_solved:.1f} computed right for the data exactly as given; "
                 f"{h.digits_trusted:.1f} survive a change in the data's last digit")
    ref = (f"{h.refinement_steps} refinement step(s) with {h.residual_arithmetic} residuals, "
           f"{'converged' if h.refinement_converged else 'stopped'} (last correction {h.last_correction:.1g})"
           if h.refinement_steps else "no refinement")
    lines.append(f"  solve: {h.method}; {ref}")
    lines.append(f"  rank {h.rank} of {h.n_columns} columns")
    for note in h.notes:
        lines.append(f"  note: {note}")
    lines.append("")
    lines.append("-- collinearity --")
    if fit.collinearity.sentences:
        for s in fit.collinearity.sentences:
            lines.append(f"  * {s}")
    else:
        lines.append("  no near-dependence: every condition index is at most 30 (Belsley's threshold)")
    return "\n".join(lines) + "\n"


def _chart(fit, path: str, force: bool) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .. import _palette as pal
    from ..io.atomic import write_bytes

    panels = 2 + (2 if fit.ridge is not None and fit.ridge.grid is not None else 0)
    fig, axes = plt.subplots(1, panels, figsize=(4.2 * panels, 3.8))
    ax = axes[0]
    ax.scatter(fit.fitted, fit.residuals, s=10, color=pal.PLAIN)
    ax.axhline(0.0, color=pal.MUTED, lw=0.8)
    ax.set_xlabel("fitted value")
    ax.set_ylabel("residual")
    ax.set_title("residuals against fitted")
    ax = axes[1]
    if fit.influence_available:
        inf = fit.influence()
        ax.scatter(inf.leverage, inf.deleted_residual, s=10, color=pal.PLAIN)
        p = fit.rank  # the columns fitted: for a fit with influence measures, rank == their number
        ax.axvline(2 * p / fit.n_rows, color=pal.ACCENT, lw=0.8, ls="--", label="2p/n")
        ax.axhline(0.0, color=pal.MUTED, lw=0.8)
        ax.set_xlabel("leverage")
        ax.set_ylabel("deleted residual")
        ax.set_title("leverage against deleted residual")
        ax.legend(loc="best", fontsize=8)
    else:
        ax.hist(fit.residuals, bins=min(30, max(5, fit.n_rows // 4)), color=pal.LIGHT)
        ax.set_xlabel("residual")
        ax.set_title("residual histogram")
    if panels == 4:
        r = fit.ridge
        ax = axes[2]
        for j, nm in enumerate(fit.columns):
            ax.plot(r.grid, r.paths[:, j], label=nm, color=pal.series(j))
        ax.axvline(r.penalty, color=pal.ACCENT, ls=":", lw=1)
        ax.set_xscale("log")
        ax.set_xlabel("penalty")
        ax.set_title("coefficient paths")
        ax.legend(fontsize=7, loc="best")
        ax = axes[3]
        ax.plot(r.grid, r.scores, color=pal.INK)
        ax.axvline(r.penalty, color=pal.ACCENT, ls=":", lw=1)
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("penalty")
        ax.set_title(f"{r.criterion.upper()} criterion")
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    plt.close(fig)
    write_bytes(path, buf.getvalue(), force=force, what="chart")


def run(args) -> int:
    from .. import fit_linear
    from ..io.atomic import check_writable, refuse_inputs, write_text
    from ..regression.fitfile import FIT_SCHEMA

    check_writable(args.output, force=args.force, what="fit")
    if args.chart:
        check_writable(args.chart, force=args.force, what="chart")
        if os.path.abspath(args.chart) == os.path.abspath(args.output):
            raise InputError("--chart and -o must be different files")
    if getattr(args, "report", None):
        check_writable(args.report, force=args.force, what="report")
    refuse_inputs({"-o": args.output, "--chart": args.chart, "--report": getattr(args, "report", None)},
                  {"data": args.data})
    if not 0 < args.coverage < 1:
        raise InputError(f"--coverage: must be strictly between 0 and 1 (e.g. 0.95), got {args.coverage}")
    preds, df = _select(_read_table(args.data, args), args)
    x = df[preds]
    y = df[args.response]
    w = df[args.weights] if args.weights else None
    try:
        fit = fit_linear(x, y, intercept=not args.no_intercept, weights=w, ridge=args.ridge,
                         standardize=args.standardize, rank_policy=args.rank_policy)
    except InputError as exc:
        msg = str(exc)
        for tag, col in (("y:", args.response), ("weights:", args.weights)):
            if msg.startswith(tag) and col:
                msg = f"column {col!r}:" + msg[len(tag):]
        msg = msg.replace("rank_policy='nan', 'drop' or 'minimum-norm'", "--rank-policy nan, drop or minimum-norm")
        raise InputError(f"{args.data}: {msg}") from None
    text = _report(fit, args, preds)
    doc = {"schema": FIT_SCHEMA, "data": os.path.basename(args.data), "response": args.response,
           "predictors": preds, "weights": args.weights, "coverage": args.coverage, "fit": fit.to_dict(args.coverage)}
    write_text(args.output, json.dumps(doc, indent=1, allow_nan=False) + "\n", force=args.force, what="fit")
    if args.chart:
        _chart(fit, args.chart, args.force)
    if getattr(args, "report", None):  # --report: one self-contained HTML file (whiten.report)
        from ..report import cli_provenance, regression_report

        regression_report(fit, response=args.response, coverage=args.coverage,
                          provenance=cli_provenance(args, inputs=[args.data])).write(args.report, force=args.force)
    print(text, end="")
    print(f"fit written to {args.output}" + (f", charts to {args.chart}" if args.chart else "")
          + (f", report to {args.report}" if getattr(args, "report", None) else ""))
    return 0
