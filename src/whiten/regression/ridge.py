"""Ridge regression (Hoerl & Kennard, 1970) with the intercept never penalised.

Minimises ``||b - w1 b0 - A b||^2 + lambda ||D b||^2`` in the whitened model,
where ``w1`` is the (whitened) constant column and ``D = I`` (penalty on the
predictors as given) or ``D = diag(sd_j)`` with ``standardize=True`` (penalty on
the predictors scaled to unit standard deviation, so ``lambda`` is unit-free).

* A fixed ``lambda`` is solved as the augmented least-squares problem
  ``[A_c; sqrt(lambda) D] b ~ [b_c; 0]`` (``A_c``, ``b_c``: the predictors and
  response with the constant projected out) by the same Householder QR and
  refinement as an unpenalised fit.
* ``"gcv"`` (generalised cross-validation, Golub, Heath & Wahba, 1979) and
  ``"loocv"`` (leave-one-out prediction error, through the exact identity
  ``e_(i) = e_i / (1 - h_ii)`` for penalised least squares) are evaluated on a
  log grid from the SVD ``A_c D^{-1} = U S V^T`` (obtained as the SVD of the R
  of a QR, so no Gram matrix is formed): for each grid point
  ``RSS = sum_k (lambda / (s_k^2 + lambda))^2 c_k^2 + ||b_c - U c||^2`` with
  ``c = U^T b_c``, ``h_ii = w1_i^2 / ||w1||^2 + sum_k u_ik^2 s_k^2 / (s_k^2 + lambda)``;
  O(n k) per grid point. The chosen ``lambda`` is then refitted by the fixed route.
  With weights or an error covariance both criteria live in the whitened model
  (e.g. LOOCV is the mean squared *weighted* leave-one-out error).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from .._numerics import EPS, column_norms
from .._warn import warn
from ..errors import InputError, NumericalWarning
from ..linalg import compensated
from ..linalg.qr import (
    condition_2,
    householder_thin,
    pow2_column_scale,
    qr_r,
    sequential_dependence,
    tri_solve,
)
from .accuracy import data_sensitivity, sensitivity_digits, whitening_kind
from .diagnostics import collinearity_report, vif_from_r
from .inference import fitted_values, gaussian_loglik, read_only, scaled_condition
from .results import FitHealth, LinearFit, RidgeInfo
from .solve import MAX_REFINE, Solution, refine_dense, refinement_verdict

__all__ = ["fit_ridge", "CRITERIA"]

CRITERIA = ("gcv", "loocv")


def _project_out(v: np.ndarray, w1: np.ndarray) -> np.ndarray:
    """v minus its projection on w1, twice (re-orthogonalisation keeps it at eps level)."""
    ww = float(w1 @ w1)
    out = v - np.outer(w1, w1 @ v) / ww if v.ndim == 2 else v - w1 * (float(w1 @ v) / ww)
    if v.ndim == 2:
        out = out - np.outer(w1, w1 @ out) / ww
    else:
        out = out - w1 * (float(w1 @ out) / ww)
    return out


def _parse(ridge) -> tuple[str, float]:
    if isinstance(ridge, str):
        key = ridge.strip().lower()
        if key in CRITERIA:
            return key, math.nan
        try:
            ridge = float(key)
        except ValueError:
            raise InputError(f"ridge: expected a penalty >= 0 or one of {list(CRITERIA)}, got {ridge!r}") from None
    try:
        lam = float(ridge)
    except (TypeError, ValueError):
        raise InputError(f"ridge: expected a penalty >= 0 or one of {list(CRITERIA)}, got {ridge!r}") from None
    if not (lam >= 0 and math.isfinite(lam)):
        raise InputError(f"ridge: the penalty must be a finite number >= 0, got {ridge!r}")
    return "fixed", lam


def fit_ridge(design, ridge, *, standardize: bool = False, grid=None):
    """Ridge fit of a validated design (called by :func:`whiten.fit_linear` with ``ridge=...``).

    Returns
    -------
    LinearFit
        With ``.ridge`` (a :class:`RidgeInfo`) filled in. ``std_error`` are the
        standard deviations of the (biased) ridge estimates at the chosen penalty,
        ``sigma * sqrt(diag(V S^2 (S^2 + lambda)^-2 V^T))`` (inverse-free, from
        the SVD); ``t_stat``/``p_value`` are NaN because the estimates are biased
        and the usual t reference does not hold.

    Raises
    ------
    InputError
        Bad penalty, a grid that is not positive, no predictors to penalise.
    """
    kind, lam = _parse(ridge)
    if not design.names:
        raise InputError("ridge: there are no predictors to penalise")
    a, b = design.whitened()
    n = design.n
    icpt = design.intercept
    xw = a[:, 1:] if icpt else a
    w1 = a[:, 0] if icpt else None
    xc = _project_out(xw, w1) if w1 is not None else xw.copy()
    bc = _project_out(b, w1) if w1 is not None else b.copy()
    k = xc.shape[1]
    if standardize:
        d = column_norms(xc) / math.sqrt(n)
        # scale-free: constant when the centred spread is rounding of the column's own level
        level = np.max(np.abs(xw), axis=0) if n else np.zeros(k)
        bad = np.flatnonzero(d <= 8 * EPS * level)
        if bad.size:
            raise InputError(f"ridge: predictor {design.names[bad[0]]!r} is constant; it cannot be standardized")
    else:
        d = np.ones(k)
    xs = xc / d[None, :]
    # SVD through the R of a QR (Golub & Kahan route, no Gram matrix)
    if n >= k:
        qx, rx = householder_thin(xs)
        ur, sv, vt = np.linalg.svd(rx)
        u = qx @ ur
    else:
        u, sv, vt = np.linalg.svd(xs, full_matrices=False)
    c = u.T @ bc
    perp = bc - u @ c
    rss_perp = float(perp @ perp)
    ww = float(w1 @ w1) if w1 is not None else 1.0
    lev0 = (w1 ** 2) / ww if w1 is not None else np.zeros(n)
    s2 = sv ** 2
    info_grid = info_scores = info_paths = None
    at_edge = False
    if kind != "fixed":
        if grid is None:
            top = float(s2[0]) if s2.size and s2[0] > 0 else 1.0
            grid_arr = top * np.logspace(-8, 2, 61)
        else:
            grid_arr = np.asarray(grid, dtype=float).ravel()
            if grid_arr.size < 2 or not np.all(np.isfinite(grid_arr)) or np.any(grid_arr <= 0):
                raise InputError("ridge_grid: give at least two finite penalties > 0")
            grid_arr = np.sort(grid_arr)
        scores = np.empty(grid_arr.size)
        paths = np.empty((grid_arr.size, k))
        for i, lm in enumerate(grid_arr):
            shrink = s2 / (s2 + lm)
            e = bc - u @ (shrink * c)
            edf = float(shrink.sum()) + int(icpt)
            if kind == "gcv":
                rss = float(np.sum(((lm / (s2 + lm)) * c) ** 2)) + rss_perp
                scores[i] = n * rss / (n - edf) ** 2 if n > edf else math.inf
            else:
                h = lev0 + np.einsum("ij,j->i", u ** 2, shrink)
                scores[i] = float(np.mean((e / (1.0 - h)) ** 2))
            paths[i] = (vt.T @ (sv / (s2 + lm) * c)) / d
        best = int(np.argmin(scores))
        lam = float(grid_arr[best])
        at_edge = best in (0, grid_arr.size - 1)
        if at_edge:
            warn(NumericalWarning,
                 f"ridge: the {kind} criterion is smallest at the {'lower' if best == 0 else 'upper'} end of the "
                 f"grid (penalty {lam:.3g}); widen ridge_grid to be sure it is a minimum")
        info_grid, info_scores, info_paths = grid_arr, scores, paths
    # fixed penalty: augmented least squares, Householder QR + refinement
    aug = np.vstack([xs, math.sqrt(lam) * np.eye(k)]) if lam > 0 else xs
    baug = np.concatenate([bc, np.zeros(k)]) if lam > 0 else bc
    norms = column_norms(aug)
    sc = pow2_column_scale(norms)
    augs = aug * sc[None, :]
    q, r = householder_thin(augs)
    if sequential_dependence(r, 10 * max(n, k) * EPS):
        raise InputError("ridge: with penalty 0 the predictors are rank deficient; use a positive penalty")
    xsol, res, steps, conv, corr = refine_dense(augs, baug, q, r, "compensated", MAX_REFINE)
    beta_s = xsol * sc             # coefficients of xs
    beta = beta_s / d              # original units
    e_w = res[:n]                  # whitened residuals of the centred problem
    rss = float(e_w @ e_w)
    shrink = s2 / (s2 + lam) if lam > 0 else np.ones_like(s2)
    edf = float(shrink.sum()) + int(icpt)
    dof = n - edf
    sigma = math.sqrt(rss / dof) if dof > 0 else math.nan
    fac = sv / (s2 + lam) if lam > 0 else 1.0 / sv
    var_pen = np.einsum("kj,k->j", (vt * fac[:, None]) ** 2, np.ones_like(sv))  # inverse-ok: reported variances only
    se_pred = sigma * np.sqrt(var_pen) / d
    if icpt:
        mx = (w1 @ xw) / ww                      # constant-column coefficients of each predictor
        b0 = float(w1 @ (b - xw @ beta)) / ww
        proj = vt @ (mx / d)
        var_b0 = 1.0 / ww + float(np.sum((proj * fac) ** 2))  # inverse-ok: reported variance only
        coef = np.concatenate([[b0], beta])
        stderr = np.concatenate([[sigma * math.sqrt(var_b0)], se_pred])
    else:
        coef, stderr = beta, se_pred
    tss = float(bc @ bc)
    r2 = 1 - rss / tss if tss > 0 else math.nan
    adj = 1 - (1 - r2) * (n - int(icpt)) / dof if dof > 0 else math.nan
    ll = gaussian_loglik(design, rss, n)
    # unpenalised diagnostics of the design
    s_full = pow2_column_scale(column_norms(a))
    _, r_full = householder_thin(a * s_full[None, :])
    tol = 10 * max(n, design.p) * EPS
    coll = collinearity_report(r_full, design.all_names, exact_tol=tol)
    vif = np.full(k, np.nan)
    if icpt and not sequential_dependence(r_full, tol):
        vif = vif_from_r(r_full, k) if k > 1 else np.ones(1)
    cond_aug = scaled_condition(r)
    coef, bound, solve_err, steps2 = _two_statements(design, a, b, coef, lam, d, xc, xw, bool(standardize))
    steps += steps2
    digits, solved = sensitivity_digits(bound), sensitivity_digits(solve_err)
    health = FitHealth(
        method="ridge-augmented-householder", condition=float(coll.condition_indices[-1]),
        condition_raw=condition_2(r_full / s_full[None, :]), condition_fitted=cond_aug,
        error_bound=bound, digits_trusted=digits, digits_solved=solved, refinement_steps=steps,
        refinement_converged=bool(conv), last_correction=corr, residual_arithmetic="compensated",
        rank=design.p, n_columns=design.p, rank_tol=tol, set_aside=(), dependencies=(),
        notes=(f"penalty {lam:.6g} on {'standardized ' if standardize else ''}predictors; intercept unpenalised",),
        solve_error=solve_err)
    info = RidgeInfo(penalty=lam, criterion=kind, standardized=bool(standardize), effective_dof=edf,
                          grid=info_grid, scores=info_scores, paths=info_paths, at_edge=at_edge)
    fitted = fitted_values(design, list(range(design.p)), coef)
    nan = np.full(coef.shape, np.nan)
    dof_model = edf - int(icpt)
    ess = tss - rss
    fstat = (ess / dof_model) / (rss / dof) if dof_model > 0 and dof > 0 and rss > 0 else math.nan
    fp = float(stats.f.sf(fstat, dof_model, dof)) if math.isfinite(fstat) else math.nan
    return LinearFit(
        names=tuple(design.all_names), coef=read_only(coef), std_error=read_only(stderr), t_stat=read_only(nan),
        p_value=read_only(nan.copy()), residual_sd=sigma, r_squared=r2, adj_r_squared=adj, f_statistic=fstat,
        f_p_value=fp, loglik=ll, aic=-2 * ll + 2 * edf, bic=-2 * ll + math.log(n) * edf, n_rows=n, dof=dof,
        dof_model=dof_model, rank=design.p, vif=read_only(vif), collinearity=coll, fitted=read_only(fitted),
        residuals=read_only(design.y - fitted), health=health, intercept=icpt,
        columns=tuple(design.names),
        weighted="gls" if design.factor is not None else ("wls" if design.sqrt_w is not None else "none"),
        ridge=info, _r=None, _scale=None, _fit_cols=tuple(range(design.p)), _q=None, _wresid=e_w,
        _design=design)


def _two_statements(design, a, b, coef, lam, d, xc, xw, standardize):
    """Refinement in the data as given, and the two statements: ``(coef, bound, solve error, steps)``.

    The coefficients of the centred, standardized problem are refined against the
    whole penalised problem ``min ||A x - b||^2 + lambda ||P^(1/2) x||^2`` (A the
    design with its intercept, whitened by the weights or error covariance; P the
    penalty on the predictors in the units fitted) by corrected semi-normal
    equations with compensated residuals (Björck, 1987), so the roundings of the
    centring and the standardization do not reach the answer.

    (a) is the componentwise first-order bound of the least-squares fits
    (:func:`whiten.regression.accuracy.data_sensitivity`) with ``C = G^{-1}``,
    ``G = A^T S^{-1} A + lambda P``: the derivative of ``x = G^{-1} A^T S^{-1} b``
    has the same form as for an unpenalised fit, so the same sums apply with the R
    of ``[A; sqrt(lambda) P^(1/2)]``. With ``standardize``, the penalty's scales
    ``d_j`` are data too; their first-order change adds ``|C| (2 lambda d |dd| |x|)``.
    The penalty is taken as given (a criterion's choice of it is not differentiated).
    (b) is the last correction, plus the rounding of the penalty rows, plus the
    whitening's roundings as for WLS/GLS fits.
    """
    p = design.p
    k0 = int(design.intercept)
    s = pow2_column_scale(column_norms(a))
    pen = np.zeros(p)
    pen[k0:] = d * s[k0:]
    aug = np.vstack([a * s[None, :], math.sqrt(lam) * np.diag(pen)]) if lam > 0 else a * s[None, :]
    baug = np.concatenate([b, np.zeros(p)]) if lam > 0 else b
    r = qr_r(aug)[:p]
    r = r * np.where(np.diag(r) < 0, -1.0, 1.0)[:, None]
    xs = coef / s
    steps, conv, corr, prev = 0, False, math.nan, math.inf
    for _ in range(MAX_REFINE):
        res = compensated.residual(aug, xs, baug, None, "compensated")
        dx = tri_solve(r, tri_solve(r, compensated.gradient(aug, res, "compensated"), trans=True))
        xs = xs + dx
        steps += 1
        corr, stop, conv = refinement_verdict(xs, dx, prev)
        if stop:
            break
        prev = corr
    sol = Solution(list(range(p)), xs, r, np.zeros(0), None, steps, bool(conv), corr, "compensated", "ridge", [])
    rel = data_sensitivity(design, s, sol)
    if rel is None:  # pragma: no cover - ridge fits are in memory
        rel = math.inf
    c_abs = np.abs(tri_solve(r, tri_solve(r, np.eye(p), trans=True)))  # inverse-ok: reported bound only
    xn = float(np.max(np.abs(xs)))
    pen_term = np.zeros(p)
    pen_term[k0:] = lam * pen[k0:] ** 2 * np.abs(xs[k0:])    # G's penalty part, times |x|
    if standardize and lam > 0:
        n = max(design.n, 1)
        dd = 2.0 * EPS * np.einsum("ij,ij->j", np.abs(xc), np.abs(xw)) / (n * d)   # |d d_j|, absolute
        g = np.zeros(p)
        g[k0:] = 2.0 * lam * pen[k0:] * (dd * s[k0:]) * np.abs(xs[k0:])
        rel += float(np.max(c_abs @ g)) / (EPS * xn) if xn > 0 else math.inf
    bound = EPS * rel
    lc = corr if math.isfinite(corr) else 1.0
    err = EPS if (conv and lc <= 2 * EPS) else max(lc, EPS)
    if xn > 0:
        err += 3 * EPS * float(np.max(c_abs @ pen_term)) / xn   # sqrt(lambda) * d_j * s_j rounds
    kind = whitening_kind(design)
    if kind == "weights":
        err += bound                   # sqrt(w) A rounds once more
    elif kind == "matrix":
        h = design.factor.health
        err += bound * math.sqrt(1.0 / h.rcond_scaled if h.rcond_scaled > 0 else math.inf)
    return xs * s, bound, err, steps
