"""Report for Gaussian log-likelihoods: the total, per-row values, and how well the covariance fits."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .. import _palette as pal
from .._numerics import DIGITS, digits_trusted
from .._settings import current
from ..errors import InputError
from .blocks import CAUTION_CALIBRATION
from .document import Report, format_number
from .provenance import Provenance

__all__ = ["likelihood_report", "likelihood_rows", "calibration_report"]

#: p-value under which a row is counted as "far out" in the key figures
FAR = 1e-3


def likelihood_rows(result: Any, labels: Any = None):
    """Per-row values of a likelihood result as a DataFrame.

    Parameters
    ----------
    result : LikelihoodSummary or RowEvaluation
        From ``whiten.gaussian_loglik(..., return_details=True)`` (one
        covariance, many rows) or :meth:`whiten.Gaussian.evaluate` (rows with
        missing values evaluated on their marginal).
    labels : sequence, optional
        Row labels (default: the result's index, else 0, 1, ...).

    Returns
    -------
    pandas.DataFrame
        Columns ``loglik``, ``d2`` (the quadratic form, squared Mahalanobis
        length), ``dof`` (values it rests on), ``p_value`` (upper tail of
        chi-square(dof) at d2, ``scipy.stats.chi2.sf``).

    Raises
    ------
    InputError
        Not one of the two result types, or labels of the wrong length.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.2], [0.2, 1.0]])
    >>> rows = likelihood_rows(g.evaluate(np.array([[0.5, np.nan], [0.1, -0.3]]), missing="marginalize"))
    >>> rows["dof"].tolist()
    [1, 2]
    """
    import pandas as pd
    from scipy import stats

    if hasattr(result, "logpdf") and hasattr(result, "n_observed"):
        ll = np.atleast_1d(np.asarray(result.logpdf, dtype=float))
        d2 = np.atleast_1d(np.asarray(result.d2, dtype=float))
        dof = np.atleast_1d(np.asarray(result.n_observed)).astype(np.int64)
        index = getattr(result, "index", None)
        pv: np.ndarray = np.full(d2.shape, np.nan)
        ok = dof > 0
        pv[ok] = stats.chi2.sf(d2[ok], dof[ok])
    elif hasattr(result, "loglik") and hasattr(result, "chi2") and hasattr(result, "dof"):
        ll = np.ravel(np.asarray(result.loglik, dtype=float))
        d2 = np.ravel(np.asarray(result.chi2, dtype=float))
        dof = np.full(d2.shape, int(result.dof), dtype=np.int64)
        given = getattr(result, "p_value", None)
        pv = stats.chi2.sf(d2, dof) if given is None else np.ravel(np.asarray(given, dtype=float))
        index = None
    else:
        raise InputError("result: expected whiten.gaussian_loglik(..., return_details=True) or "
                         f"Gaussian.evaluate(...), got {type(result).__name__}")
    if labels is not None:
        index = list(labels)
        if len(index) != ll.size:
            raise InputError(f"labels: expected {ll.size} row labels, got {len(index)}")
    idx = pd.Index(index if index is not None else range(ll.size), name="row")
    return pd.DataFrame({"loglik": ll, "d2": d2, "dof": dof, "p_value": pv}, index=idx)


def _chart(rows):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from scipy import stats

    ok = rows["dof"].to_numpy() > 0
    d2 = rows["d2"].to_numpy(dtype=float)
    dof = rows["dof"].to_numpy()
    fig = Figure(figsize=(10.0, 3.4), dpi=100)
    FigureCanvasAgg(fig)
    ink, dots, line = pal.INK, pal.PLAIN, pal.ACCENT
    ax = fig.add_subplot(1, 2, 1)
    x = np.arange(len(rows))
    ax.plot(x[ok], rows["loglik"].to_numpy(dtype=float)[ok], color=dots, linewidth=0.7, marker="o", markersize=2)
    ax.set_xlabel("row", fontsize=9)
    ax.set_ylabel("log-likelihood", fontsize=9)
    ax.set_title("Log-likelihood per row", loc="left", fontsize=10, color=ink)
    ax = fig.add_subplot(1, 2, 2)
    # each row against the chi-square law of its own degrees of freedom, on the probability scale
    u = np.sort(stats.chi2.cdf(d2[ok], dof[ok]))
    m = u.size
    pos = (np.arange(1, m + 1) - 0.5) / max(m, 1)
    ax.plot([0, 1], [0, 1], color=line, linewidth=1.0)
    ax.scatter(pos, u, s=8, color=dots, edgecolor="none")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("expected probability", fontsize=9)
    ax.set_ylabel("chi-square probability of d2", fontsize=9)
    ax.set_title("Do the distances follow chi-square?", loc="left", fontsize=10, color=ink)
    for a in fig.axes:
        for side in ("top", "right"):
            a.spines[side].set_visible(False)
        a.tick_params(labelsize=8)
        a.grid(True, color=pal.GRID, linewidth=0.7)
    fig.tight_layout()
    return fig


def likelihood_report(result: Any, model: Any = None, *, provenance: Provenance | None = None,
                      title: str | None = None, labels: Any = None, worst: int = 10, max_rows: int = 200,
                      charts: bool = True) -> Report:
    """Build the report of a Gaussian log-likelihood evaluation.

    Parameters
    ----------
    result : LikelihoodSummary or RowEvaluation
        See :func:`likelihood_rows`.
    model : Gaussian, Factor or structured covariance, optional
        Its ``health`` goes into the trust block (a LikelihoodSummary carries
        its own).
    provenance : Provenance, optional
    title : str, optional
    labels : sequence, optional
        Row labels.
    worst : int
        Rows listed as least likely.
    max_rows : int
        Per-row table length; longer results show the first ``max_rows`` and say so.
    charts : bool

    Returns
    -------
    Report

    Raises
    ------
    InputError
        Not a likelihood result, or no row could be evaluated.

    Notes
    -----
    The total is the sum of the per-row log-likelihoods of the rows
    evaluated (rows are independent given the model). ``d2 / dof`` summed over
    rows, divided by the summed dof, is the dispersion ratio: near 1 when the
    covariance describes the scatter, above 1 when it is too small.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> from whiten.report import likelihood_report
    >>> s = np.array([[2.0, 0.3], [0.3, 1.0]]); r = np.array([[0.5, -1.0], [0.1, 0.2]])
    >>> res = whiten.gaussian_loglik(r, s, return_details=True)
    >>> rep = likelihood_report(res, charts=False)
    >>> [f.value for f in rep.figures if f.key == "total"] == [float(np.sum(res.loglik))]
    True
    """
    rows = likelihood_rows(result, labels)
    ok = rows["dof"].to_numpy() > 0
    if not ok.any():
        raise InputError("result: no row could be evaluated (every row had no values)")
    used = rows[ok]
    total = float(np.sum(used["loglik"].to_numpy(dtype=float)))
    n, n_ok = len(rows), int(ok.sum())
    sum_d2 = float(np.sum(used["d2"].to_numpy(dtype=float)))
    sum_dof = int(np.sum(used["dof"].to_numpy()))
    ratio = sum_d2 / sum_dof
    far = int(np.sum(used["p_value"].to_numpy(dtype=float) < FAR))

    rep = Report(title or "Gaussian log-likelihood", job="likelihood",
                 lede=f"{n_ok} of {n} rows evaluated, {sum_dof} values in all.", provenance=provenance)
    rep.key_figure("Total log-likelihood", total, digits=10, key="total", note=f"over {n_ok} rows")
    rep.key_figure("Rows evaluated", n_ok, key="rows", note=f"of {n}" + (f"; {n - n_ok} had no values"
                                                                          if n_ok < n else ""),
                   tone="good" if n_ok == n else "note")
    rep.key_figure("Dispersion ratio", ratio, digits=4, key="dispersion",
                   note="sum of d2 over sum of dof; about 1 when the covariance fits",
                   tone="note" if abs(ratio - 1) > 3 * math.sqrt(2.0 / sum_dof) else "good")
    rep.key_figure(f"Rows with p < {FAR:g}", far, key="far-out", tone="alert" if far else "good",
                   note=f"about {FAR * n_ok:.2g} expected by chance")

    h = getattr(model, "health", None) if model is not None else None
    h = h if h is not None else getattr(result, "health", None)
    if h is not None and hasattr(h, "digits_lost"):
        lost = float(h.digits_lost)
        tone = "alert" if lost > current().digits_warn else ("note" if lost > 6 else "good")
        rc = getattr(h, "rcond_scaled", None)
        cond = "" if rc is None else f"a condition estimate of {format_number(1 / rc if rc > 0 else math.inf, 3)} " \
                                     "after scaling to unit diagonal (LAPACK dpocon), so "
        rep.health("Condition", f"The covariance has {cond}solves may lose about {lost:.1f} of about 16 "
                   f"significant digits; about {float(h.digits_trusted):.1f} can be trusted.", tone)
        dg = getattr(result, "digits", None)
        if dg is not None:
            tr = float(np.nanmin(np.asarray(dg.trusted_loglik, dtype=float)))
            so = float(np.nanmin(np.asarray(dg.solved_loglik, dtype=float)))
            rep.health("Digits of the log-likelihood",
                       f"Sensitivity to the data: at least {tr:.1f} significant digits survive a change of one "
                       f"unit in the last digit of every input; accuracy of the computation: about {so:.1f} "
                       "digits computed right for the data as given (smallest over rows).",
                       "alert" if min(tr, so) < DIGITS - current().digits_warn else "good")
        jit = float(getattr(h, "jitter", 0.0) or 0.0)
        rep.health("Jitter", "None: the covariance factored as given." if jit == 0 else
                   f"{format_number(jit, 3)} was added to the diagonal before factoring; the "
                   "log-likelihoods describe that repaired covariance.", "good" if jit == 0 else "alert")
        method = getattr(h, "method", None)
        if method:
            rep.health("Method", f"Log-determinant and quadratic form from one factorization ({method}); "
                       "no inverse or determinant was formed.", "good")
    elif h is None:
        rep.health("Condition", "Not estimated: a stack of covariances is factored without a condition "
                   "estimate per matrix.", "note")
    partial = int(np.sum(ok & (rows["dof"].to_numpy() < rows["dof"].max())))
    if partial:
        rep.health("Missing values", f"{partial} row{'s were' if partial != 1 else ' was'} evaluated on the "
                   "marginal of the values present.", "note")

    low = used.sort_values(["p_value", "loglik"], ascending=[True, True]).head(int(worst))
    sec = rep.section("Least likely rows", key="least-likely")
    sec.paragraph("Rows ordered by the chance that a row from the model would be at least as far out "
                  "(p-value of d2 under chi-square with the row's degrees of freedom).")
    sec.table(low, f"The {len(low)} least likely rows", key="least-likely",
              formats={"loglik": ".8g", "d2": ".5g", "p_value": ".3g"})
    shown = rows.head(int(max_rows))
    sec = rep.section("Per-row values", key="per-row")
    sec.table(shown, "Log-likelihood, squared distance and degrees of freedom of each row", key="per-row",
              formats={"loglik": ".10g", "d2": ".6g", "p_value": ".3g"},
              note="" if len(shown) == n else f"First {len(shown)} of {n} rows; the CSV output has all of them.")
    if charts:
        rep.section("Charts", key="charts").figure(
            _chart(rows), key="likelihood-charts",
            alt=(f"Two charts: the log-likelihood of each of the {n_ok} rows evaluated in row order, and the "
                 "chi-square probability of each row's squared distance sorted against its expected value, "
                 "with the line of equality."),
            caption="Points along the line on the right mean the covariance describes the scatter; points "
                    "bunched at the top mean it is too small.")
    return rep


def _parameter_table(fit: Any, coverage: float):
    import pandas as pd
    from scipy import stats

    if not (0.0 < float(coverage) < 1.0):
        raise InputError(f"coverage: expected a probability strictly between 0 and 1, got {coverage!r}")
    theta = np.asarray(fit.theta, dtype=float)
    se = np.asarray(fit.std_error, dtype=float)
    tail = 0.5 * (1.0 + float(coverage))
    # a stated (known) error covariance gives normal intervals; a rescaled one, Student t on dof
    q = float(stats.t.ppf(tail, fit.dof)) if fit.rescaled and fit.dof > 0 else float(stats.norm.ppf(tail))
    names = [str(n) for n in (fit.names or [f"theta{k}" for k in range(theta.size)])]
    frame = pd.DataFrame({"estimate": theta, "std error": se, "from": theta - q * se, "to": theta + q * se},
                         index=pd.Index(names, name="parameter"))
    return frame, q


def calibration_report(fit: Any, *, provenance: Provenance | None = None, title: str | None = None,
                       coverage: float = 0.95, charts: bool = True) -> Report:
    """Build the report of a calibration (:func:`whiten.calibrate`).

    Parameters
    ----------
    fit : CalibrationFit
    provenance : Provenance, optional
    title : str, optional
    coverage : float
        Coverage of the intervals in the parameter table.
    charts : bool

    Returns
    -------
    Report

    Raises
    ------
    InputError
        Not a calibration result, or ``coverage`` outside (0, 1).

    Notes
    -----
    Intervals are ``theta -/+ q * std_error`` with ``q`` the normal quantile when
    the error covariance is taken as stated, and the Student t quantile on the
    residual degrees of freedom when ``theta_cov`` was rescaled by the reduced
    chi-square. The chi-square p-value says whether the stated covariance
    describes the residual scatter.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> from whiten.report import calibration_report
    >>> t = np.linspace(0.0, 1.0, 8); y = 1.0 + 2.0 * t + 0.05 * np.sin(9 * t)
    >>> fit = whiten.calibrate(lambda th: th[0] + th[1] * t, [0.0, 0.0], y, np.eye(8) * 0.01)
    >>> rep = calibration_report(fit, charts=False)
    >>> [f.value for f in rep.figures if f.key == "chi2"] == [fit.chi2]
    True
    """
    need = ("theta", "std_error", "chi2", "dof", "p_value", "health", "residuals", "rescaled")
    gone = [a for a in need if not hasattr(fit, a)]
    if gone:
        raise InputError(f"fit: expected the result of whiten.calibrate; it lacks {gone}")
    table, q = _parameter_table(fit, coverage)
    h = fit.health
    rep = Report(title or "Calibration", job="calibration",
                 lede=(f"{table.shape[0]} parameter(s) fitted to {np.size(fit.residuals)} observations by "
                       "Gaussian least squares under the stated error covariance."), provenance=provenance,
                 cautions=[CAUTION_CALIBRATION])
    pv = float(fit.p_value)
    rep.key_figure("Chi-square", float(fit.chi2), digits=6, key="chi2", note=f"on {fit.dof} degrees of freedom")
    rep.key_figure("Goodness-of-fit p-value", pv, digits=3, key="p-value",
                   tone="alert" if pv < 0.001 else ("note" if pv < 0.05 else "good"),
                   note="chance of a chi-square at least this large if the covariance is right")
    rep.key_figure("Reduced chi-square", float(fit.reduced_chi2), digits=4, key="reduced-chi2",
                   note="about 1 when the stated covariance fits")
    se_digits = float(getattr(h, "digits_std_error", math.nan))
    if math.isfinite(se_digits):
        # the statement: digits of the standard errors computed right for the Jacobian as evaluated and the
        # covariance as given (accuracy of the computation; JacobianHealth.digits_std_error)
        rep.key_figure("Digits of the standard errors", se_digits, text=f"{se_digits:.1f}", key="digits",
                       tone="alert" if 15.95 - se_digits > current().digits_warn else "good",
                       note=("computed right for the Jacobian as evaluated and the covariance as given "
                             f"(accuracy of the computation); Jacobian condition number {format_number(h.cond, 3)}"))
    else:
        trusted = digits_trusted(float(h.digits_lost_2norm))
        rep.key_figure("Digits in the parameter covariance", trusted, text=f"{trusted:.1f}", key="digits",
                       tone="alert" if float(h.digits_lost_2norm) > current().digits_warn else "good",
                       note=(f"bound from the Jacobian condition number {format_number(h.cond, 3)} "
                             "(no computed-accuracy statement: rank deficient or rescaled)"))
    rep.key_figure("Converged", bool(fit.converged), key="converged", tone="good" if fit.converged else "alert",
                   note=f"{fit.n_evals} model evaluations" if hasattr(fit, "n_evals") else "")

    rep.health("Jacobian", f"The whitened Jacobian at the solution has condition number "
               f"{format_number(h.cond, 3)}, so the parameter covariance may lose about "
               f"{float(h.digits_lost_2norm):.1f} digits; derivatives: {h.jacobian}.",
               "alert" if float(h.digits_lost_2norm) > current().digits_warn else "good")
    if h.unidentified:
        rep.health("Identifiability", f"Rank {h.rank}: not determined by the data: "
                   f"{', '.join(map(str, h.unidentified))}.", "alert")
    else:
        rep.health("Identifiability", f"Every parameter is determined by the data (rank {h.rank}).", "good")
    cov_h = getattr(h, "covariance", None)
    if cov_h is not None:
        rep.health("Error covariance", f"Factored with about {float(cov_h.digits_trusted):.1f} digits trusted "
                   f"(LAPACK dpocon on the unit-diagonal scaling)"
                   + (f"; jitter {format_number(cov_h.jitter, 3)} was added" if cov_h.jitter else "; no jitter")
                   + ".", "alert" if cov_h.jitter else "good")
    rep.health("Optimizer", f"{'Converged' if fit.converged else 'Did not converge'}: {fit.message}",
               "good" if fit.converged else "alert")
    if fit.rescaled:
        rep.health("Scale", "The parameter covariance was multiplied by the reduced chi-square.", "note")

    sec = rep.section("Parameters", key="parameters")
    law = "Student t" if fit.rescaled and fit.dof > 0 else "normal"
    sec.paragraph(f"Each parameter with its two-sided {100 * float(coverage):g}% interval, estimate minus and plus "
                  f"{q:.4g} standard errors ({law} quantile).")
    sec.table(table, f"Fitted parameters with {100 * float(coverage):g}% intervals", key="parameters",
              formats={"estimate": ".8g", "std error": ".3g", "from": ".8g", "to": ".8g"})
    if charts:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure

        r = np.asarray(fit.residuals, dtype=float)
        fig = Figure(figsize=(8.0, 3.0), dpi=100)
        FigureCanvasAgg(fig)
        ax = fig.add_subplot(1, 1, 1)
        ax.plot(np.arange(r.size), r, color=pal.PLAIN, marker="o", markersize=3, linewidth=0.8)
        ax.axhline(0.0, color=pal.ACCENT, linewidth=1.0)
        ax.set_xlabel("observation", fontsize=9)
        ax.set_ylabel("residual", fontsize=9)
        ax.set_title("Residuals at the solution (observed minus model)", loc="left", fontsize=10)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        ax.grid(True, color=pal.GRID, linewidth=0.7)
        fig.tight_layout()
        rep.section("Residuals", key="residuals").figure(
            fig, key="residual-chart",
            alt=(f"Line chart of the {r.size} residuals in observation order around zero; the largest absolute "
                 f"residual is {format_number(np.max(np.abs(r)), 3)}."),
            caption="A pattern (a curve, a trend) means the model misses something the data show.")
    return rep
