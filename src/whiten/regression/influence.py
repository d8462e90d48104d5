"""Influence of each row on a least-squares fit, by closed leave-one-out formulas.

Everything comes from the thin Q of the (whitened, equilibrated) design and the
residuals: leverage ``h_i = ||q_i||^2`` (the hat-matrix diagonal without the
n x n hat matrix), and the leave-one-out identities of Cook & Weisberg (1982,
"Residuals and Influence in Regression", ch. 3) and Belsley, Kuh & Welsch
(1980, ch. 2). No row is actually removed and refitted.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from .._numerics import json_ready
from .._settings import current
from ..errors import InputError
from ..linalg.qr import tri_solve

__all__ = ["InfluenceReport", "influence"]


@dataclasses.dataclass(frozen=True, eq=False)
class InfluenceReport:
    """Per-row influence measures (in the whitened model for WLS/GLS).

    Attributes
    ----------
    leverage : ndarray, shape (n,)
        Diagonal of the hat matrix, ``||q_i||^2``.
    scaled_residual : ndarray, shape (n,)
        The residual over its own standard deviation, ``e_i / (s sqrt(1 - h_i))``
        (the internally studentized residual).
    deleted_residual : ndarray, shape (n,)
        The same with the residual SD ``s_(i)`` of the fit without row i,
        ``e_i / (s_(i) sqrt(1 - h_i))`` (the externally studentized residual;
        Student t on ``n - p - 1`` degrees of freedom under the model).
    cook_distance : ndarray, shape (n,)
        Cook's distance, ``e_i^2 h_i / (p s^2 (1 - h_i)^2)``.
    coef_shift : ndarray, shape (n, k)
        Change in each fitted coefficient when row i is left out, in units of
        its standard error computed without row i (Belsley, Kuh and Welsch's
        DFBETAS). In :meth:`to_frame` the columns are ``coef_shift:<name>``.
    names : tuple of str
        Coefficients of the ``coef_shift`` columns.
    index : pandas.Index or None
    """

    leverage: np.ndarray
    scaled_residual: np.ndarray
    deleted_residual: np.ndarray
    cook_distance: np.ndarray
    coef_shift: np.ndarray
    names: tuple
    index: object = None

    def to_frame(self):
        import pandas as pd

        df = pd.DataFrame({
            "leverage": self.leverage, "scaled_residual": self.scaled_residual,
            "deleted_residual": self.deleted_residual, "cook_distance": self.cook_distance,
        }, index=self.index)
        for j, nm in enumerate(self.names):
            df[f"coef_shift:{nm}"] = self.coef_shift[:, j]
        return df

    def to_dict(self) -> dict:
        return {k: json_ready(np.ravel(getattr(self, k)))
                for k in ("leverage", "scaled_residual", "deleted_residual", "cook_distance")}


def influence(fit) -> InfluenceReport:
    """Leverage, studentized residuals, Cook's distance and DFBETAS of a :class:`LinearFit`.

    Parameters
    ----------
    fit : LinearFit
        An unpenalised fit (not ridge, not minimum-norm).

    Returns
    -------
    InfluenceReport

    Raises
    ------
    InputError
        For ridge or minimum-norm fits, where these formulas do not apply.

    Notes
    -----
    With ``A = Q R`` (thin), ``h_i = ||q_i||^2`` and the leave-one-out change of
    the coefficients is ``b - b_(i) = R^{-1} q_i e_i / (1 - h_i)``: one triangular
    solve with n right-hand sides, O(n p^2). When the fit kept no thin Q (the
    blocked path), Q is rebuilt block by block as ``A R^{-1}``. Rows with
    ``h_i = 1`` (fitted exactly whatever their response) get NaN.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> t = np.arange(6.0)
    >>> inf = whiten.fit_linear(t, [0.1, 1.2, 1.9, 3.2, 3.9, 5.1]).influence()
    >>> bool(np.isclose(inf.leverage.sum(), 2.0))
    True
    """
    if fit.ridge is not None or fit._r is None:
        raise InputError("influence: leave-one-out formulas here apply to unpenalised, full-rank fits "
                         "(not ridge or minimum-norm)")
    r = fit._r
    q = fit._q
    if q is None:
        q = _rebuild_q(fit)
    e = fit._wresid
    n, p = q.shape
    h = np.einsum("ij,ij->i", q, q)
    dof = n - p
    s2 = float(e @ e) / dof if dof > 0 else math.nan
    with np.errstate(divide="ignore", invalid="ignore"):
        one_minus = 1.0 - h
        one_minus = np.where(one_minus > 1e-12, one_minus, np.nan)
        stud_in = e / np.sqrt(s2 * one_minus)
        s2_i = (dof * s2 - e ** 2 / one_minus) / (dof - 1) if dof > 1 else np.full(n, np.nan)
        s2_i = np.where(s2_i > 0, s2_i, np.nan)
        stud_ex = e / np.sqrt(s2_i * one_minus)
        cooks = e ** 2 * h / (p * s2 * one_minus ** 2)
        # b - b_(i) in scaled coordinates, columns = rows of the data
        delta = tri_solve(r, (q * (e / one_minus)[:, None]).T).T
        w = tri_solve(r, np.eye(p), trans=True)  # inverse-ok: row norms give the reported coefficient variances
        var_s = np.einsum("ij,ij->j", w, w)
        dfb = delta / (np.sqrt(s2_i)[:, None] * np.sqrt(var_s)[None, :])
    all_names = list(fit._design.all_names)
    names = tuple(all_names[c] for c in fit._fit_cols)
    return InfluenceReport(h, stud_in, stud_ex, cooks, dfb, names, fit._design.index)


def _rebuild_q(fit) -> np.ndarray:
    design = fit._design
    cols = list(fit._fit_cols)
    sc = fit._scale
    rows = max(int(current().block_rows), 1)
    q = np.empty((design.n, len(cols)))
    for a, b, blk, _ in design.whitened_blocks(rows):
        ab = blk[:, cols] * sc[None, :]
        q[a:b] = tri_solve(fit._r, ab.T, trans=True).T
    return q
