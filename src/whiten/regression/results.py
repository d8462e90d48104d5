"""Results of a least-squares fit: :class:`LinearFit`, its :class:`FitHealth` and :class:`RidgeInfo`.

A :class:`LinearFit` answers questions after the fit (intervals, predictions,
influence, tables) from what the solver left it: the R factor of the fitted
columns in scaled coordinates, the column scaling and the whitened residuals.
Nothing here refits or forms a covariance matrix.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
from scipy import stats

from .._numerics import json_number, json_ready
from .._validate import as_rows
from ..errors import InputError
from ..linalg.qr import tri_solve
from .design import INTERCEPT_NAME
from .diagnostics import CollinearityReport

__all__ = ["FitHealth", "ErrorCovHealth", "RidgeInfo", "LinearFit", "t_quantile"]


@dataclasses.dataclass(frozen=True)
class ErrorCovHealth:
    """Numerical health of the weights or error covariance of a WLS/GLS fit.

    Attributes
    ----------
    kind : str
        ``"weights"`` (WLS) or ``"matrix"`` (GLS).
    condition : float
        Condition estimate of the covariance with its diagonal scaled to one
        (``1 / rcond_scaled``; 1 for weights, whose diagonal scaling is exact).
    condition_raw : float
        The same without scaling (``max(w) / min(w)`` for weights).
    digits_lost : float
        ``log10(condition)``: digits a solve with the covariance may lose.
    jitter : float
        Added to the diagonal before factoring (0 when none).
    jitter_effect : float
        Relative change of the coefficients caused by that jitter (first order).
    """

    kind: str
    condition: float
    condition_raw: float
    digits_lost: float
    jitter: float
    jitter_effect: float

    def to_dict(self) -> dict:
        return json_ready(dataclasses.asdict(self))


@dataclasses.dataclass(frozen=True)
class FitHealth:
    """Numerical health of a least-squares fit.

    Attributes
    ----------
    method : str
        What ran, e.g. ``"householder"`` or ``"blocked-tsqr"``, plus any hand-over.
    condition : float
        2-norm condition number of the design (all columns, intercept included)
        with columns scaled to unit length (Belsley's convention). This is the
        one that governs accuracy.
    condition_raw : float
        The same for the design as given (units matter: a column in
        nanometres next to one in kilometres makes this large harmlessly).
    condition_fitted : float
        Scaled condition number of the columns actually fitted (after any were
        set aside).
    error_bound : float
        *Sensitivity to the data*: first-order bound on the relative change
        (max-norm, unit-length columns) of the coefficients when every input
        (``X``, ``y``, weights, error covariance) changes by one unit in its last
        digit: the componentwise condition of the problem posed times ``eps``
        (see :mod:`whiten.regression.accuracy`). Where the rows are not at hand
        (dask input) the normwise bound ``eps * (k + k^2 * tan(theta))`` (Wedin, 1973).
    digits_trusted : float
        Statement (a), *digits that survive the data's last digit*:
        ``-log10(error_bound)``, capped at 15.65. A statement about the problem,
        not the computation.
    digits_solved : float
        Statement (b), *digits computed right for the data as given*:
        ``-log10(solve_error)``, capped at 15.65. With exactly known data
        (integers, designed levels) this is the figure that counts.
    solve_error : float
        Estimated relative error (same norm) of the computed coefficients for the
        data exactly as given, every rounding included: the last refinement
        correction when refinement in the given data converged; otherwise the
        roundings of the row weighting/whitening (bounded through the
        sensitivity) and any jitter's effect.
    error_cov : ErrorCovHealth or None
        Health of the weights or error covariance (None for OLS).
    digits_std_error, digits_t_stat, digits_p_value, digits_interval, digits_vif, digits_loglik : float
        Estimated correct significant digits of those results for the data as
        given (the smallest over coefficients): never more than the solve that
        produced them. NaN where the quantity is not reported.
    refinement_steps : int
    refinement_converged : bool
    last_correction : float
        Relative size of the last refinement correction (max-norm).
    residual_arithmetic : str
        ``"compensated"`` (double-double by error-free transformations),
        ``"longdouble"`` or ``"none"`` (refinement skipped).
    rank : int
    n_columns : int
        Design columns (intercept included).
    rank_tol : float
    set_aside : tuple of str
        Columns not fitted because they depend on earlier ones.
    dependencies : tuple of str
        One plain sentence per set-aside column.
    notes : tuple of str
    """

    method: str
    condition: float
    condition_raw: float
    condition_fitted: float
    error_bound: float
    digits_trusted: float
    digits_solved: float
    refinement_steps: int
    refinement_converged: bool
    last_correction: float
    residual_arithmetic: str
    rank: int
    n_columns: int
    rank_tol: float
    set_aside: tuple
    dependencies: tuple
    notes: tuple
    solve_error: float = float("nan")
    error_cov: ErrorCovHealth | None = None
    digits_std_error: float = float("nan")
    digits_t_stat: float = float("nan")
    digits_p_value: float = float("nan")
    digits_interval: float = float("nan")
    digits_vif: float = float("nan")
    digits_loglik: float = float("nan")

    def to_dict(self) -> dict:
        d = {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
        return {k: (list(v) if isinstance(v, tuple) else (v.to_dict() if hasattr(v, "to_dict") else json_number(v)))
                for k, v in d.items()}



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
            "grid": None if self.grid is None else _numbers(self.grid),
            "scores": None if self.scores is None else _numbers(self.scores),
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
    coef, std_error, t_stat, p_value : ndarray, shape (k,)
        Estimates, their standard errors, ``coef / std_error`` and its two-sided
        p-value (Student t on ``dof``).
    residual_sd : float
        ``sqrt(RSS / dof)`` in whitened units (for WLS/GLS the scale of a unit-weight error).
    r_squared, adj_r_squared : float
        Centred when there is an intercept, uncentred otherwise (the convention
        of NIST StRD and of common practice); for WLS/GLS on the whitened model.
    f_statistic, f_p_value : float
        Test that every coefficient except the intercept is zero.
    loglik, aic, bic : float
        Gaussian log-likelihood at the maximum-likelihood error variance;
        ``aic = -2 loglik + 2 rank``, ``bic = -2 loglik + log(n) rank``.
    n_rows : int
        Rows fitted.
    dof : int
        Residual degrees of freedom ``n - rank`` (for ridge ``n - effective dof``).
    dof_model : int
        ``rank`` minus 1 for the intercept.
    rank : int
    condition, condition_raw : float
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
    std_error: np.ndarray
    t_stat: np.ndarray
    p_value: np.ndarray
    residual_sd: float
    r_squared: float
    adj_r_squared: float
    f_statistic: float
    f_p_value: float
    loglik: float
    aic: float
    bic: float
    n_rows: int
    dof: float
    dof_model: float
    rank: int
    vif: np.ndarray
    collinearity: CollinearityReport
    fitted: np.ndarray
    residuals: np.ndarray
    health: FitHealth
    intercept: bool
    columns: tuple
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
        return (f"LinearFit(n_rows={self.n_rows}, rank={self.rank}/{h.n_columns}, r_squared={self.r_squared:.6g}, "
                f"residual_sd={self.residual_sd:.6g}, condition={h.condition:.3g}, "
                f"digits_trusted={h.digits_trusted:.1f}, digits_solved={h.digits_solved:.1f}, method={h.method!r}"
                + (f", ridge={self.ridge.penalty:.4g}" if self.ridge is not None else "") + ")")

    # ------------------------------------------------------------ simple views
    @property
    def condition(self) -> float:
        return self.health.condition

    @property
    def condition_raw(self) -> float:
        return self.health.condition_raw

    def coef_interval(self, coverage: float = 0.95) -> np.ndarray:
        """Two-sided intervals ``coef -/+ t_{dof} * std_error`` with the given coverage, shape (k, 2).

        Column 0 is the lower end, column 1 the upper end, rows in the order of :attr:`names`.

        Raises
        ------
        InputError
            ``coverage`` not strictly between 0 and 1.
        """
        q = t_quantile(coverage, self.dof)
        return np.column_stack([self.coef - q * self.std_error, self.coef + q * self.std_error])

    def predict(self, x: Any, band: str | None = None, coverage: float = 0.95):
        """Predicted mean at new rows, optionally with a band around it.

        Parameters
        ----------
        x : array_like or DataFrame, shape (m, n_predictors) or (n_predictors,)
            Predictors only (the intercept is added). A DataFrame is matched by
            column name.
        band : {None, "mean", "new_row"}
            ``"mean"``: where the mean response at those predictors lies;
            ``"new_row"``: where one new row of unit weight will fall (adds
            ``residual_sd**2`` to the variance).
        coverage : float
            Probability the band is built to cover (default 0.95).

        Returns
        -------
        ndarray, shape (m,) when ``band`` is None; otherwise a DataFrame
        with columns ``fitted``, ``lower``, ``upper``, ``std_error``.

        Notes
        -----
        The standard error of ``a^T b`` is ``residual_sd * ||R^{-T} (s * a)||``, a
        triangular solve per row (no covariance matrix is formed). Columns set
        aside for collinearity are ignored: the prediction is valid where the new
        rows obey the same dependence.
        """
        if band not in (None, "mean", "new_row"):
            raise InputError(f"band: choose None, 'mean' or 'new_row', got {band!r}")
        rows, one, index = as_rows(x, len(self.columns), names=list(self.columns), name="x")
        design = np.column_stack([np.ones(rows.shape[0]), rows]) if self.intercept else rows
        cols = list(self._fit_cols)
        beta = self._coef_fitted()
        mean = design[:, cols] @ beta
        if band is None:
            return float(mean[0]) if one else mean
        if self._r is None:
            raise InputError("predict: bands are not available for this fit (ridge by criterion)")
        assert self._scale is not None  # every fit that keeps _r keeps its column scale too
        z = tri_solve(self._r, (design[:, cols] * self._scale[None, :]).T, trans=True)
        se = self.residual_sd * np.sqrt(np.einsum("ij,ij->j", z, z))
        if band == "new_row":
            se = np.sqrt(se ** 2 + self.residual_sd ** 2)
        q = t_quantile(coverage, self.dof)
        import pandas as pd

        return pd.DataFrame({"fitted": mean, "lower": mean - q * se, "upper": mean + q * se, "std_error": se},
                            index=index)

    def _coef_fitted(self) -> np.ndarray:
        full = dict(zip(self.names, self.coef))
        all_names = ([INTERCEPT_NAME] if self.intercept else []) + list(self.columns)
        return np.array([full[all_names[c]] for c in self._fit_cols])

    @property
    def influence_available(self) -> bool:
        """Whether :meth:`influence` applies: an unpenalised fit that kept its R (not ridge, not minimum-norm)."""
        return self.ridge is None and self._r is not None

    def influence(self):
        """Leverage, scaled and deleted residuals, Cook's distance, coefficient shifts (:func:`whiten.influence`)."""
        from .influence import influence

        return influence(self)

    def to_frame(self, coverage: float = 0.95):
        """One row per coefficient, indexed by ``name``, with the columns named like the attributes.

        Columns: ``coef``, ``std_error``, ``t_stat``, ``p_value``, ``lower`` and
        ``upper`` (the :meth:`coef_interval` with this ``coverage``) and ``vif``
        (NaN for the intercept).
        """
        import pandas as pd

        ci = self.coef_interval(coverage)
        vif = np.full(len(self.names), np.nan)
        pred_pos = {n: i for i, n in enumerate(self.columns)}
        for i, n in enumerate(self.names):
            if n in pred_pos:
                vif[i] = self.vif[pred_pos[n]]
        return pd.DataFrame({
            "coef": self.coef, "std_error": self.std_error, "t_stat": self.t_stat, "p_value": self.p_value,
            "lower": ci[:, 0], "upper": ci[:, 1], "vif": vif,
        }, index=pd.Index(list(self.names), name="name"))

    def to_dict(self, coverage: float = 0.95) -> dict:
        """JSON-serialisable summary (NaN as null, infinities as the strings "inf"/"-inf").

        The keys are the attribute names; ``coef_interval`` holds the
        ``coverage`` and the ``lower`` and ``upper`` ends per coefficient.
        """
        ci = self.coef_interval(coverage)
        return {
            "names": list(self.names),
            "coef": _numbers(self.coef), "std_error": _numbers(self.std_error),
            "t_stat": _numbers(self.t_stat), "p_value": _numbers(self.p_value),
            "coef_interval": {"coverage": float(coverage), "lower": _numbers(ci[:, 0]), "upper": _numbers(ci[:, 1])},
            "columns": list(self.columns), "vif": _numbers(self.vif),
            "residual_sd": json_number(self.residual_sd), "r_squared": json_number(self.r_squared),
            "adj_r_squared": json_number(self.adj_r_squared),
            "f_statistic": json_number(self.f_statistic), "f_p_value": json_number(self.f_p_value),
            "loglik": json_number(self.loglik), "aic": json_number(self.aic), "bic": json_number(self.bic),
            "n_rows": int(self.n_rows), "dof": json_number(self.dof), "dof_model": json_number(self.dof_model),
            "rank": int(self.rank), "intercept": bool(self.intercept), "weighted": self.weighted,
            "condition": json_number(self.condition),
            "condition_raw": json_number(self.condition_raw),
            "health": self.health.to_dict(),
            "collinearity": self.collinearity.to_dict(),
            "ridge": None if self.ridge is None else self.ridge.to_dict(),
        }


def t_quantile(coverage: float, dof: float) -> float:
    """Two-sided Student-t quantile for ``coverage`` (NaN when ``dof <= 0``); checks ``coverage``."""
    try:
        coverage = float(coverage)
    except (TypeError, ValueError):
        raise InputError(f"coverage: expected a number between 0 and 1, got {coverage!r}") from None
    if not 0 < coverage < 1:
        raise InputError(f"coverage: must be strictly between 0 and 1 (e.g. 0.95), got {coverage}")
    if not dof > 0:
        return math.nan
    return float(stats.t.ppf(0.5 + coverage / 2, dof))


def _numbers(a) -> list:
    """An array as a flat list of numbers in the project's JSON rule."""
    return json_ready(np.asarray(a, dtype=float).ravel())
