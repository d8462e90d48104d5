"""Inputs of a least-squares fit: the validated design, response and row whitening.

:func:`prepare_design` checks ``X``, ``y``, ``weights`` and ``error_cov`` (shapes,
finiteness, positivity, names) and returns a :class:`Design`, which hands the
solvers the rows they need: the whole whitened design (dense path), or C-ordered
row blocks of ``[design | y]`` with the weights applied (many-row path).
Weights are applied as ``sqrt(w_i)`` per row; an error covariance by triangular
solves with its Cholesky factor (never by its inverse).
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np

from .._validate import as_float_array
from ..errors import InputError
from ..linalg import cholesky

__all__ = ["INTERCEPT_NAME", "Design", "prepare_design"]

INTERCEPT_NAME = "(intercept)"


@dataclasses.dataclass
class Design:
    """The validated problem: predictors, response, row whitening."""

    x: np.ndarray            # (n, k) predictors as given (float64, never written)
    y: np.ndarray            # (n,)
    names: list              # predictor names
    intercept: bool
    sqrt_w: np.ndarray | None
    factor: Any              # whiten.Factor of the error covariance, or None
    index: Any
    weights: np.ndarray | None = None    # the user's weights exactly as given (refinement uses them)
    error_cov: np.ndarray | None = None  # the user's error covariance exactly as given (float64)

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


def prepare_design(x, y, intercept, weights, error_cov) -> Design:
    """Validate the inputs of :func:`whiten.fit_linear` (messages name the argument, row and column)."""
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
    else:
        wv = None
    factor = None
    cov = None
    if error_cov is not None:
        shape = np.shape(error_cov)
        if shape != (n, n):
            raise InputError(f"error_cov: expected shape ({n}, {n}) for {n} rows, got {shape}")
        factor = cholesky(error_cov)
        cov = np.asarray(error_cov, dtype=np.float64)
    return Design(xv, yv, list(names), bool(intercept), sqrt_w, factor, index, weights=wv, error_cov=cov)
