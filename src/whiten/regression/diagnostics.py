"""Collinearity diagnostics from the R factor of the design (never from a Gram inverse).

* condition indices and variance-decomposition proportions (Belsley, Kuh &
  Welsch, 1980, "Regression Diagnostics", ch. 3): from the singular values of
  the design with its columns scaled to unit length, which equal those of R
  with its columns scaled the same way (R has the same column norms);
* variance inflation factors ``1 / (1 - R_j^2)`` from the R of the centred,
  unit-length predictors;
* the nearly dependent groups, in plain words.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np

from .._numerics import EPS, column_norms, json_number
from ..linalg.qr import tri_solve

__all__ = ["CollinearityReport", "collinearity_report", "vif_from_r", "describe_dependence"]

#: Belsley, Kuh & Welsch (1980) flag condition indices above 30 with two or
#: more variance-decomposition proportions above 0.5.
INDEX_THRESHOLD = 30.0
PROPORTION_THRESHOLD = 0.5


@dataclasses.dataclass(frozen=True, eq=False)
class CollinearityReport:
    """Condition indices, variance-decomposition proportions and nearly dependent groups.

    Attributes
    ----------
    names : tuple of str
        Design columns (the intercept, when fitted, is ``"(intercept)"``).
    singular_values : ndarray, shape (p,)
        Of the design with unit-length columns, largest first.
    condition_indices : ndarray, shape (p,)
        ``singular_values[0] / singular_values[k]`` (inf for an exact zero).
    proportions : ndarray, shape (p, p)
        ``proportions[k, j]``: share of the variance of coefficient j that
        belongs to singular direction k (each column sums to 1).
    groups : tuple of tuple of str
        Columns with proportion > 0.5 on a direction whose condition index
        exceeds 30 (Belsley's rule), one tuple per such direction.
    group_indices : tuple of float
        The condition index of each group.
    sentences : tuple of str
        The findings in plain words.
    """

    names: tuple
    singular_values: np.ndarray
    condition_indices: np.ndarray
    proportions: np.ndarray
    groups: tuple
    group_indices: tuple
    sentences: tuple

    def to_frame(self):
        import pandas as pd

        df = pd.DataFrame(self.proportions, columns=list(self.names))
        df.insert(0, "condition_index", self.condition_indices)
        df.insert(0, "singular_value", self.singular_values)
        df.index.name = "direction"
        return df

    def to_dict(self) -> dict:
        return {
            "names": list(self.names),
            "singular_values": [float(v) for v in self.singular_values],
            "condition_indices": [json_number(v) for v in self.condition_indices],
            "proportions": [[float(v) for v in row] for row in self.proportions],
            "groups": [list(g) for g in self.groups],
            "group_indices": [json_number(v) for v in self.group_indices],
            "sentences": list(self.sentences),
        }


def _join(items: list[str]) -> str:
    items = [f"'{s}'" if not s.startswith("(") else s for s in items]
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def collinearity_report(r: np.ndarray, names: list[str], *, exact_tol: float,
                        exact: Sequence[tuple[tuple, str]] = ()) -> CollinearityReport:
    """Belsley-Kuh-Welsch diagnostics from the R of the (any column scaling) design.

    Parameters
    ----------
    r : ndarray, shape (p, p)
        R of a QR of the design (all columns, user order; rank deficiency allowed).
    names : list of str
    exact_tol : float
        Singular values at or below ``exact_tol * s_max`` are reported as exact
        dependence (to working precision).
    exact : sequence of (group names, sentence)
        Exact dependencies already found by the rank test; they come first in
        ``groups``/``sentences`` (several exact dependencies share their null
        directions, so the proportions alone cannot always separate them).

    Notes
    -----
    Cost O(p^3): column norms of R, an SVD of the p x p scaled R.
    """
    p = r.shape[1]
    norms = column_norms(r)
    safe = np.where(norms > 0, norms, 1.0)
    rn = r / safe[None, :]
    _, s, vt = np.linalg.svd(rn)
    s_max = float(s[0]) if s.size else 0.0
    with np.errstate(divide="ignore"):
        ci = np.where(s > 0, s_max / np.where(s > 0, s, 1.0), np.inf)
    # proportions: phi_jk = v_jk^2 / s_k^2; an exact zero singular value is
    # clipped at eps * s_max so the (undefined) shares go to the null direction.
    floor = max(s_max * EPS, np.finfo(float).tiny)
    sc = np.maximum(s, floor)
    phi = (vt ** 2) / (sc[:, None] ** 2)
    prop = phi / phi.sum(axis=0, keepdims=True)
    groups, gidx, sentences = [], [], []
    for dependent, sentence in exact:
        groups.append(tuple(dependent))
        gidx.append(math.inf)
        sentences.append(f"{_join(list(dependent))} are linearly dependent: {sentence}")
    for k in range(p - 1, -1, -1):  # worst direction first
        if not ci[k] > INDEX_THRESHOLD:
            continue
        if exact and s[k] <= exact_tol * s_max:
            continue  # already described exactly above
        members = [names[j] for j in range(p) if prop[k, j] > PROPORTION_THRESHOLD]
        if len(members) < 2:
            continue
        groups.append(tuple(members))
        gidx.append(float(ci[k]))
        shares = ", ".join(f"{100 * prop[k, names.index(m)]:.0f}%" for m in members)
        if s[k] <= exact_tol * s_max:
            sentences.append(
                f"{_join(members)} are linearly dependent to working precision "
                f"(condition index {ci[k]:.3g}); their coefficients cannot be told apart from these data")
        else:
            lost = math.log10(ci[k])
            sentences.append(
                f"{_join(members)} are nearly linearly dependent (condition index {ci[k]:.3g}, "
                f"above Belsley's 30; {shares} of their coefficient variances sit in this one direction). "
                f"About {lost:.1f} digits are lost to this near-dependence")
    return CollinearityReport(tuple(names), s, ci, prop, tuple(groups), tuple(gidx), tuple(sentences))


def vif_from_r(r_kept: np.ndarray, n_pred: int) -> np.ndarray:
    """Centred VIFs of the last ``n_pred`` columns from the R of ``[intercept, predictors]``.

    The trailing block ``R22`` of the R of ``[1, X]`` is the R of ``X`` with the
    (possibly weighted) mean removed. With its columns scaled to unit length,
    ``VIF_j = ||R22n^{-T} e_j||^2``, a reported entry of the inverse of the
    correlation matrix, obtained by one triangular solve.
    """
    r22 = r_kept[-n_pred:, -n_pred:]
    norms = column_norms(r22)
    if np.any(norms == 0):
        out = np.full(n_pred, np.inf)
        return out
    r22n = r22 / norms[None, :]
    w = tri_solve(r22n, np.eye(n_pred), trans=True)  # inverse-ok: rows of R^-T give the reported VIFs only
    return np.einsum("ij,ij->j", w, w)


def describe_dependence(r: np.ndarray, scale: np.ndarray, j: int, support: list[int],
                        names: list[str]) -> tuple[str, dict, float]:
    """How column j (set aside) is made of the ``support`` columns, in the user's units.

    Solves the small least-squares problem ``R[:, support] c ~ R[:, j]``
    (the design's QR turns the n-row problem into a p-row one).

    Returns
    -------
    sentence : str
    coefficients : dict name -> coefficient (original units)
    relative_residual : float
        Distance of column j from the span, relative to its length.
    """
    target = r[:, j]
    if not support or not np.any(target):
        return (f"{_label(names[j])} is identically zero", {}, 0.0)
    basis = r[:, support]
    c, *_ = np.linalg.lstsq(basis, target, rcond=None)
    res = float(np.linalg.norm(target - basis @ c))
    tnorm = float(np.linalg.norm(target))
    rel = res / tnorm if tnorm > 0 else 0.0
    # back to original units: s_j a_j = sum_k c_k s_k a_k
    orig = {names[k]: float(ck * scale[k] / scale[j]) for k, ck in zip(support, c)}
    big = max((abs(ck) for ck in c), default=0.0)
    used = {nm: v for (nm, v), ck in zip(orig.items(), c) if abs(ck) > 1e-8 * big}
    terms = " + ".join(f"{v:.6g}*{_label(nm)}" for nm, v in used.items()) or "0"
    return (f"{_label(names[j])} = {terms} (to a relative {rel:.1g})", used, rel)


def _label(nm: str) -> str:
    return nm if nm.startswith("(") else f"'{nm}'"
