"""The two accuracy statements of a least-squares fit, and refinement in the data as given.

Two different questions, answered separately (definitions in ``docs/numerics.rst``):

* **sensitivity to the data** (``FitHealth.digits_trusted``): how many
  significant digits of the coefficients survive a change of one unit in the
  last digit of every input (``X``, ``y``, the weights or the error
  covariance). This is the first-order componentwise condition of the problem
  actually posed (Skeel, 1979, for linear systems; Björck, 1991, and Arioli,
  Duff & de Rijk, 1989, for least squares), evaluated with the factors the fit
  already has: ``|M| (|A||x| + |b| + |S||v|) + |C| |A|^T |v|`` with
  ``M = R^{-1} Q^T L^{-1}`` (the map from data to coefficients),
  ``C = R^{-1} R^{-T}``, ``v = S^{-1} r`` and ``S`` the error covariance.
* **accuracy of the computation** (``FitHealth.digits_solved``): how many
  digits of the coefficients are right for the data exactly as given, after
  every rounding step (``sqrt(w)`` row scaling, whitening by ``L^{-1}``, the QR,
  refinement). :func:`refine_given` makes this true for WLS and GLS: it refines
  the generalized augmented system ``[S A; A^T 0][v; x] = [b; 0]`` with
  residuals computed in double-double from the user's own ``w`` or ``S``
  (Björck, 1967, 1996 §2.9), using the whitened QR only as the solver of the
  corrections, so the roundings of the whitening do not reach the answer.

Both are relative errors in the max-norm of the coefficients in unit-length
column coordinates (the power-of-two equilibration; independent of units).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .._numerics import EPS
from ..linalg import compensated
from ..linalg.qr import tri_solve
from .design import Design
from .solve import Solution

__all__ = ["refine_given", "data_sensitivity", "whitening_kind"]


def _in_memory(design: Any) -> bool:
    """The rows are at hand (an in-memory :class:`Design`, not a distributed engine's stand-in)."""
    return isinstance(design, Design)


def whitening_kind(design) -> str:
    """``"none"`` (OLS), ``"weights"`` (WLS) or ``"matrix"`` (GLS)."""
    if getattr(design, "factor", None) is not None:
        return "matrix"
    return "weights" if getattr(design, "sqrt_w", None) is not None else "none"


def _two_prod(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``a * b = hi + lo`` exactly (Dekker, 1971), elementwise."""
    hi = a * b
    ah, al = _split(a)
    bh, bl = _split(b)
    lo = al * bl - (((hi - ah * bh) - al * bh) - ah * bl)
    return hi, lo


def _split(a):
    c = 134217729.0 * a
    hi = c - (c - a)
    return hi, a - hi


def refine_given(design: Any, s: np.ndarray, sol: Solution, max_steps: int = 6) -> Solution:
    """Refine a WLS/GLS solution against the user's weights or error covariance exactly as given.

    The residuals ``b - S v - A x`` and ``A^T v`` are formed in double-double
    from the data as given (the weights ``w`` themselves, not ``sqrt(w)``; the
    matrix ``S`` itself, not its factor); the corrections are solved with the
    thin Q and R of the whitened design and the factor ``L`` of ``S``. The
    iteration contracts by about ``kappa * (whitening error)`` per step, so it
    converges whenever the whitened solve had any digits at all. Cost per step:
    O(n p) for weights, O(n^2) for a matrix (the residual with ``S``).
    Returns a new Solution (``sol`` untouched); ``sol`` is returned as it is
    when there is nothing to refine (OLS, minimum-norm, no Q).
    """
    kind = whitening_kind(design)
    if kind == "none" or sol.q is None or sol.var_rows is not None or not sol.cols:
        return sol
    if kind == "matrix" and (design.error_cov is None or design.factor.jitter > 0):
        return sol  # the jittered matrix is the one solved; its effect is stated, not refined away
    if kind == "weights" and design.weights is None:
        return sol
    cols = sol.cols
    a = design.raw_rows(0, design.n)[:, cols] * s[cols][None, :]   # exact: powers of two
    b = design.y
    q, r = sol.q, sol.r
    xs = sol.x.copy()
    if kind == "weights":
        w, sw = design.weights, design.sqrt_w
        var = sol.wresid / sw                      # the raw residual r: r + A x = b, A^T W r = 0
        ops = compensated.ExtendedProducts(a, "compensated")
    else:
        f_ = design.factor
        var = f_.solve_lower(sol.wresid, trans=True)   # v = S^{-1} r: S v + A x = b, A^T v = 0
        ops = compensated.ExtendedProducts(np.hstack([design.error_cov, a]), "compensated")
        opa = compensated.ExtendedProducts(a, "compensated")
    n = design.n
    steps, conv, corr, prev = 0, False, math.nan, math.inf
    for _ in range(max_steps):
        if kind == "weights":
            f = ops.residual(xs, b, var)                       # b - r - A x
            hi, lo = _two_prod(w, var)                         # W r exactly
            g = -(ops.gradient(hi) + a.T @ lo)
            ft = sw * f
        else:
            f = ops.residual(np.concatenate([var, xs]), b, None)   # b - S v - A x
            g = -opa.gradient(var)
            ft = f_.solve_lower(f)
        h = tri_solve(r, g, trans=True)
        d = q.T @ ft
        dx = tri_solve(r, d - h)
        dz = ft - q @ (d - h)
        dv = dz / sw if kind == "weights" else f_.solve_lower(dz, trans=True)
        xs = xs + dx
        var = var + dv
        steps += 1
        xn = float(np.max(np.abs(xs)))
        corr = float(np.max(np.abs(dx))) / xn if xn > 0 else 0.0
        if corr <= 2 * EPS:
            conv = True
            break
        if corr > 0.5 * prev:
            conv = corr < 1e-10
            break
        prev = corr
    if kind == "weights":
        wres = var * design.sqrt_w
    else:
        rr = compensated.residual(a, xs, b, None, "compensated")
        wres = design.factor.solve_lower(rr)
    notes = list(sol.notes) + [f"refined against the {'weights' if kind == 'weights' else 'error covariance'} "
                               f"exactly as given ({steps} steps, double-double residuals)"]
    out = Solution(cols, xs, r, wres, q, sol.steps + steps, conv, corr, "compensated", sol.method + "+given",
                   notes)
    del n
    return out


def data_sensitivity(design: Any, s: np.ndarray, sol: Solution) -> float | None:
    """First-order relative change (max-norm, unit-length columns) of the coefficients per unit of ``eps``.

    Multiply by ``EPS`` for the worst change caused by a relative change of
    ``eps`` in every input. None when the rows are not at hand (distributed
    engines) or for a minimum-norm solution; callers then use the normwise bound.
    Cost O(n p^2) (O(n^2 p) with an error covariance): the p x n map
    ``R^{-1} Q^T L^{-1}`` is formed once for this estimate and not used for anything else.
    """
    if not _in_memory(design) or sol.var_rows is not None or not sol.cols:
        return None
    cols = sol.cols
    kind = whitening_kind(design)
    if sol.q is None and kind != "matrix":
        return _sensitivity_by_blocks(design, s, sol, kind)
    a = design.raw_rows(0, design.n)[:, cols] * s[cols][None, :]
    xs = sol.x
    r = design.y - a @ xs
    if sol.q is not None:
        m = tri_solve(sol.r, sol.q.T)   # inverse-ok: entries only bound the sensitivity (reported, never applied)
        if kind == "weights":
            m = m * design.sqrt_w[None, :]
        elif kind == "matrix":
            m = design.factor.solve_lower(m.T, trans=True).T
    else:
        aw = a if kind == "none" else (a * design.sqrt_w[:, None] ** 2 if kind == "weights"
                                       else design.factor.solve(a))
        m = tri_solve(sol.r, tri_solve(sol.r, aw.T, trans=True))  # inverse-ok: reported bound only
    if kind == "none":
        v = r
        cov_term = 0.0
    elif kind == "weights":
        w = design.weights if design.weights is not None else design.sqrt_w ** 2
        v = w * r
        cov_term = np.abs(r)
    else:
        v = design.factor.solve(r)
        cov_term = np.abs(design.error_cov if design.error_cov is not None else design.factor.matrix()) @ np.abs(v)
    c = tri_solve(sol.r, tri_solve(sol.r, np.eye(len(cols)), trans=True))  # inverse-ok: reported bound only
    absa = np.abs(a)
    if design.intercept and 0 in cols:
        absa[:, cols.index(0)] = 0.0   # the column of ones is not a measured datum
    g = absa @ np.abs(xs) + np.abs(design.y) + cov_term
    t = np.abs(m) @ g + np.abs(c) @ (absa.T @ np.abs(v))
    xn = float(np.max(np.abs(xs)))
    if not xn > 0:
        return math.inf
    return float(np.max(t)) / xn


def _sensitivity_by_blocks(design: Any, s: np.ndarray, sol: Solution, kind: str, rows: int = 32_768) -> float:
    """:func:`data_sensitivity` for the many-row path, one block of rows at a time.

    The same sums as the one-pass formula, gathered per block, so memory stays
    at O(rows * p) as on the rest of that path (the one-pass form held several
    n x p arrays: 1.2 GB at n = 1e6, p = 50).
    """
    cols = sol.cols
    xs = sol.x
    p = len(cols)
    c = tri_solve(sol.r, tri_solve(sol.r, np.eye(p), trans=True))  # inverse-ok: reported bound only
    absx = np.abs(xs)
    icept = cols.index(0) if design.intercept and 0 in cols else None
    near = np.zeros(p)
    at_v = np.zeros(p)
    for a0 in range(0, design.n, rows):
        b0 = min(a0 + rows, design.n)
        a = design.raw_rows(a0, b0)[:, cols] * s[cols][None, :]
        y = design.y[a0:b0]
        r = y - a @ xs
        if kind == "weights":
            w = design.weights[a0:b0] if design.weights is not None else design.sqrt_w[a0:b0] ** 2
            aw = a * w[:, None]
            v = w * r
            cov_term: Any = np.abs(r)
        else:
            aw, v, cov_term = a, r, 0.0
        m = tri_solve(sol.r, tri_solve(sol.r, aw.T, trans=True))  # inverse-ok: reported bound only
        absa = np.abs(a)
        if icept is not None:
            absa[:, icept] = 0.0   # the column of ones is not a measured datum
        near += np.abs(m) @ (absa @ absx + np.abs(y) + cov_term)
        at_v += absa.T @ np.abs(v)
    t = near + np.abs(c) @ at_v
    xn = float(np.max(np.abs(xs)))
    if not xn > 0:
        return math.inf
    return float(np.max(t)) / xn


def sensitivity_digits(rel: float) -> float:
    """Digits from a relative error (capped at the 15.65 of a double; 0 when all are lost)."""
    if not rel > 0:
        return -math.log10(EPS)
    return float(min(-math.log10(EPS), max(0.0, -math.log10(rel))))


def jitter_effect(design, s: np.ndarray, sol: Solution) -> float:
    """Relative change of the coefficients caused by the jitter added to the error covariance (0 if none).

    First order: ``dx = C A^T (S + jI)^{-1} (j v)`` with ``v = (S + jI)^{-1} r``.
    """
    f_ = getattr(design, "factor", None)
    if f_ is None or not f_.jitter > 0 or not _in_memory(design) or not sol.cols:
        return 0.0
    cols = sol.cols
    a = design.raw_rows(0, design.n)[:, cols] * s[cols][None, :]
    r = design.y - a @ sol.x
    v = f_.solve(r)
    dx = tri_solve(sol.r, tri_solve(sol.r, a.T @ f_.solve(f_.jitter * v), trans=True))
    xn = float(np.max(np.abs(sol.x)))
    return float(np.max(np.abs(dx))) / xn if xn > 0 else math.inf


class Statements:
    """The two statements of one fit (plain record used by :func:`whiten.regression.inference.assemble`)."""

    def __init__(self, error_bound, solve_error, error_cov, cond_fit):
        self.error_bound = float(error_bound)
        self.solve_error = float(solve_error)
        self.error_cov = error_cov
        self.cond_fit = float(cond_fit)
        self.digits_data = sensitivity_digits(self.error_bound)
        self.digits_computed = sensitivity_digits(self.solve_error)


def _cov_health(design: Any, sol, s):
    from .results import ErrorCovHealth

    kind = whitening_kind(design)
    if kind == "none":
        return None
    if kind == "weights":
        raw = math.nan
        if _in_memory(design):
            w = design.weights if design.weights is not None else design.sqrt_w ** 2
            raw = float(np.max(w) / np.min(w))
        return ErrorCovHealth("weights", 1.0, raw, 0.0, 0.0, 0.0)
    h = design.factor.health
    cond = 1.0 / h.rcond_scaled if h.rcond_scaled > 0 else math.inf
    raw = 1.0 / h.rcond if h.rcond > 0 else math.inf
    return ErrorCovHealth("matrix", cond, raw, float(h.digits_lost), float(h.jitter), jitter_effect(design, s, sol))


def statements(design, sol: Solution, s: np.ndarray, cond_fit: float, tan_t: float) -> Statements:
    """Sensitivity to the data (a) and accuracy of the computation (b) for a solved fit."""
    rel = data_sensitivity(design, s, sol)
    bound = EPS * rel if rel is not None else EPS * (cond_fit + cond_fit ** 2 * tan_t)
    cov = _cov_health(design, sol, s)
    kind = whitening_kind(design)
    if sol.steps > 0:
        lc = sol.last_corr if math.isfinite(sol.last_corr) else 1.0
        err = EPS if (sol.converged and lc <= 2 * EPS) else max(lc, EPS)
    else:
        err = bound
    given = sol.method.endswith("+given")
    if kind == "weights" and not given and sol.steps > 0:
        err += bound           # sqrt(w) and the products: at most eps per whitened entry
    if kind == "matrix" and not given:
        err += bound * math.sqrt(cov.condition)   # L^{-1} A: forward error grows with cond(L)
    if cov is not None:
        err += cov.jitter_effect
    return Statements(bound, err, cov, cond_fit)


def _digits(rel) -> np.ndarray:
    rel = np.asarray(rel, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        d = -np.log10(np.where(rel > 0, rel, EPS))
    return np.clip(np.where(np.isnan(rel), 0.0, d), 0.0, -math.log10(EPS))


def _min_digits(rel) -> float:
    d = _digits(rel)
    return float(np.min(d)) if d.size else math.nan


def derived_digits(st: Statements, design, sol: Solution, s, beta, se, tv, pv, dof, rss, ll, n) -> dict:
    """Correct digits of standard errors, t, p, intervals, VIFs and log-likelihood (estimates, see docs)."""
    from scipy import stats

    kind = whitening_kind(design)
    wf = {"none": 0.0, "weights": 1.0}.get(kind, math.sqrt(st.error_cov.condition) if st.error_cov else 1.0)
    # diag of R^{-1} R^{-T}: relative error <= 2 eps kappa per unit of backward error in R (plus whitening)
    se_rel = EPS * st.cond_fit * (1.0 + wf) + st.solve_error
    xs = np.abs(sol.x)
    xn = float(np.max(xs)) if xs.size else 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        coef_rel = st.solve_error * xn / xs
        t_rel = coef_rel + se_rel
        at = np.abs(np.asarray(tv, dtype=float))
        if dof > 0:
            ratio = np.exp(stats.t.logpdf(at, dof) - stats.t.logsf(at, dof))
            p_rel = at * ratio * t_rel + 10 * EPS
        else:
            p_rel = np.full_like(at, np.nan)
        q = float(stats.t.ppf(0.975, dof)) if dof > 0 else math.nan
        abs_err = st.solve_error * xn * s[sol.cols] + q * np.asarray(se) * se_rel
        ends = np.minimum(np.abs(beta - q * se), np.abs(beta + q * se))
        ci_rel = abs_err / ends
    p = len(sol.cols)
    rho = math.sqrt(rss) if rss > 0 else 0.0
    rss_rel = (2 * p * st.solve_error * xn / rho if rho > 0 else math.inf) + 2 * n * EPS
    ll_abs = 0.5 * n * rss_rel + (n * EPS * wf if kind != "none" else 0.0)
    ll_rel = ll_abs / abs(ll) if ll and math.isfinite(ll) else math.nan
    return {
        "digits_stderr": _min_digits(se_rel * np.ones(max(p, 1))) if p else math.nan,
        "digits_tvalues": _min_digits(t_rel) if p and dof > 0 else math.nan,
        "digits_pvalues": _min_digits(p_rel) if p and dof > 0 else math.nan,
        "digits_conf_int": _min_digits(ci_rel) if p and dof > 0 else math.nan,
        "digits_vif": _min_digits(2 * se_rel * np.ones(1)) if design.intercept and p > 1 else math.nan,
        "digits_loglik": float(_digits(ll_rel)) if math.isfinite(ll_rel) else math.nan,
    }
