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
from .solve import Solution, refinement_verdict

__all__ = ["refine_given", "data_sensitivity", "whitening_kind", "sensitivity_sums"]


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
        corr, stop, conv = refinement_verdict(xs, dx, prev)
        if stop:
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
    if not _in_memory(design):
        gathered = getattr(design, "sensitivity", None)  # an engine that summed the blocks where they lie
        return None if gathered is None or sol.var_rows is not None else float(gathered)
    if sol.var_rows is not None or not sol.cols:
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
    icept = cols.index(0) if design.intercept and 0 in cols else None
    near = np.zeros(p)
    at_v = np.zeros(p)
    for a0 in range(0, design.n, rows):
        b0 = min(a0 + rows, design.n)
        a = design.raw_rows(a0, b0)[:, cols] * s[cols][None, :]
        w = None
        if kind == "weights":
            w = design.weights[a0:b0] if design.weights is not None else design.sqrt_w[a0:b0] ** 2
        dn, dv = sensitivity_sums(a, design.y[a0:b0], w, xs, sol.r, icept)
        near += dn
        at_v += dv
    t = near + np.abs(c) @ at_v
    xn = float(np.max(np.abs(xs)))
    if not xn > 0:
        return math.inf
    return float(np.max(t)) / xn


def sensitivity_sums(a: np.ndarray, y: np.ndarray, w: np.ndarray | None, xs: np.ndarray, r: np.ndarray,
                     icept: int | None) -> tuple[np.ndarray, np.ndarray]:
    """One block's share ``(|M| (|A||x| + |y| + |r|_w), |A|^T |v|)`` of the sensitivity sums (they add over
    blocks): ``a`` the fitted columns scaled, ``w`` weights or None, ``r`` the fit's R. Shared with dask."""
    res = y - a @ xs
    if w is not None:
        aw, v, cov_term = a * w[:, None], w * res, np.abs(res)
    else:
        aw, v, cov_term = a, res, 0.0
    m = tri_solve(r, tri_solve(r, aw.T, trans=True))  # inverse-ok: reported bound only
    absa = np.abs(a)
    if icept is not None:
        absa[:, icept] = 0.0   # the column of ones is not a measured datum
    return np.abs(m) @ (absa @ np.abs(xs) + np.abs(y) + cov_term), absa.T @ np.abs(v)


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
    probed = sol.steps == 0 and sol.error_estimate is not None
    if sol.steps > 0:
        lc = sol.last_corr if math.isfinite(sol.last_corr) else 1.0
        err = EPS if (sol.converged and lc <= 2 * EPS) else max(lc, EPS)
    elif probed:  # one correction against the data as given measures the whole error (x2, plus the solver floor)
        err = 2.0 * float(sol.error_estimate or 0.0) + EPS * cond_fit
    else:
        err = bound
    given = sol.method.endswith("+given") or probed
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


def _chi2_error(f_, z: np.ndarray, quad: np.ndarray) -> np.ndarray:
    """Computed error of ``y^T S^-1 y`` per row of ``z = S^-1 y`` (the formula of part B, ``likelihood.accuracy``)."""
    from ..linalg.sensitivity import chi2_sums

    root = math.sqrt(f_.dim)
    return (chi2_sums(f_, z, "factor") / root + root * quad) * EPS


def _cov_parts(design, sol: Solution, kind: str):
    """Per-coefficient first-order relative errors of ``C_kk = (R^-1 R^-T)_kk``, of the VIFs and of the rss.

    Backward error ``dR`` of the QR (``eps |R|``, doubled for the rounding of ``sqrt(w)``) changes
    ``C_kk`` by at most ``2 |dR| |C e_k| / sqrt(C_kk)`` relative (first order, ``C = R^-1 R^-T``).
    With an error covariance, the factor and the whitening solves are exact for some ``S + dS``;
    ``C_kk = y_k^T S^-1 y_k`` with ``y_k = A C e_k`` is then a quadratic form like the rss
    ``r^T S^-1 r``, and both take the computed-error estimate of the quadratic form of a Gaussian
    (``likelihood.accuracy``, calibrated in part B) with ``z_k = S^-1 y_k = L^-T Q R^-T e_k``.
    A VIF is the ratio ``C_jj / C'_jj`` (``C'`` of the design ``[1, x_j]`` alone): the two move
    together under ``dS`` and the difference of the two relative changes is bounded by
    ``|zh_j - zh'_j|^T |L||L|^T |zh_j + zh'_j|`` (``zh = z / sqrt(C)``, the same scale as part B).
    """
    p = len(sol.cols)
    u = tri_solve(sol.r, np.eye(p), trans=True)   # inverse-ok: columns R^-T e_k bound reported digits only
    c = u.T @ u
    ckk = np.diag(c)
    nr = float(np.linalg.norm(sol.r))
    wf = 1.5 if kind == "weights" else 1.0   # sqrt(w) and the product: 2u per entry beside the QR
    with np.errstate(divide="ignore", invalid="ignore"):
        c_rel = 0.5 * wf * EPS * np.sum(np.abs(c), axis=0) / np.sqrt(ckk)
    vif_rel = c_rel.copy()
    rss_rel_cov = 0.0
    se_cov = None
    if kind == "matrix" and sol.q is not None and _in_memory(design):
        f_ = design.factor
        z = f_.solve_lower(sol.q @ u, trans=True)
        with np.errstate(divide="ignore", invalid="ignore"):
            cov_k = _chi2_error(f_, z.T, ckk) / ckk
        c_base = c_rel
        c_rel = c_rel + cov_k
        vif_rel = vif_rel + cov_k
        v = f_.solve_lower(sol.wresid, trans=True)
        rw = float(sol.wresid @ sol.wresid)
        rss_rel_cov = float(_chi2_error(f_, v[None, :], np.array([rw]))[0]) / rw if rw > 0 else math.inf
        if rw > 0:
            # se_k = sqrt(rss C_kk / dof): under dS the two move as -vh^T dS vh and -zh^T dS zh, and a
            # change of the scale of S cancels; first order 0.5 (vh - zh)^T dS (vh + zh)
            from ..linalg.sensitivity import abs_cov_matvec

            vh = (v / math.sqrt(rw))[None, :]
            zt = (z / np.sqrt(ckk)[None, :]).T
            with np.errstate(invalid="ignore"):
                bil_se = np.einsum("ij,ij->i", np.abs(vh - zt), abs_cov_matvec(f_, vh + zt, "factor"))
            se_cov = 0.5 * EPS * bil_se / math.sqrt(f_.dim) + math.sqrt(f_.dim) * EPS
        if design.intercept and sol.cols[0] == 0 and p > 1:
            r0 = sol.r[:, 0]
            g00 = float(r0 @ r0)
            cols = []
            for k in range(1, p):
                rk = sol.r[:, k]
                g0k, gkk = float(r0 @ rk), float(rk @ rk)
                det = g00 * gkk - g0k * g0k
                cols.append((g00 * rk - g0k * r0) / math.sqrt(g00 * det) if det > 0 else np.full(p, np.nan))
            zp = f_.solve_lower(sol.q @ np.column_stack(cols), trans=True)
            zh = z[:, 1:] / np.sqrt(ckk[1:])[None, :]
            from ..linalg.sensitivity import abs_cov_matvec

            dm, sp = (zh - zp).T, (zh + zp).T
            with np.errstate(invalid="ignore"):
                bil = np.einsum("ij,ij->i", np.abs(dm), abs_cov_matvec(f_, sp, "factor"))
                vif_rel[1:] = vif_rel[1:] - cov_k[1:] + EPS * bil / math.sqrt(f_.dim)
    elif kind == "matrix":
        cs = design.factor.health.rcond_scaled
        c_rel = c_rel + EPS * (1.0 / cs if cs > 0 else math.inf)
        vif_rel = c_rel
        rss_rel_cov = EPS * (1.0 / cs if cs > 0 else math.inf)
    if se_cov is not None:
        c_rel = c_base   # the covariance part of se is stated jointly (se_cov)
    return c_rel, vif_rel, rss_rel_cov, se_cov, nr, ckk, c


def _logdet_error(design, kind: str, n: int) -> float:
    """Absolute error of the log-determinant term of the log-likelihood (computation, first order)."""
    if kind == "none":
        return 0.0
    if kind == "weights":
        return 2 * EPS * (n + abs(2 * design.sum_log_sqrt_w))
    from ..likelihood.accuracy import _log_pivots, _sums

    f_ = design.factor
    err = (_sums(f_)[1] / math.sqrt(f_.dim) + _log_pivots(f_)) * EPS
    return 0.5 * err


def derived_digits(st: Statements, design, sol: Solution, s, beta, se, tv, pv, dof, rss, ll, n) -> dict:
    """Correct digits of standard errors, t, p, intervals, VIFs and log-likelihood (computation, data as given).

    Calibrated against mpmath in ``tests/accuracy/test_derived_calibration.py``; definitions in
    ``docs/numerics.rst``.
    """
    from scipy import stats

    kind = whitening_kind(design)
    p = len(sol.cols)
    nan = math.nan
    if not p or sol.var_rows is not None or sol.r is None:
        return {k: nan for k in ("digits_std_error", "digits_t_stat", "digits_p_value", "digits_interval",
                                 "digits_vif", "digits_loglik")}
    c_rel, vif_c, rss_cov, se_cov, nr, ckk, c_full = _cov_parts(design, sol, kind)
    xs = np.abs(sol.x)
    xn = float(np.max(xs)) if xs.size else 0.0
    rho = math.sqrt(rss) if rss > 0 else 0.0
    # rss is stationary in x: a coefficient error dx moves it by |A dx|^2 (second order)
    dxa = nr * st.solve_error * xn
    coef_abs = st.solve_error * xn * np.ones(p)
    done = sol.steps > 0 and sol.converged and sol.last_corr <= 2 * EPS and st.solve_error <= 2 * EPS
    if done:
        # converged refinement with double-double residuals: what is left is the final rounding of x
        # (eps |x_k|), the eps^2-level errors of the residuals mapped as a first-order change of the data
        # (row k of R^-1, norm sqrt(C_kk), and C A^T r) and one more contraction of the last correction
        # (kappa eps times it)
        bw0 = float(np.linalg.norm(sol.wresid)) + nr * xn
        c_cols0 = np.linalg.norm(c_full, axis=0)
        coef_abs = np.minimum(coef_abs, EPS * xs + EPS * EPS * (np.sqrt(ckk) * bw0 + c_cols0 * nr * rho)
                              + st.cond_fit * EPS * max(sol.last_corr, EPS) * xn)
        # the refined residual is an unknown of the augmented system (Björck, 1967): it carries no rounding
        # of x, except where the residual is recomputed from x (a covariance matrix; the no-Q path)
        keep_x = kind == "matrix" or sol.q is None
        dxa = min(dxa, EPS * rho + (EPS * nr * xn if keep_x else st.cond_fit * EPS * sol.last_corr * nr * xn))
    bw = float(np.linalg.norm(sol.wresid)) + nr * xn     # >= |b| (whitened, unit columns)
    resid_rel = 0.0
    if sol.steps == 0 and rho > 0:
        # unrefined: the residual is b - A x in double, entry errors up to (p+1) eps (|b_i| + |a_i||x|);
        # they enter the rss as 2 r.dr, a sum of n terms of random sign (Higham & Mary, 2019: sqrt(n)
        # growth). A coefficient error from a backward-stable QR moves A x by at most about
        # eps (|b| + |A||x| + kappa |r|) (Wedin, 1973), however large dx itself is.
        resid_rel = 2 * EPS * math.sqrt((p + 1) / n) * bw / rho
        dxa = min(dxa, 2 * EPS * (bw + st.cond_fit * rho))
        # and each coefficient by row k of R^-1 Q^T (norm sqrt(C_kk)) applied to that change, plus the
        # residual term C dA^T r (first order; Wedin, 1973; Higham, 2002, §20.1)
        c_cols = np.linalg.norm(c_full, axis=0)
        coef_abs = np.minimum(coef_abs, 2 * EPS * (np.sqrt(ckk) * bw + c_cols * nr * rho))
    rss_rel = (dxa / rho) ** 2 + resid_rel + rss_cov + (2 + math.sqrt(n)) * EPS if rho > 0 else math.inf
    if se_cov is None:
        se_rel = 0.5 * (c_rel + rss_rel) + 2 * EPS
    else:
        se_rel = 0.5 * (c_rel + rss_rel - rss_cov) + se_cov + 2 * EPS
    with np.errstate(divide="ignore", invalid="ignore"):
        coef_rel = coef_abs / xs
        t_rel = coef_rel + se_rel
        at = np.abs(np.asarray(tv, dtype=float))
        if dof > 0:
            ratio = np.exp(stats.t.logpdf(at, dof) - stats.t.logsf(at, dof))
            p_rel = at * ratio * t_rel + 10 * EPS
        else:
            p_rel = np.full_like(at, np.nan)
        q = float(stats.t.ppf(0.975, dof)) if dof > 0 else math.nan
        abs_err = coef_abs * s[sol.cols] + q * np.asarray(se) * se_rel
        ends = np.minimum(np.abs(beta - q * se), np.abs(beta + q * se))
        ci_rel = abs_err / ends + 4 * EPS
    pred = [k for k, c in enumerate(sol.cols) if c > 0]
    vif_rel = vif_c[pred] + 4 * EPS if design.intercept and p > 1 and pred else None
    ll_abs = 0.5 * n * rss_rel + _logdet_error(design, kind, n) + 2 * EPS * abs(ll) if math.isfinite(ll) else nan
    ll_rel = ll_abs / abs(ll) if ll and math.isfinite(ll) else math.nan
    return {
        "digits_std_error": _min_digits(se_rel),
        "digits_t_stat": _min_digits(t_rel) if dof > 0 else math.nan,
        "digits_p_value": _min_digits(p_rel) if dof > 0 else math.nan,
        "digits_interval": _min_digits(ci_rel) if dof > 0 else math.nan,
        "digits_vif": _min_digits(vif_rel) if vif_rel is not None else math.nan,
        "digits_loglik": float(_digits(ll_rel)) if math.isfinite(ll_rel) else math.nan,
    }
