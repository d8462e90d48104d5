"""Report for a regression fit: coefficients with intervals, residual charts, health, collinearity."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .. import _palette as pal
from .._settings import current
from ..errors import InputError
from .blocks import CAUTION_REGRESSION
from .document import Report, format_number
from .provenance import Provenance

__all__ = ["regression_report", "coefficient_table"]

_EPS_DIGITS = 15.95


def _check_fit(fit: Any) -> None:
    need = ("names", "coef", "std_error", "coef_interval", "health", "fitted", "residuals", "n_rows")
    gone = [a for a in need if not hasattr(fit, a)]
    if gone:
        raise InputError(f"fit: expected the result of whiten.fit_linear; it lacks {gone}")


def coefficient_table(fit: Any, coverage: float = 0.95):
    """Coefficients with their intervals, one row per coefficient, as a DataFrame.

    Columns: ``estimate``, ``from`` and ``to`` (the two-sided interval at
    ``coverage``), ``std error``, ``VIF`` (NaN for the intercept), ``note``
    (``set aside`` for a column not fitted because it depends on others).

    Raises
    ------
    InputError
        Not a fit, or ``coverage`` outside (0, 1).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> t = np.linspace(0.0, 1.0, 9)
    >>> tab = coefficient_table(whiten.fit_linear(t[:, None], 1.0 + t + 0.01 * np.cos(30 * t)))
    >>> bool((tab["from"] < tab["estimate"]).all() and (tab["estimate"] < tab["to"]).all())
    True
    """
    import pandas as pd

    _check_fit(fit)
    ci = np.asarray(fit.coef_interval(coverage), dtype=float)
    vif = np.full(len(fit.names), np.nan)
    pos = {n: i for i, n in enumerate(getattr(fit, "columns", ()))}
    fv = np.asarray(getattr(fit, "vif", np.full(len(pos), np.nan)), dtype=float)
    for i, n in enumerate(fit.names):
        if n in pos and pos[n] < fv.size:
            vif[i] = fv[pos[n]]
    coef = np.asarray(fit.coef, dtype=float)
    note = ["set aside: depends on earlier columns" if math.isnan(c) else "" for c in coef]
    return pd.DataFrame({"estimate": coef, "from": ci[:, 0], "to": ci[:, 1],
                         "std error": np.asarray(fit.std_error, dtype=float), "VIF": vif, "note": note},
                        index=pd.Index([str(n) for n in fit.names], name="coefficient"))


def _residual_figure(fit: Any):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from scipy import stats

    fitted = np.asarray(fit.fitted, dtype=float)
    resid = np.asarray(fit.residuals, dtype=float)
    n = resid.size
    fig = Figure(figsize=(10.5, 3.4), dpi=100)
    FigureCanvasAgg(fig)
    ink, dots, zero = pal.INK, pal.PLAIN, pal.ACCENT
    axes = [fig.add_subplot(1, 3, k + 1) for k in range(3)]
    for ax in axes:
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        ax.tick_params(labelsize=8, colors=ink)
        ax.grid(True, color=pal.GRID, linewidth=0.7)
        ax.set_axisbelow(True)
    size = 10 if n <= 2000 else 3
    axes[0].scatter(fitted, resid, s=size, color=dots, edgecolor="none")
    axes[0].axhline(0.0, color=zero, linewidth=1.0)
    axes[0].set_xlabel("fitted value", fontsize=9)
    axes[0].set_ylabel("residual", fontsize=9)
    axes[0].set_title("Residual against fitted", loc="left", fontsize=10)
    axes[1].plot(np.arange(n), resid, color=dots, linewidth=0.6, marker="o", markersize=2)
    axes[1].axhline(0.0, color=zero, linewidth=1.0)
    axes[1].set_xlabel("row", fontsize=9)
    axes[1].set_title("Residual in row order", loc="left", fontsize=10)
    sd = float(getattr(fit, "residual_sd", np.nan))
    z = np.sort(resid / sd) if sd > 0 and math.isfinite(sd) else np.sort(resid)
    q = stats.norm.ppf((np.arange(1, n + 1) - 0.5) / n)
    axes[2].scatter(q, z, s=size, color=dots, edgecolor="none")
    lim = [min(q[0], z[0]), max(q[-1], z[-1])]
    axes[2].plot(lim, lim, color=zero, linewidth=1.0)
    axes[2].set_xlabel("normal quantile", fontsize=9)
    axes[2].set_ylabel("residual / residual sd", fontsize=9)
    axes[2].set_title("Are the residuals Gaussian?", loc="left", fontsize=10)
    fig.tight_layout()
    return fig


def _ridge_figure(fit: Any):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    r = fit.ridge
    fig = Figure(figsize=(9.0, 3.4), dpi=100)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 2, 1)
    for j, nm in enumerate(fit.columns):
        ax.plot(r.grid, r.paths[:, j], label=str(nm), linewidth=1.1, color=pal.series(j))
    ax.axvline(r.penalty, color=pal.ACCENT, linestyle=":")
    ax.set_xscale("log")
    ax.set_xlabel("penalty", fontsize=9)
    ax.set_title("Coefficients along the penalty grid", loc="left", fontsize=10)
    ax.legend(fontsize=7, frameon=False)
    ax = fig.add_subplot(1, 2, 2)
    ax.plot(r.grid, r.scores, color=pal.INK)
    ax.axvline(r.penalty, color=pal.ACCENT, linestyle=":")
    ax.set_xscale("log")
    ax.set_xlabel("penalty", fontsize=9)
    ax.set_title(f"Criterion ({r.criterion})", loc="left", fontsize=10)
    fig.tight_layout()
    return fig


def _health(rep: Report, fit: Any) -> None:
    h = fit.health
    trusted = float(h.digits_trusted)
    lost = _EPS_DIGITS - trusted
    tone = "alert" if lost > current().digits_warn else ("note" if trusted < 8 else "good")
    rep.health("Condition", f"The design, with its columns scaled to unit length, has condition number "
               f"{format_number(h.condition, 3)} ({format_number(h.condition_raw, 3)} as given; "
               f"{format_number(h.condition_fitted, 3)} for the columns fitted).", tone)
    solved = getattr(h, "digits_solved", None)
    words = (f"Sensitivity to the data: about {trusted:.1f} significant digits of the coefficients survive a "
             "change of one unit in the last digit of every input (a first-order worst case)")
    if solved is not None:
        words += (f". Accuracy of the computation: for the data exactly as given, about {float(solved):.1f} "
                  "digits were computed right, every rounding step included")
    cov = getattr(h, "error_cov", None)
    if cov is not None and cov.kind == "matrix":
        words += (f". The error covariance loses about {cov.digits_lost:.1f} digits (scaled condition "
                  f"{format_number(cov.condition, 3)}" + (f", jitter {format_number(cov.jitter, 3)}" if cov.jitter
                                                          else "") + ")")
    rep.health("Digits you can trust", words + ".", tone)
    if h.refinement_steps:
        ref = (f"{h.refinement_steps} step(s) of iterative refinement with {h.residual_arithmetic} residuals, "
               + ("converged" if h.refinement_converged else "stopped before converging")
               + f" (last correction {format_number(h.last_correction, 2)})")
    else:
        ref = "no iterative refinement"
    rep.health("Solve", f"Route {h.method}; {ref}.", "good" if h.refinement_converged or not h.refinement_steps
               else "note")
    weighted = getattr(fit, "weighted", "none")
    if weighted and weighted != "none":
        rep.health("Weights", {"wls": "Weighted least squares: rows whitened by the square roots of the weights.",
                               "gls": "Generalised least squares: rows whitened by the Cholesky factor of the "
                                      "error covariance."}.get(weighted, f"Weighting {weighted}."), "plain")
    if h.set_aside:
        rep.health("Rank", f"Rank {h.rank} of {h.n_columns} columns: set aside "
                   f"{', '.join(map(str, h.set_aside))}. " + " ".join(map(str, h.dependencies)), "alert")
    else:
        rep.health("Rank", f"Full rank: all {h.n_columns} columns were fitted.", "good")
    for note in h.notes:
        rep.health("Note", str(note), "note")
    r = getattr(fit, "ridge", None)
    if r is not None:
        words = (f"Ridge penalty {format_number(r.penalty, 4)} ({r.criterion}"
                 + (", on standardized predictors" if r.standardized else "") + f"), effective degrees of "
                 f"freedom {format_number(r.effective_dof, 4)}.")
        if r.at_edge:
            words += " The chosen penalty is at the edge of the grid: widen the grid before relying on it."
        rep.health("Ridge", words, "note" if r.at_edge else "plain")


def regression_report(fit: Any, *, provenance: Provenance | None = None, title: str | None = None,
                      response: str | None = None, coverage: float = 0.95, charts: bool = True) -> Report:
    """Build the report of a regression fit.

    Parameters
    ----------
    fit : LinearFit
        Result of :func:`whiten.fit_linear`.
    provenance : Provenance, optional
    title : str, optional
    response : str, optional
        Name of the response, used in the title and the lede.
    coverage : float
        Coverage of the intervals in the coefficient table.
    charts : bool
        Draw the residual charts (and, for ridge by a criterion, the paths).

    Returns
    -------
    Report

    Raises
    ------
    InputError
        Not a fit, or ``coverage`` outside (0, 1).

    Notes
    -----
    Key figures: rows, share of variation explained, residual sd, digits of
    the coefficients that can be trusted, the scaled condition number, and the
    columns set aside. Intervals are ``coef -/+ t * std_error`` from
    :meth:`LinearFit.coef_interval`; no figure is recomputed here.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> from whiten.report import regression_report
    >>> t = np.linspace(0.0, 1.0, 12)
    >>> fit = whiten.fit_linear(t[:, None], 2.0 + 0.5 * t + 0.01 * np.sin(40 * t))
    >>> rep = regression_report(fit, charts=False)
    >>> [f.value for f in rep.figures if f.key == "rows"] == [12]
    True
    """
    _check_fit(fit)
    table = coefficient_table(fit, coverage)
    h = fit.health
    pct = f"{100 * float(coverage):g}%"
    what = response or "the response"
    kind = {"none": "least squares", "wls": "weighted least squares",
            "gls": "generalised least squares"}.get(getattr(fit, "weighted", "none"), "least squares")
    if getattr(fit, "ridge", None) is not None:
        kind = "ridge regression"
    n_pred = len(getattr(fit, "columns", ())) or len(fit.names)
    rep = Report(title or f"Regression of {what}", job="regression",
                 lede=f"{what} explained by {n_pred} predictor(s) over {fit.n_rows} rows, by {kind}.",
                 provenance=provenance, cautions=[CAUTION_REGRESSION])
    trusted = float(h.digits_trusted)
    tone = "alert" if _EPS_DIGITS - trusted > current().digits_warn else ("note" if trusted < 8 else "good")
    rep.key_figure("Rows", int(fit.n_rows), key="rows")
    r2 = float(getattr(fit, "r_squared", np.nan))
    rep.key_figure("Variation explained", r2, text=f"{100 * r2:.4g}%", key="r-squared",
                   note=f"adjusted {100 * float(getattr(fit, 'adj_r_squared', np.nan)):.4g}%")
    rep.key_figure("Residual sd", float(fit.residual_sd), key="residual-sd",
                   note=f"on {format_number(fit.dof, 4)} degrees of freedom")
    solved = float(getattr(h, "digits_solved", trusted))
    rep.key_figure("Digits computed right", solved, text=f"{solved:.1f}", key="digits-computed",
                   tone="alert" if _EPS_DIGITS - solved > current().digits_warn else ("note" if solved < 8 else "good"),
                   note="significant digits of the coefficients for the data exactly as given")
    rep.key_figure("Digits that survive the data's last digit", trusted, text=f"{trusted:.1f}", key="digits",
                   tone=tone, note="sensitivity: one unit changed in the last digit of every input")
    rep.key_figure("Condition number", float(h.condition), digits=3, key="condition",
                   note="columns scaled to unit length", tone=tone)
    if h.set_aside:
        rep.key_figure("Columns set aside", len(h.set_aside), key="set-aside", tone="alert",
                       note=", ".join(map(str, h.set_aside)))
    _health(rep, fit)

    sec = rep.section("Coefficients", key="coefficients")
    sec.paragraph(f"Each coefficient with its two-sided {pct} interval (estimate minus and plus the t quantile "
                  "times the standard error). The VIF says how much collinearity with the other predictors "
                  "inflates a coefficient's variance; 1 means none.")
    sec.table(table, f"Coefficients of {what} with {pct} intervals", key="coefficients",
              formats={"estimate": ".6g", "from": ".6g", "to": ".6g", "std error": ".3g", "VIF": ".3g"})

    col = getattr(fit, "collinearity", None)
    sec = rep.section("Collinearity", key="collinearity")
    sentences = list(getattr(col, "sentences", ()) or ())
    if sentences:
        sec.bullets(sentences)
    else:
        sec.paragraph("No near-dependence among the columns: every condition index is at most 30 "
                      "(the threshold of Belsley, Kuh & Welsch, 1980).")
    groups = list(getattr(col, "groups", ()) or ())
    if groups and col is not None:  # non-empty groups can only have come from col
        import pandas as pd

        frame = pd.DataFrame({"condition index": [float(v) for v in col.group_indices],
                              "columns involved": [", ".join(map(str, g)) for g in groups]},
                             index=pd.Index(range(1, len(groups) + 1), name="direction"))
        sec.table(frame, "Nearly dependent groups of columns (condition index above 30, variance share "
                  "above one half)", key="collinear-groups", formats={"condition index": ".3g"})

    if charts:
        sec = rep.section("Residual charts", key="residuals")
        resid = np.asarray(fit.residuals, dtype=float)
        sec.figure(_residual_figure(fit),
                   alt=(f"Three charts of the {resid.size} residuals: against the fitted values, in row order, "
                        "and sorted against normal quantiles with the line of equality; the largest absolute "
                        f"residual is {format_number(np.max(np.abs(resid)), 3)}."),
                   caption="Residuals should scatter evenly around zero with no pattern, and follow the line "
                           "in the right-hand chart when the errors are Gaussian.", key="residual-charts")
        r = getattr(fit, "ridge", None)
        if r is not None and getattr(r, "grid", None) is not None and getattr(r, "paths", None) is not None:
            sec.figure(_ridge_figure(fit), alt=("Coefficient paths over the grid of ridge penalties and the "
                                                f"criterion curve, with the chosen penalty "
                                                f"{format_number(r.penalty, 3)} marked."),
                       caption="How the coefficients shrink as the penalty grows.", key="ridge-paths")
    return rep
