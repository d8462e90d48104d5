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
the dense Householder route and says so in ``health.method``. With
``refine="auto"`` the many-row path refines only when fewer than 8 digits would
otherwise survive (the statistical uncertainty of a fit on that many rows is far
larger than such rounding), and says so in ``health.notes``.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from .. import _engines
from .._numerics import EPS, column_norms, pow2_level_scale
from ..errors import InputError
from ..linalg.qr import pow2_column_scale
from .accuracy import refine_given
from .design import prepare_design
from .inference import assemble
from .results import LinearFit
from .ridge import fit_ridge
from .solve import MAX_REFINE, RANK_POLICIES, blocked_solution, dense_solution

__all__ = ["fit_linear", "METHODS", "DENSE_CELLS"]

METHODS = ("auto", "householder", "blocked")
#: above this many design cells (n * p) the blocked (tall-skinny) path is used
DENSE_CELLS = 2_000_000


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
    Rump & Oishi, 2005); standard errors O(p^3) by a triangular solve. Collinearity diagnostics use the SVD
    of the p x p R.
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
    engine = _engines.engine_for(X, y, weights)
    if engine is not None:
        # the dask engine: R of [1 X y] reduced on the workers, residual passes there too
        unused = [k for k, v in (("error_cov", error_cov), ("ridge", ridge))
                  if v is not None] + (["standardize"] if standardize else [])
        if unused:
            raise InputError(f"{', '.join(unused)}: not available with dask input; compute the arrays first "
                             "(weights are: pass them as a dask array or Series aligned with the rows)")
        return engine.fit_linear(X, y, intercept=intercept, weights=weights, rank_policy=rank_policy,
                               rank_tol=rank_tol, refine=refine)
    design = prepare_design(X, y, intercept, weights, error_cov)
    if ridge is None and standardize:
        raise InputError("standardize=True applies to ridge fits only; pass ridge=... or leave it False")
    # a response at an extreme scale is equilibrated by a power of two (exact) and the fit mapped back,
    # so its residual sum of squares is formed from numbers of order one
    cy = float(pow2_level_scale(np.array([float(np.max(np.abs(design.y))) if design.n else 0.0]))[0])
    work = design if cy == 1.0 else dataclasses.replace(design, y=design.y * cy)
    if ridge is not None:
        fit = fit_ridge(work, ridge, standardize=standardize, grid=ridge_grid)
    else:
        fit = _fit_design(work, rank_policy, rank_tol, method, refine)
    return fit if cy == 1.0 else _response_units(fit, cy, design)


def _response_units(fit: LinearFit, cy: float, design) -> LinearFit:
    """The fit of ``cy * y`` (cy a power of two) mapped back to the units of ``y``, exactly where a
    figure is linear in y; the log-likelihood and information criteria shift by ``n log cy``."""
    shift = fit.n_rows * math.log(cy)
    h = fit.health
    note = f"the response was equilibrated by 2**{int(round(math.log2(cy)))} (exact) and the results mapped back"
    ridge = fit.ridge
    if ridge is not None:
        with np.errstate(over="ignore", under="ignore"):
            ridge = dataclasses.replace(
                ridge, paths=None if ridge.paths is None else ridge.paths / cy,
                scores=None if ridge.scores is None else ridge.scores / (cy * cy))
    with np.errstate(over="ignore"):
        coef = fit.coef / cy
    over = np.flatnonzero(np.isfinite(fit.coef) & ~np.isfinite(coef))
    if over.size:
        names = ", ".join(repr(fit.names[j]) for j in over)
        raise InputError(f"a scale problem, not bad data: the coefficient(s) of {names} exceed the float64 range "
                         "(about 1.8e308) in the units given; express the response or those columns in other units "
                         "and fit again")
    return dataclasses.replace(
        fit, coef=_ro(coef), std_error=_ro(fit.std_error / cy), residual_sd=fit.residual_sd / cy,
        loglik=fit.loglik + shift, aic=fit.aic - 2 * shift, bic=fit.bic - 2 * shift,
        fitted=_ro(fit.fitted / cy), residuals=_ro(fit.residuals / cy), ridge=ridge,
        health=dataclasses.replace(h, notes=tuple(h.notes) + (note,)),
        _wresid=None if fit._wresid is None else fit._wresid / cy, _design=design)


def _ro(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=np.float64)
    a.setflags(write=False)
    return a


def _fit_design(design, rank_policy: str, rank_tol: float | None, method: str, refine: Any) -> LinearFit:
    """The (unpenalised) fit of a prepared design."""
    n, p = design.n, design.p
    tol = 10.0 * max(n, p) * EPS if rank_tol is None else float(rank_tol)
    if not 0 < tol < 1:
        raise InputError(f"rank_tol: must be between 0 and 1, got {rank_tol!r}")
    names = design.all_names
    notes: list[str] = []
    use_blocked = method == "blocked" or (method == "auto" and n * p > DENSE_CELLS and design.factor is None)
    if method == "blocked" and design.factor is not None:
        raise InputError("method='blocked' does not support error_cov (GLS whitening needs all rows at once)")
    sol = None
    if use_blocked:
        s, r_full, aside, sol = blocked_solution(design, tol, rank_policy, 3, refine, notes)
    if sol is None:
        a, b = design.whitened()
        norms = column_norms(a)
        s = pow2_column_scale(norms)
        path = "blocked-tsqr->householder" if use_blocked else "householder"
        r_full, aside, sol = dense_solution(a, b, s, tol, rank_policy, names, MAX_REFINE, refine is not False,
                                             notes, path=path)
        if refine is not False:
            sol = refine_given(design, s, sol, MAX_REFINE)
        else:  # measure, without applying, how far the unrefined solution is from the data as given
            probe = refine_given(design, s, sol, 1)
            if probe is not sol and math.isfinite(probe.last_corr):
                sol.error_estimate = float(probe.last_corr)
    return assemble(design, sol, s, r_full, aside, tol, rank_policy)
