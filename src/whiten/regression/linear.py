"""Linear least squares with the digits it can be trusted to: :func:`fit_linear` -> :class:`LinearFit`.

The numerical route (Björck, 1996, "Numerical Methods for Least Squares
Problems"):

1. weights / error covariance are applied by whitening the rows
   (``sqrt(w_i)`` per row; ``L^{-1}`` with ``L`` the Cholesky factor of the
   user's error covariance, by triangular solves);
2. columns are equilibrated by powers of two (exact);
3. Householder QR of the design in the user's column order; a column whose
   distance from the span of the columns before it is at most
   ``rank_tol * max|r_ii|`` is set aside (the later of two dependent columns);
   if the remaining triangle still looks singular (``dtrcon``), the singular
   values of R settle the rank and columns are set aside latest-first;
4. iterative refinement of the augmented system ``[I A; A^T 0][r; x] = [b; 0]``
   (Björck, 1967) with the residuals in extended precision;
5. standard errors from triangular solves with R.

For many rows (more than ``2e6`` design cells) the data are read in row
blocks with bounded memory: R of ``[A y]`` comes from CholeskyQR2 (two BLAS-3
passes; Fukaya et al., 2014) when the equilibrated Gram matrix is well enough
conditioned (rcond > 1e-12), otherwise from a Householder tall-skinny QR
(Demmel et al., 2012). Refinement there uses the corrected semi-normal
equations (Björck, 1987) with ``numpy.longdouble`` residuals -- accurate while
the scaled condition number is below ``1e5``; above that the fit falls back to
the dense Householder route and says so in ``health.path``. With
``refine="auto"`` the many-row path refines only when fewer than 8 digits would
otherwise survive (the statistical uncertainty of a fit on that many rows is far
larger than such rounding), and says so in ``health.notes``.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
from scipy import stats

from .._settings import current
from .._validate import as_float_array, as_rows
from .._warn import warn
from ..errors import ConditioningWarning, InputError, RankDeficiencyWarning
from ..linalg import compensated as _extended
from .diagnostics import CollinearityReport, collinearity_report, describe_dependence, vif_from_r
from ..linalg.qr import (cholqr2_r, condition_2, greedy_rank_drop, householder_thin, pow2_column_scale, qr_r,
                        sequential_dependence, tri_rcond, tri_solve, tsqr_r)

__all__ = ["LinearFit", "FitHealth", "fit_linear", "RANK_POLICIES", "INTERCEPT_NAME"]

_EPS = float(np.finfo(np.float64).eps)
INTERCEPT_NAME = "(intercept)"
RANK_POLICIES = ("nan", "drop", "raise", "minimum-norm")
METHODS = ("auto", "householder", "blocked")
#: above this many design cells (n * p) the blocked (tall-skinny) path is used
DENSE_CELLS = 2_000_000
#: the blocked path refines by semi-normal equations, which converge while
#: cond^2 * eps << 1; above this scaled condition number it hands over to Householder
BLOCKED_MAX_COND = 1e5
MAX_REFINE = 6
#: on the many-row path, refine="auto" refines when fewer digits than this would survive
BLOCKED_AUTO_DIGITS = 8


# --------------------------------------------------------------------------- results
@dataclasses.dataclass(frozen=True)
class FitHealth:
    """Numerical health of a least-squares fit.

    Attributes
    ----------
    path : str
        What ran, e.g. ``"householder"`` or ``"blocked-tsqr"``, plus any hand-over.
    condition_number : float
        2-norm condition number of the design (all columns, intercept included)
        with columns scaled to unit length (Belsley's convention). This is the
        one that governs accuracy.
    condition_number_raw : float
        The same for the design as given (units matter: a column in
        nanometres next to one in kilometres makes this large harmlessly).
    condition_number_fitted : float
        Scaled condition number of the columns actually fitted (after any were
        set aside).
    error_bound : float
        First-order bound on the relative error of the coefficients caused by
        a relative perturbation of one unit in the last place of the data:
        ``eps * (k + k^2 * tan(theta))`` with ``k`` the fitted condition number
        and ``tan(theta) = ||r|| / ||A x||`` (Wedin, 1973; Higham, 2002, §20.1).
    digits_trusted : float
        ``-log10(error_bound)``, capped at 15.9: significant digits of the
        coefficients that survive a change of one unit in the last digit of the
        data (a worst-case, first-order statement about the *problem*).
    digits_solved : float
        Significant digits to which the problem *as given* was solved: from the
        size of the last refinement correction (15.6 when refinement converged to
        working precision); equal to ``digits_trusted`` when refinement was skipped.
        With exactly known data (integers, designed levels) this is the figure
        that counts.
    refinement_steps : int
    refinement_converged : bool
    last_correction : float
        Relative size of the last refinement correction (max-norm).
    residual_arithmetic : str
        ``"compensated"`` (double-double by error-free transformations),
        ``"longdouble"`` or ``"none"`` (refinement skipped).
    rank : int
    columns : int
    rank_tol : float
    set_aside : tuple of str
        Columns not fitted because they depend on earlier ones.
    dependencies : tuple of str
        One plain sentence per set-aside column.
    notes : tuple of str
    """

    path: str
    condition_number: float
    condition_number_raw: float
    condition_number_fitted: float
    error_bound: float
    digits_trusted: float
    digits_solved: float
    refinement_steps: int
    refinement_converged: bool
    last_correction: float
    residual_arithmetic: str
    rank: int
    columns: int
    rank_tol: float
    set_aside: tuple
    dependencies: tuple
    notes: tuple

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        return {k: (list(v) if isinstance(v, tuple) else _jnum(v)) for k, v in d.items()}


def _jnum(v):
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if math.isnan(v):
            return None
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return v
    return v


def _jarr(a) -> list:
    return [_jnum(v) for v in np.asarray(a, dtype=float).ravel()]


@dataclasses.dataclass(frozen=True, eq=False)
class RidgeInfo:
    """How a ridge penalty was applied or chosen.

    Attributes
    ----------
    penalty : float
        The penalty ``lambda`` used (on the predictors as given, or on their
        standardized versions when ``standardized``).
    criterion : str
        ``"fixed"``, ``"gcv"`` or ``"loocv"``.
    standardized : bool
    effective_dof : float
        Trace of the hat matrix, intercept included.
    grid : ndarray or None
        Penalties tried (log grid) when chosen by a criterion.
    scores : ndarray or None
        The criterion at each grid point.
    paths : ndarray or None, shape (len(grid), n_predictors)
        Coefficients (original units) along the grid.
    at_edge : bool
        The chosen penalty is the first or last of the grid.
    """

    penalty: float
    criterion: str
    standardized: bool
    effective_dof: float
    grid: np.ndarray | None = None
    scores: np.ndarray | None = None
    paths: np.ndarray | None = None
    at_edge: bool = False

    def to_dict(self) -> dict:
        return {
            "penalty": self.penalty, "criterion": self.criterion, "standardized": self.standardized,
            "effective_dof": self.effective_dof, "at_edge": self.at_edge,
            "grid": None if self.grid is None else _jarr(self.grid),
            "scores": None if self.scores is None else _jarr(self.scores),
        }


@dataclasses.dataclass(frozen=True, eq=False)
class LinearFit:
    """A fitted linear model with its uncertainty, diagnostics and numerical health.

    Coefficient-shaped attributes are in the order of :attr:`names`: the
    intercept (``"(intercept)"``) first when fitted, then the predictors in the
    user's order. Columns set aside for exact collinearity carry NaN (policy
    ``"nan"``) or are absent (policy ``"drop"``).

    Attributes
    ----------
    names : tuple of str
    coef, stderr, tvalues, pvalues : ndarray, shape (k,)
    residual_sd : float
        ``sqrt(RSS / dof)`` in whitened units (for WLS/GLS the scale of a unit-weight error).
    r_squared, adj_r_squared : float
        Centred when there is an intercept, uncentred otherwise (the convention
        of NIST StRD and of common practice); for WLS/GLS on the whitened model.
    f_statistic, f_pvalue : float
        Test that every coefficient except the intercept is zero.
    loglik, aic, bic : float
        Gaussian log-likelihood at the maximum-likelihood error variance;
        ``aic = -2 loglik + 2 rank``, ``bic = -2 loglik + log(n) rank``.
    nobs : int
    dof : int
        Residual degrees of freedom ``n - rank`` (for ridge ``n - effective dof``).
    dof_model : int
        ``rank`` minus 1 for the intercept.
    rank : int
    condition_number, condition_number_raw : float
        See :class:`FitHealth` (scaled = Belsley's unit-length columns; raw = as given).
    vif : ndarray, shape (n_predictors,)
        Centred VIF of each predictor (intercept excluded; for WLS/GLS, of the
        whitened predictors, i.e. with weighted centring); ``inf`` for a column in
        an exact linear dependence. NaN for every
        predictor when ``intercept=False``: the centred VIF presumes a model
        with an intercept, and the uncentred variant mostly measures the
        distance of a column's mean from zero.
    collinearity : CollinearityReport
    fitted, residuals : ndarray, shape (n,)
        In the units of ``y`` (unweighted).
    health : FitHealth
    ridge : RidgeInfo or None
    """

    names: tuple
    coef: np.ndarray
    stderr: np.ndarray
    tvalues: np.ndarray
    pvalues: np.ndarray
    residual_sd: float
    r_squared: float
    adj_r_squared: float
    f_statistic: float
    f_pvalue: float
    loglik: float
    aic: float
    bic: float
    nobs: int
    dof: float
    dof_model: float
    rank: int
    vif: np.ndarray
    collinearity: CollinearityReport
    fitted: np.ndarray
    residuals: np.ndarray
    health: FitHealth
    intercept: bool
    predictor_names: tuple
    weighted: str
    ridge: RidgeInfo | None = None
    # private: what predict() and influence() need (scaled coordinates)
    _r: np.ndarray | None = dataclasses.field(default=None, repr=False)
    _scale: np.ndarray | None = dataclasses.field(default=None, repr=False)
    _fit_cols: tuple = dataclasses.field(default=(), repr=False)
    _q: np.ndarray | None = dataclasses.field(default=None, repr=False)
    _wresid: np.ndarray | None = dataclasses.field(default=None, repr=False)
    _design: Any = dataclasses.field(default=None, repr=False)
    _cov_rows: np.ndarray | None = dataclasses.field(default=None, repr=False)

    def __repr__(self) -> str:
        h = self.health
        return (f"LinearFit(nobs={self.nobs}, rank={self.rank}/{h.columns}, r_squared={self.r_squared:.6g}, "
                f"residual_sd={self.residual_sd:.6g}, condition_number={h.condition_number:.3g}, "
                f"digits_trusted={h.digits_trusted:.1f}, digits_solved={h.digits_solved:.1f}, path={h.path!r}"
                + (f", ridge={self.ridge.penalty:.4g}" if self.ridge is not None else "") + ")")

    # ------------------------------------------------------------ simple views
    @property
    def condition_number(self) -> float:
        return self.health.condition_number

    @property
    def condition_number_raw(self) -> float:
        return self.health.condition_number_raw

    def conf_int(self, level: float = 0.95) -> np.ndarray:
        """Two-sided intervals ``coef -/+ t_{dof} * stderr``, shape (k, 2).

        Raises
        ------
        InputError
            ``level`` not strictly between 0 and 1.
        """
        q = _t_quantile(level, self.dof)
        return np.column_stack([self.coef - q * self.stderr, self.coef + q * self.stderr])

    def predict(self, x: Any, interval: str | None = None, level: float = 0.95):
        """Predicted mean at new rows, optionally with an interval.

        Parameters
        ----------
        x : array_like or DataFrame, shape (m, n_predictors) or (n_predictors,)
            Predictors only (the intercept is added). A DataFrame is matched by
            column name.
        interval : {None, "confidence", "prediction"}
            ``"confidence"``: for the mean response; ``"prediction"``: for one
            new observation of unit weight (adds ``residual_sd**2``).
        level : float

        Returns
        -------
        ndarray, shape (m,) when ``interval`` is None; otherwise a DataFrame
        with columns ``fitted``, ``lower``, ``upper``, ``std_error``.

        Notes
        -----
        The standard error of ``a^T b`` is ``residual_sd * ||R^{-T} (s * a)||``, a
        triangular solve per row (no covariance matrix is formed). Columns set
        aside for collinearity are ignored: the prediction is valid where the new
        rows obey the same dependence.
        """
        if interval not in (None, "confidence", "prediction"):
            raise InputError(f"interval: choose None, 'confidence' or 'prediction', got {interval!r}")
        rows, one, index = as_rows(x, len(self.predictor_names), names=list(self.predictor_names), name="x")
        design = np.column_stack([np.ones(rows.shape[0]), rows]) if self.intercept else rows
        cols = list(self._fit_cols)
        beta = self._coef_fitted()
        mean = design[:, cols] @ beta
        if interval is None:
            return float(mean[0]) if one else mean
        if self._r is None:
            raise InputError("predict: intervals are not available for this fit (ridge by criterion)")
        z = tri_solve(self._r, (design[:, cols] * self._scale[None, :]).T, trans=True)
        se = self.residual_sd * np.sqrt(np.einsum("ij,ij->j", z, z))
        if interval == "prediction":
            se = np.sqrt(se ** 2 + self.residual_sd ** 2)
        q = _t_quantile(level, self.dof)
        import pandas as pd

        return pd.DataFrame({"fitted": mean, "lower": mean - q * se, "upper": mean + q * se, "std_error": se},
                            index=index)

    def _coef_fitted(self) -> np.ndarray:
        full = dict(zip(self.names, self.coef))
        all_names = ([INTERCEPT_NAME] if self.intercept else []) + list(self.predictor_names)
        return np.array([full[all_names[c]] for c in self._fit_cols])

    def influence(self):
        """Leverage, studentized residuals, Cook's distance and DFBETAS (see :func:`whiten.influence`)."""
        from .influence import influence

        return influence(self)

    def to_frame(self):
        """One row per coefficient: estimate, std_error, t_ratio, p_value, low_95, high_95, vif."""
        import pandas as pd

        ci = self.conf_int(0.95)
        vif = np.full(len(self.names), np.nan)
        pred_pos = {n: i for i, n in enumerate(self.predictor_names)}
        for i, n in enumerate(self.names):
            if n in pred_pos:
                vif[i] = self.vif[pred_pos[n]]
        return pd.DataFrame({
            "estimate": self.coef, "std_error": self.stderr, "t_ratio": self.tvalues, "p_value": self.pvalues,
            "low_95": ci[:, 0], "high_95": ci[:, 1], "vif": vif,
        }, index=pd.Index(list(self.names), name="term"))

    def to_dict(self) -> dict:
        """JSON-serialisable summary (NaN as null, infinities as the strings "inf"/"-inf")."""
        ci = self.conf_int(0.95)
        return {
            "names": list(self.names),
            "coef": _jarr(self.coef), "stderr": _jarr(self.stderr),
            "tvalues": _jarr(self.tvalues), "pvalues": _jarr(self.pvalues),
            "conf_int_95": [_jarr(r) for r in ci],
            "predictors": list(self.predictor_names), "vif": _jarr(self.vif),
            "residual_sd": _jnum(self.residual_sd), "r_squared": _jnum(self.r_squared),
            "adj_r_squared": _jnum(self.adj_r_squared),
            "f_statistic": _jnum(self.f_statistic), "f_pvalue": _jnum(self.f_pvalue),
            "loglik": _jnum(self.loglik), "aic": _jnum(self.aic), "bic": _jnum(self.bic),
            "nobs": int(self.nobs), "dof": _jnum(self.dof), "dof_model": _jnum(self.dof_model),
            "rank": int(self.rank), "intercept": bool(self.intercept), "weighted": self.weighted,
            "condition_number": _jnum(self.condition_number),
            "condition_number_raw": _jnum(self.condition_number_raw),
            "health": self.health.to_dict(),
            "collinearity": self.collinearity.to_dict(),
            "ridge": None if self.ridge is None else self.ridge.to_dict(),
        }


def _t_quantile(level: float, dof: float) -> float:
    try:
        level = float(level)
    except (TypeError, ValueError):
        raise InputError(f"level: expected a number between 0 and 1, got {level!r}") from None
    if not 0 < level < 1:
        raise InputError(f"level: must be strictly between 0 and 1 (e.g. 0.95), got {level}")
    if not dof > 0:
        return math.nan
    return float(stats.t.ppf(0.5 + level / 2, dof))


# --------------------------------------------------------------------------- inputs
@dataclasses.dataclass
class _Design:
    """The validated problem: predictors, response, row whitening."""

    x: np.ndarray            # (n, k) predictors as given (float64, never written)
    y: np.ndarray            # (n,)
    names: list              # predictor names
    intercept: bool
    sqrt_w: np.ndarray | None
    factor: Any              # whiten.Factor of the error covariance, or None
    index: Any

    @property
    def n(self) -> int:
        return self.y.shape[0]

    @property
    def p(self) -> int:
        return self.x.shape[1] + int(self.intercept)

    @property
    def all_names(self) -> list:
        return ([INTERCEPT_NAME] if self.intercept else []) + list(self.names)

    @property
    def sum_log_sqrt_w(self) -> float:
        """``sum(log sqrt(w))`` = ``0.5 sum(log w)``, the weights' term of the log-likelihood."""
        return 0.0 if self.sqrt_w is None else float(np.sum(np.log(self.sqrt_w)))

    def raw_rows(self, a: int, b: int) -> np.ndarray:
        xb = self.x[a:b]
        if self.intercept:
            return np.column_stack([np.ones(b - a), xb])
        return np.array(xb, dtype=np.float64, order="C", copy=True)

    def whitened(self) -> tuple[np.ndarray, np.ndarray]:
        """Whole whitened design and response (dense path)."""
        a = self.raw_rows(0, self.n)
        b = self.y.copy()
        if self.sqrt_w is not None:
            a *= self.sqrt_w[:, None]
            b *= self.sqrt_w
        elif self.factor is not None:
            a = self.factor.solve_lower(a)
            b = self.factor.solve_lower(b)
        return a, b

    def augmented_blocks(self, rows: int):
        """C-ordered row blocks of ``[design | y]`` (weights applied), one copy each."""
        p = self.p
        k0 = int(self.intercept)
        for a in range(0, self.n, rows):
            b = min(a + rows, self.n)
            blk = np.empty((b - a, p + 1))
            if self.intercept:
                blk[:, 0] = 1.0
            blk[:, k0:p] = self.x[a:b]
            blk[:, p] = self.y[a:b]
            if self.sqrt_w is not None:
                blk *= self.sqrt_w[a:b, None]
            yield a, b, blk

    def whitened_blocks(self, rows: int):
        """Row blocks (a, b, design block, response block); weights only (no GLS)."""
        for a in range(0, self.n, rows):
            b = min(a + rows, self.n)
            blk = self.raw_rows(a, b)
            yb = self.y[a:b].copy()
            if self.sqrt_w is not None:
                blk *= self.sqrt_w[a:b, None]
                yb *= self.sqrt_w[a:b]
            yield a, b, blk, yb


def _prepare(x, y, intercept, weights, error_cov) -> _Design:
    xv, names, index = as_float_array(x, name="X", ndim=(1, 2))
    if xv.ndim == 1:
        xv = xv[:, None]
        if names is None:
            nm = getattr(x, "name", None)
            names = [str(nm)] if nm is not None else None
    if names is None:
        names = [f"x{j}" for j in range(xv.shape[1])]
    if INTERCEPT_NAME in names:
        raise InputError(f"X: a column is named {INTERCEPT_NAME!r}, which whiten reserves for the intercept; "
                         "rename it, or pass intercept=False")
    yv, _, _ = as_float_array(y, name="y", ndim=(1, 2))
    if yv.ndim == 2:
        if yv.shape[1] != 1:
            raise InputError(f"y: expected one response column, got shape {yv.shape}")
        yv = yv[:, 0]
    n = xv.shape[0]
    if yv.shape[0] != n:
        raise InputError(f"y: has {yv.shape[0]} rows but X has {n}; they must describe the same rows")
    p = xv.shape[1] + int(bool(intercept))
    if p == 0:
        raise InputError("X: no columns and intercept=False: there is nothing to fit")
    if n < p:
        raise InputError(f"X: {n} rows cannot determine {p} coefficients; give at least {p} rows "
                         "or fewer columns")
    if weights is not None and error_cov is not None:
        raise InputError("give weights or error_cov, not both (weights w are error_cov = diag(1/w))")
    sqrt_w = None
    if weights is not None:
        wv, _, _ = as_float_array(weights, name="weights", ndim=(1,))
        if wv.shape[0] != n:
            raise InputError(f"weights: has {wv.shape[0]} entries but X has {n} rows")
        bad = np.flatnonzero(wv <= 0)
        if bad.size:
            raise InputError(f"weights: row {int(bad[0])} has weight {wv[bad[0]]:g}; weights must be positive "
                             "(to exclude a row, remove it explicitly)")
        sqrt_w = np.sqrt(wv)
    factor = None
    if error_cov is not None:
        from ..linalg import cholesky

        shape = np.shape(error_cov)
        if shape != (n, n):
            raise InputError(f"error_cov: expected shape ({n}, {n}) for {n} rows, got {shape}")
        factor = cholesky(error_cov)
    return _Design(xv, yv, list(names), bool(intercept), sqrt_w, factor, index)


# --------------------------------------------------------------------------- solvers
@dataclasses.dataclass
class _Solution:
    cols: list            # fitted design columns (indices into all_names)
    x: np.ndarray         # scaled coefficients of the fitted columns
    r: np.ndarray         # R of the fitted scaled columns
    wresid: np.ndarray    # whitened residuals
    q: np.ndarray | None
    steps: int
    converged: bool
    last_corr: float
    arithmetic: str
    path: str
    notes: list
    var_rows: np.ndarray | None = None   # minimum-norm: rows whose squared norms are the variances


def _refine_dense(a, b, q, r, kind, max_steps):
    """Björck (1967) refinement of the augmented system with thin Q; returns x, resid, steps, conv, corr."""
    x = tri_solve(r, q.T @ b)
    ops = _extended.ExtendedProducts(a, kind)
    res = ops.residual(x, b, None)
    steps, conv, corr = 0, False, math.nan
    prev = math.inf
    for _ in range(max_steps):
        f = ops.residual(x, b, res)
        g = -ops.gradient(res)
        h = tri_solve(r, g, trans=True)
        d = q.T @ f
        dx = tri_solve(r, d - h)
        dr = f - q @ (d - h)
        x = x + dx
        res = res + dr
        steps += 1
        xn = float(np.max(np.abs(x))) if x.size else 0.0
        corr = float(np.max(np.abs(dx))) / xn if xn > 0 else 0.0
        if corr <= 2 * _EPS:
            conv = True
            break
        if corr > 0.5 * prev:  # no longer contracting: stagnation at the arithmetic's limit
            conv = corr < 1e-10
            break
        prev = corr
    return x, res, steps, conv, corr


def _dense_solution(a, b, s, tol, policy, all_names, max_steps, refine, notes, path="householder"):
    aS = a * s[None, :]
    q, r = householder_thin(aS)
    aside = sequential_dependence(r, tol)
    kept = [j for j in range(r.shape[1]) if j not in aside]
    r_full = r
    if aside:
        q, r = householder_thin(aS[:, kept])
    if kept and tri_rcond(r) < tol:
        extra = greedy_rank_drop(r, kept, tol)
        if extra:
            notes.append("rank in doubt after the sequential test; the singular values of R settled it")
            path += "+svd-rank"
            aside = sorted(set(aside) | set(extra))
            kept = [j for j in range(r_full.shape[1]) if j not in aside]
            q, r = householder_thin(aS[:, kept])
    if aside and policy == "minimum-norm":
        return r_full, aside, _minimum_norm(aS, b, tol=tol, path=path, notes=notes)
    kind = "compensated"
    if refine:
        x, res, steps, conv, corr = _refine_dense(aS[:, kept], b, q, r, kind, max_steps)
    else:
        x = tri_solve(r, q.T @ b)
        res = b - aS[:, kept] @ x
        steps, conv, corr, kind = 0, False, math.nan, "none"
    sol = _Solution(kept, x, r, res, q, steps, conv, corr, kind, path, notes)
    return r_full, aside, sol


def _minimum_norm(aS, b, tol, path, notes):
    """Minimum-norm solution over all columns, with the columns scaled to exactly unit length.

    In those coordinates the answer does not depend on the units of the
    predictors (the raw minimum-norm solution does). Truncated SVD of the R of
    the design (p x p), singular values at or below ``tol * s_max`` dropped.
    """
    q, r = householder_thin(aS)
    cn = np.sqrt(np.einsum("ij,ij->j", r, r))
    cn = np.where(cn > 0, cn, 1.0)
    u, sv, vt = np.linalg.svd(r / cn[None, :])
    k = int(np.sum(sv > tol * sv[0]))
    c = u[:, :k].T @ (q.T @ b)
    x = (vt[:k].T @ (c / sv[:k])) / cn
    res = _extended.residual(aS, x, b, None, "compensated")
    notes.append("minimum-norm solution with unit-length columns (truncated SVD of R; not refined)")
    var_rows = (vt[:k] / sv[:k, None]) / cn[None, :]  # inverse-ok: squared column norms are reported variances only
    return _Solution(list(range(aS.shape[1])), x, r, res, None, 0, False, math.nan, "compensated",
                     path + "+minimum-norm", notes, var_rows=var_rows)


def _blocked_solution(design: _Design, tol, policy, max_steps, refine, notes):
    """Tall-skinny QR of [A y] in row blocks, semi-normal-equation refinement; None to hand over."""
    rows = max(int(current().block_rows), 4 * (design.p + 1))
    p = design.p

    def blocks():
        for _, _, blk in design.augmented_blocks(rows):
            yield blk

    raug = cholqr2_r(blocks, p + 1)
    path = "blocked-cholqr2"
    if raug is None:
        # ill-conditioned, or an exact fit ([A y] singular): Householder on every block
        raug = tsqr_r(blocks(), p + 1)
        path = "blocked-tsqr"

    def make_pass(kept, sw, kind):
        return _local_residual_pass(design, rows, kept, sw, kind)

    return solution_from_r(raug, p, path, tol, policy, max_steps, refine, notes, make_pass)


def _local_residual_pass(design: _Design, rows: int, kept, sw, kind):
    """``residual_pass(x, want_grad) -> (whitened residuals, A^T r or None)`` over in-memory rows."""
    p = design.p

    def residual_pass(xc, want_grad):
        if not want_grad and kind == "none":
            # plain double: one matrix-vector product over the whole design, no copies
            beta = xc * sw
            k0 = int(design.intercept)
            pred = [c - k0 for c in kept if c >= k0]
            fit_ = design.x[:, pred] @ beta[len(kept) - len(pred):] if len(pred) < design.x.shape[1] \
                else design.x @ beta[len(kept) - len(pred):]
            if design.intercept and 0 in kept:
                fit_ = fit_ + beta[0]
            res = design.y - fit_
            if design.sqrt_w is not None:
                res = res * design.sqrt_w
            return res, None
        # one pass: residual b - A x and gradient A^T r, both in extended precision when refining
        res = np.empty(design.n)
        grad = np.zeros(len(kept))
        for a0, b0, blk in design.augmented_blocks(rows):
            ab = blk[:, kept] * sw[None, :]
            yb = blk[:, p]
            if kind == "none":
                rb = yb - ab @ xc
            else:
                rb = _extended.residual(ab, xc, yb, None, kind)
            res[a0:b0] = rb
            if want_grad:
                grad += _extended.gradient(ab, rb, kind) if kind != "none" else ab.T @ rb
        return res, grad

    return residual_pass


def solution_from_r(raug, p, path, tol, policy, max_steps, refine, notes, make_pass):
    """Finish a blocked fit from the R factor of ``[A y]`` (shape (p+1, p+1) or (p, p+1)).

    ``make_pass(kept, column_scale, arithmetic)`` returns the residual pass over
    the rows (in memory, or on a dask cluster). Returns ``(s, r_full, aside,
    solution or None)``; None hands over to the dense Householder route.
    """
    norms = np.sqrt(np.einsum("ij,ij->j", raug[:, :p], raug[:, :p]))
    s = pow2_column_scale(norms)
    # power-of-two column scaling is exact, so R of the scaled design is R * s
    r_full = raug[:p, :p] * s[None, :]
    aside = sequential_dependence(r_full, tol)
    kept = [j for j in range(p) if j not in aside]
    raug_s = np.column_stack([r_full, raug[:p, p:]])
    if raug.shape[0] > p:
        raug_s = np.vstack([raug_s, np.concatenate([np.zeros(p), raug[p:, p]])[None, :]])
    sub = raug_s[:, kept + [p]]
    rk = qr_r(sub)[: len(kept) + 1]
    sgn = np.where(np.diag(rk) < 0, -1.0, 1.0)
    rk = rk * sgn[:, None]
    r = rk[: len(kept), : len(kept)]
    z = rk[: len(kept), len(kept)]
    if policy == "minimum-norm" and aside:
        return s, r_full, aside, None
    rc = tri_rcond(r)
    if refine == "auto":
        # Many rows: refine only when fewer than BLOCKED_AUTO_DIGITS digits would survive;
        # beyond that the statistical uncertainty dwarfs the rounding error.
        zn = float(np.linalg.norm(z))
        rho = float(abs(rk[len(kept), len(kept)])) if rk.shape[0] > len(kept) else 0.0
        kap = 1.0 / max(rc, 1e-300)
        bound = _EPS * (kap + kap * kap * (rho / zn if zn > 0 else math.inf))
        refine = bool(bound > 10.0 ** -BLOCKED_AUTO_DIGITS)
        if not refine:
            notes.append(f"refinement skipped on the many-row path: error bound {bound:.2g} "
                         f"(about {-math.log10(max(bound, _EPS)):.1f} digits) is far below the statistical "
                         "uncertainty; pass refine=True to refine anyway")
    if rc < tol or (refine and 1.0 / max(rc, 1e-300) > BLOCKED_MAX_COND):
        notes.append(f"blocked QR showed a scaled 1-norm condition near {1 / max(rc, 1e-300):.2g}; "
                     f"above {BLOCKED_MAX_COND:g} the semi-normal refinement would not converge, "
                     "so the fit was redone by Householder QR with an explicit thin Q (memory n*p)")
        return s, r_full, aside, None
    x = tri_solve(r, z)
    kind = _extended.extended_kind("longdouble") if refine else "none"
    residual_pass = make_pass(kept, s[kept], kind)
    steps, conv, corr, prev = 0, False, math.nan, math.inf
    res, grad = residual_pass(x, refine)
    if refine:
        for _ in range(max_steps):
            dx = tri_solve(r, tri_solve(r, grad, trans=True))
            x = x + dx
            steps += 1
            xn = float(np.max(np.abs(x))) if x.size else 0.0
            corr = float(np.max(np.abs(dx))) / xn if xn > 0 else 0.0
            res, grad = residual_pass(x, True)
            if corr <= 2 * _EPS:
                conv = True
                break
            if corr > 0.5 * prev:
                conv = corr < 1e-10
                break
            prev = corr
    sol = _Solution(kept, x, r, res, None, steps, conv, corr, kind, path, notes)
    return s, r_full, aside, sol


# --------------------------------------------------------------------------- main entry
def fit_linear(
    X: Any,
    y: Any,
    *,
    intercept: bool = True,
    weights: Any = None,
    error_cov: Any = None,
    ridge: Any = None,
    standardize: bool = False,
    rank_policy: str = "nan",
    rank_tol: float | None = None,
    method: str = "auto",
    refine: Any = "auto",
    ridge_grid: Any = None,
) -> LinearFit:
    """Least-squares fit of ``y`` on ``X`` (plus an intercept) with the digits it can be trusted to.

    Parameters
    ----------
    X : array_like or DataFrame, shape (n, k) or (n,)
        Predictors; DataFrame column names are kept (otherwise ``x0, x1, ...``).
    y : array_like or Series, shape (n,)
    intercept : bool
        Add a constant column first, named ``"(intercept)"``.
    weights : array_like, shape (n,), optional
        Positive weights ``w_i`` (errors with variance ``sigma^2 / w_i``): weighted least squares.
    error_cov : array_like, shape (n, n), optional
        Error covariance (up to the factor ``sigma^2``): generalised least squares by
        whitening rows with its Cholesky factor (:func:`whiten.cholesky`).
    ridge : None, float, "gcv" or "loocv"
        Penalty ``lambda`` on the predictors (never on the intercept), or a criterion
        that chooses it on a log grid: generalised cross-validation (Golub, Heath &
        Wahba, 1979) or leave-one-out cross-validation, both by closed forms
        through the SVD. See :func:`whiten.regression.ridge.fit_ridge`.
    standardize : bool
        Ridge only: penalise the predictors scaled to unit (population, and for
        WLS/GLS whitened) standard deviation ``sqrt(sum (x - mean)^2 / n)``, so that
        ``lambda`` does not depend on their units. Coefficients
        are always reported in the original units.
    rank_policy : {"nan", "drop", "raise", "minimum-norm"}
        What to do when a column is (numerically) a linear combination of the columns
        before it: report its coefficient as NaN (default), leave it out of the
        results, raise, or return the minimum-norm solution over all columns (in
        unit-length column coordinates, so it does not depend on units).
    rank_tol : float, optional
        A column is set aside when its distance from the span of the earlier
        columns is at most ``rank_tol * max|r_ii|`` of the equilibrated design.
        Default ``10 * max(n, p) * eps``.
    method : {"auto", "householder", "blocked"}
        ``"auto"``: Householder with an explicit thin Q up to 2e6 design cells,
        the blocked many-row path beyond (CholeskyQR2, or Householder TSQR when
        ill-conditioned; always Householder for GLS).
    refine : {"auto", True, False}
        Iterative refinement. ``"auto"`` refines on the Householder path always and
        on the blocked path only when the error bound promises fewer than 8 digits.
    ridge_grid : array_like, optional
        Penalties to try for ``ridge="gcv"``/``"loocv"``.

    Returns
    -------
    LinearFit

    Raises
    ------
    InputError
        Bad shapes, non-finite or non-numeric values (named by row and column),
        non-positive weights, fewer rows than coefficients, an unknown option, or
        a rank-deficient design with ``rank_policy="raise"``.
    NotPositiveDefiniteError
        ``error_cov`` cannot be factored.

    Warns
    -----
    RankDeficiencyWarning
        Columns set aside, each named with the columns it depends on.
    ConditioningWarning
        Fewer than ``16 - digits_warn`` digits of the coefficients can be trusted.

    Notes
    -----
    Steps and costs (n rows, p coefficients): whitening O(n p) (O(n^2 p) for a dense
    error covariance); QR 4 n p^2 flops with the thin Q (3 n p^2 for CholeskyQR2 on
    the many-row path); each refinement step O(n p) in compensated arithmetic (Ogita,
    Rump & Oishi, 2005); standard errors O(p^3) by a triangular solve. Collinearity diagnostics use the SVD of the p x p R.
    No n x n matrix is formed except the user's ``error_cov``.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> t = np.linspace(0.0, 1.0, 7)
    >>> fit = whiten.fit_linear(np.column_stack([t, t**2]), 1 + 2*t - 3*t**2)
    >>> bool(np.allclose(fit.coef, [1, 2, -3], rtol=0, atol=1e-13))
    True
    """
    if rank_policy not in RANK_POLICIES:
        raise InputError(f"rank_policy: choose one of {list(RANK_POLICIES)}, got {rank_policy!r}")
    if method not in METHODS:
        raise InputError(f"method: choose one of {list(METHODS)}, got {method!r}")
    if refine not in ("auto", True, False):
        raise InputError(f"refine: choose 'auto', True or False, got {refine!r}")
    from ..parallel.dask import is_dask_collection

    if is_dask_collection(X) or is_dask_collection(y):
        # the dask engine: R of [1 X y] reduced on the workers, residual passes there too
        unused = [k for k, v in (("error_cov", error_cov), ("ridge", ridge))
                  if v is not None] + (["standardize"] if standardize else [])
        if unused:
            raise InputError(f"{', '.join(unused)}: not available with dask input; compute the arrays first "
                             "(weights are: pass them as a dask array or Series aligned with the rows)")
        from ..parallel.dask import fit_linear_dask

        return fit_linear_dask(X, y, intercept=intercept, weights=weights, rank_policy=rank_policy,
                               rank_tol=rank_tol, refine=refine)
    design = _prepare(X, y, intercept, weights, error_cov)
    if ridge is not None:
        from .ridge import fit_ridge

        return fit_ridge(design, ridge, standardize=standardize, grid=ridge_grid)
    if standardize:
        raise InputError("standardize=True applies to ridge fits only; pass ridge=... or leave it False")
    n, p = design.n, design.p
    tol = 10.0 * max(n, p) * _EPS if rank_tol is None else float(rank_tol)
    if not 0 < tol < 1:
        raise InputError(f"rank_tol: must be between 0 and 1, got {rank_tol!r}")
    names = design.all_names
    notes: list[str] = []
    use_blocked = method == "blocked" or (method == "auto" and n * p > DENSE_CELLS and design.factor is None)
    if method == "blocked" and design.factor is not None:
        raise InputError("method='blocked' does not support error_cov (GLS whitening needs all rows at once)")
    sol = None
    if use_blocked:
        s, r_full, aside, sol = _blocked_solution(design, tol, rank_policy, 3, refine, notes)
    if sol is None:
        a, b = design.whitened()
        norms = np.sqrt(np.einsum("ij,ij->j", a, a))
        s = pow2_column_scale(norms)
        path = "blocked-tsqr->householder" if use_blocked else "householder"
        r_full, aside, sol = _dense_solution(a, b, s, tol, rank_policy, names, MAX_REFINE, refine is not False,
                                             notes, path=path)
    return _assemble(design, sol, s, r_full, aside, tol, rank_policy)


def _assemble(design: _Design, sol: _Solution, s, r_full, aside, tol, policy, *, rss: float | None = None,
              vectors: tuple | None = None) -> LinearFit:
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
    ll = _loglik(design, rss, n)
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
        fitted = _fitted(design, sol.cols, beta)
        resid = design.y - fitted
    else:
        resid = sol.wresid / design.sqrt_w if design.sqrt_w is not None else sol.wresid.copy()
        fitted = design.y - resid
    # collinearity and condition numbers
    coll = collinearity_report(r_full, names, exact_tol=tol, exact=exact)
    cond = float(coll.condition_indices[-1]) if coll.condition_indices.size else 1.0
    cond_raw = condition_2(r_full / s[None, :])
    if sol.var_rows is None:
        cond_fit = _scaled_condition(sol.r)
    else:
        kept = [j for j in range(p) if j not in aside]
        cond_fit = _scaled_condition(qr_r(r_full[:, kept])[: len(kept), : len(kept)])
    vif = _vif(design, sol, r_full, aside, dep_support)
    # error bound: eps * (k + k^2 tan theta)
    axn = math.sqrt(ess + (float(rx[0] ** 2) if (design.intercept and rx is not None) else 0.0))
    tan_t = math.sqrt(rss) / axn if axn > 0 else math.inf
    bound = _EPS * (cond_fit + cond_fit ** 2 * tan_t)
    digits = float(min(15.9, max(0.0, -math.log10(bound)))) if bound > 0 else 15.9
    if sol.steps > 0:
        lc = sol.last_corr if math.isfinite(sol.last_corr) else 1.0
        solved = 15.6 if sol.converged and lc <= 2 * _EPS else float(min(15.6, max(0.0, -math.log10(max(lc, _EPS)))))
    else:
        solved = digits
    health = FitHealth(
        path=sol.path, condition_number=cond, condition_number_raw=cond_raw, condition_number_fitted=cond_fit,
        error_bound=bound, digits_trusted=digits, digits_solved=solved, refinement_steps=sol.steps,
        refinement_converged=bool(sol.converged), last_correction=sol.last_corr,
        residual_arithmetic=sol.arithmetic, rank=rank, columns=p, rank_tol=tol,
        set_aside=tuple(names[j] for j in aside), dependencies=tuple(dep_sentences), notes=tuple(sol.notes))
    opts = current()
    if 15.95 - digits > opts.digits_warn:
        warn(ConditioningWarning,
             f"only about {digits:.1f} significant digits of the coefficients survive a change of one unit in "
             f"the last digit of the data (scaled condition number {cond_fit:.3g}, residual/fit ratio "
             f"{tan_t:.2g}, first-order error bound {bound:.2g}); for the data exactly as given the solve "
             f"reached about {solved:.1f} digits ({sol.steps} refinement steps). "
             + (" ".join(s.rstrip(".") + "." for s in coll.sentences) + " " if coll.sentences else "")
             + "Consider removing near-duplicate columns, centring polynomial terms, or ridge=...")
    weighted = "gls" if design.factor is not None else ("wls" if design.sqrt_w is not None else "none")
    return LinearFit(
        names=tuple(out_names), coef=_ro(coef), stderr=_ro(stderr), tvalues=_ro(tvals), pvalues=_ro(pvals),
        residual_sd=sigma, r_squared=r2, adj_r_squared=adj, f_statistic=float(fstat), f_pvalue=float(fp),
        loglik=ll, aic=aic, bic=bic, nobs=n, dof=dof, dof_model=dof_model, rank=rank, vif=_ro(vif),
        collinearity=coll, fitted=fitted if vectors is not None else _ro(fitted),
        residuals=resid if vectors is not None else _ro(resid), health=health,
        intercept=design.intercept, predictor_names=tuple(design.names), weighted=weighted,
        _r=fit_r_for_pred, _scale=sc, _fit_cols=tuple(sol.cols), _q=sol.q, _wresid=sol.wresid,
        _design=design)


def _scaled_condition(r: np.ndarray) -> float:
    norms = np.sqrt(np.einsum("ij,ij->j", r, r))
    return condition_2(r / np.where(norms > 0, norms, 1.0)[None, :])


def _ro(a: np.ndarray) -> np.ndarray:
    a = np.asarray(a, dtype=np.float64)
    a.setflags(write=False)
    return a


def _fitted(design: _Design, cols, beta) -> np.ndarray:
    out = np.empty(design.n)
    rows = max(int(current().block_rows), 1)
    for a in range(0, design.n, rows):
        b = min(a + rows, design.n)
        out[a:b] = design.raw_rows(a, b)[:, cols] @ beta
    return out


def _ess_minimum_norm(design: _Design, sol: _Solution, s) -> float:
    a, b = design.whitened()
    fw = (a * s[None, :]) @ sol.x
    if design.intercept:
        w1 = a[:, 0]
        m = float(w1 @ fw) / float(w1 @ w1)
        d = fw - m * w1
        return float(d @ d)
    return float(fw @ fw)


def _loglik(design: _Design, rss: float, n: int) -> float:
    if rss <= 0:
        return math.inf
    ll = -0.5 * n * (math.log(2 * math.pi * rss / n) + 1.0)
    if design.sqrt_w is not None:
        ll += design.sum_log_sqrt_w  # 0.5 * sum(log w)
    elif design.factor is not None:
        ll -= 0.5 * design.factor.logdet()
    return ll


def _vif(design: _Design, sol: _Solution, r_full, aside, dep_support) -> np.ndarray:
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
