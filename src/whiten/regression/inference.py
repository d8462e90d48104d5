"""Inference from a solved fit: standard errors, t and F tests, VIF, log-likelihood, fitted values.

:func:`assemble` turns a :class:`~whiten.regression.solve.Solution` into a
:class:`~whiten.LinearFit`: coefficients and standard errors in original units
(triangular solves with R, no covariance matrix), the explained sum of squares
from ``R x = Q^T b`` (no cancellation against the total), condition numbers,
Belsley diagnostics, the first-order error bound ``eps * (k + k^2 tan theta)``
(Wedin, 1973) and the warnings. Shared by the in-memory fit and the dask engine.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from .._numerics import column_norms
from .._settings import current
from .._warn import warn
from ..errors import ConditioningWarning, InputError, RankDeficiencyWarning
from ..linalg.qr import condition_2, qr_r, tri_solve
from . import accuracy
from .design import Design
from .diagnostics import collinearity_report, describe_dependence, vif_from_r
from .results import FitHealth, LinearFit
from .solve import Solution

__all__ = ["assemble", "scaled_condition", "read_only", "fitted_values", "gaussian_loglik"]


def assemble(design: Design, sol: Solution, s, r_full, aside, tol, policy, *, rss: float | None = None,
              vectors: tuple | None = None) -> LinearFit:
    """The :class:`LinearFit` of a solved problem (warns about set-aside columns and lost digits)."""
    # rss / vectors: given by engines whose residuals stay distributed (whiten.parallel.dask),
    # where ``vectors`` = (fitted, residuals) are lazy arrays that must not be pulled in here
    n, p = design.n, design.p
    names = design.all_names
    dep_sentences = []
    exact = []
    dep_support: set[int] = set()
    for j in aside:
        # all kept columns: for an exact dependence on earlier columns the later ones get
        # (numerically) zero weight; for a spread-out one (the SVD route) they take part
        support = [k for k in range(p) if k not in aside]
        sentence, used, _ = describe_dependence(r_full, s, j, support, names)
        dep_sentences.append(sentence)
        exact.append((tuple(list(used) + [names[j]]), sentence))
        dep_support |= {names.index(u) for u in used}
    if aside:
        set_names = [names[j] for j in aside]
        if policy == "raise":
            raise InputError(
                f"X: the design is rank deficient (rank {p - len(aside)} of {p} columns): "
                + "; ".join(dep_sentences)
                + ". Remove the dependent column(s), or choose rank_policy='nan', 'drop' or 'minimum-norm'")
        action = {"nan": "their coefficients are reported as NaN",
                  "drop": "they are left out of the results",
                  "minimum-norm": "the minimum-norm solution over all columns is reported"}[policy]
        warn(RankDeficiencyWarning,
             f"design has rank {p - len(aside)} of {p} columns (tolerance {tol:.2g} relative to the largest "
             f"|r_ii|): {', '.join(repr(x) for x in set_names)} set aside as linear combinations of the columns kept; "
             f"{action}. " + "; ".join(dep_sentences))
    rank = len(sol.cols) if sol.var_rows is None else sol.var_rows.shape[0]
    dof = n - rank
    rss = float(sol.wresid @ sol.wresid) if rss is None else float(rss)
    sigma = math.sqrt(rss / dof) if dof > 0 else math.nan
    # coefficients and standard errors in original units
    sc = s[sol.cols]
    beta = sol.x * sc
    if sol.var_rows is not None:
        var_s = np.einsum("ij,ij->j", sol.var_rows, sol.var_rows)
        fit_r_for_pred = None
    else:
        w = tri_solve(sol.r, np.eye(len(sol.cols)), trans=True)  # inverse-ok: squared row norms are reported variances
        var_s = np.einsum("ij,ij->j", w, w)
        fit_r_for_pred = sol.r
    se = sigma * np.sqrt(var_s) * sc
    # explained sum of squares from R x = Q^T b (no cancellation against the total)
    rx = sol.r @ sol.x if sol.var_rows is None else None
    if design.intercept:
        if rx is not None:
            ess = float(rx[1:] @ rx[1:])
        else:
            ess = _ess_minimum_norm(design, sol, s)
    else:
        ess = float(rx @ rx) if rx is not None else _ess_minimum_norm(design, sol, s)
    tss = ess + rss
    r2 = ess / tss if tss > 0 else math.nan
    k_const = int(design.intercept)
    adj = 1 - (1 - r2) * (n - k_const) / dof if dof > 0 else math.nan
    dof_model = rank - k_const
    with np.errstate(divide="ignore", invalid="ignore"):
        if dof_model > 0 and dof > 0:
            fstat = (ess / dof_model) / (rss / dof) if rss > 0 else math.inf
            fp = float(stats.f.sf(fstat, dof_model, dof)) if math.isfinite(fstat) else 0.0
        else:
            fstat, fp = math.nan, math.nan
        tv = beta / se
        pv = 2 * stats.t.sf(np.abs(tv), dof) if dof > 0 else np.full_like(tv, np.nan)
    ll = gaussian_loglik(design, rss, n)
    aic = -2 * ll + 2 * rank
    bic = -2 * ll + math.log(n) * rank
    # full-length vectors in the user's order
    coef = np.full(p, np.nan)
    stderr = np.full(p, np.nan)
    tvals = np.full(p, np.nan)
    pvals = np.full(p, np.nan)
    coef[sol.cols] = beta
    stderr[sol.cols] = se
    tvals[sol.cols] = tv
    pvals[sol.cols] = pv
    out_names = list(names)
    if policy == "drop" and aside:
        keep = [j for j in range(p) if j not in aside]
        coef, stderr, tvals, pvals = coef[keep], stderr[keep], tvals[keep], pvals[keep]
        out_names = [names[j] for j in keep]
    # fitted / residuals in y units (from the accurate whitened residuals when rows are only weighted)
    if vectors is not None:
        fitted, resid = vectors
    elif design.factor is not None or sol.var_rows is not None:
        fitted = fitted_values(design, sol.cols, beta)
        resid = design.y - fitted
    else:
        resid = sol.wresid / design.sqrt_w if design.sqrt_w is not None else sol.wresid.copy()
        fitted = design.y - resid
    # collinearity and condition numbers
    coll = collinearity_report(r_full, names, exact_tol=tol, exact=exact)
    cond = float(coll.condition_indices[-1]) if coll.condition_indices.size else 1.0
    cond_raw = condition_2(r_full / s[None, :])
    if sol.var_rows is None:
        cond_fit = scaled_condition(sol.r)
    else:
        kept = [j for j in range(p) if j not in aside]
        cond_fit = scaled_condition(qr_r(r_full[:, kept])[: len(kept), : len(kept)])
    vif = _vif(design, sol, r_full, aside, dep_support)
    # (a) sensitivity to the data; (b) accuracy of the computation (see whiten.regression.accuracy)
    axn = math.sqrt(ess + (float(rx[0] ** 2) if (design.intercept and rx is not None) else 0.0))
    tan_t = math.sqrt(rss) / axn if axn > 0 else math.inf
    st = accuracy.statements(design, sol, s, cond_fit, tan_t)
    bound, digits, solved = st.error_bound, st.digits_data, st.digits_computed
    more = accuracy.derived_digits(st, design, sol, s, beta, se, tv, pv, dof, rss, ll, n)
    health = FitHealth(
        method=sol.method, condition=cond, condition_raw=cond_raw, condition_fitted=cond_fit,
        error_bound=bound, digits_trusted=digits, digits_solved=solved, refinement_steps=sol.steps,
        refinement_converged=bool(sol.converged), last_correction=sol.last_corr,
        residual_arithmetic=sol.arithmetic, rank=rank, n_columns=p, rank_tol=tol,
        set_aside=tuple(names[j] for j in aside), dependencies=tuple(dep_sentences), notes=tuple(sol.notes),
        solve_error=st.solve_error, error_cov=st.error_cov, **more)
    opts = current()
    if 15.95 - min(digits, solved) > opts.digits_warn:
        cov_words = ""
        if st.error_cov is not None and st.error_cov.kind == "matrix":
            cov_words = (f" The error covariance itself loses about {st.error_cov.digits_lost:.1f} digits "
                         f"(scaled condition {st.error_cov.condition:.3g}"
                         + (f", jitter {st.error_cov.jitter:.3g}" if st.error_cov.jitter > 0 else "") + ").")
        warn(ConditioningWarning,
             f"only about {digits:.1f} significant digits of the coefficients survive a change of one unit in "
             f"the last digit of the data (sensitivity bound {bound:.2g}; scaled condition number "
             f"{cond_fit:.3g}); for the data exactly as given about {solved:.1f} digits were computed right "
             f"({sol.steps} refinement steps).{cov_words} "
             + (" ".join(s.rstrip(".") + "." for s in coll.sentences) + " " if coll.sentences else "")
             + "Consider removing near-duplicate columns, centring polynomial terms, or ridge=...")
    weighted = "gls" if design.factor is not None else ("wls" if design.sqrt_w is not None else "none")
    return LinearFit(
        names=tuple(out_names), coef=read_only(coef), std_error=read_only(stderr), t_stat=read_only(tvals),
        p_value=read_only(pvals),
        residual_sd=sigma, r_squared=r2, adj_r_squared=adj, f_statistic=float(fstat), f_p_value=float(fp),
        loglik=ll, aic=aic, bic=bic, n_rows=n, dof=dof, dof_model=dof_model, rank=rank, vif=read_only(vif),
        collinearity=coll, fitted=fitted if vectors is not None else read_only(fitted),
        residuals=resid if vectors is not None else read_only(resid), health=health,
        intercept=design.intercept, columns=tuple(design.names), weighted=weighted,
        _r=fit_r_for_pred, _scale=sc, _fit_cols=tuple(sol.cols), _q=sol.q, _wresid=sol.wresid,
        _design=design)


def scaled_condition(r: np.ndarray) -> float:
    """2-norm condition number of ``r`` with its columns scaled to unit length (Belsley's convention)."""
    norms = column_norms(r)
    return condition_2(r / np.where(norms > 0, norms, 1.0)[None, :])


def read_only(a: np.ndarray) -> np.ndarray:
    """``a`` as a float64 array that cannot be written (results are immutable)."""
    a = np.asarray(a, dtype=np.float64)
    a.setflags(write=False)
    return a


def fitted_values(design: Design, cols, beta) -> np.ndarray:
    """``X[:, cols] @ beta`` in the units of y, block by block."""
    out = np.empty(design.n)
    rows = max(int(current().block_rows), 1)
    for a in range(0, design.n, rows):
        b = min(a + rows, design.n)
        out[a:b] = design.raw_rows(a, b)[:, cols] @ beta
    return out


def _ess_minimum_norm(design: Design, sol: Solution, s) -> float:
    a, b = design.whitened()
    fw = (a * s[None, :]) @ sol.x
    if design.intercept:
        w1 = a[:, 0]
        m = float(w1 @ fw) / float(w1 @ w1)
        d = fw - m * w1
        return float(d @ d)
    return float(fw @ fw)


def gaussian_loglik(design: Design, rss: float, n: int) -> float:
    """Gaussian log-likelihood at the maximum-likelihood error variance ``rss / n`` (weights' term included)."""
    if rss <= 0:
        return math.inf
    ll = -0.5 * n * (math.log(2 * math.pi * rss / n) + 1.0)
    if design.sqrt_w is not None:
        ll += design.sum_log_sqrt_w  # 0.5 * sum(log w)
    elif design.factor is not None:
        ll -= 0.5 * design.factor.logdet()
    return ll


def _vif(design: Design, sol: Solution, r_full, aside, dep_support) -> np.ndarray:
    k = len(design.names)
    out = np.full(k, np.nan)
    if not design.intercept or k == 0:
        return out
    if k == 1:
        out[:] = 1.0 if not aside else np.inf
        return out
    affected = set(aside) | {j for j in dep_support if j > 0}
    cols = sol.cols if sol.var_rows is None else [j for j in range(design.p) if j not in aside]
    pred_cols = [c for c in cols if c > 0]
    if pred_cols and sol.var_rows is None:
        v = vif_from_r(sol.r, len(pred_cols))
    elif pred_cols:
        rr = qr_r(r_full[:, cols])[: len(cols), : len(cols)]
        v = vif_from_r(rr, len(pred_cols))
    else:
        v = np.array([])
    for c, val in zip(pred_cols, v):
        out[c - 1] = val
    for j in affected:
        if j > 0:
            out[j - 1] = np.inf
    return out
