"""Pivoted Cholesky (LAPACK ``dpstrf``): numerical rank and which variables depend on which."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.linalg import lapack, solve_triangular

from .._numerics import EPS
from .._validate import as_square
from ..errors import InputError, NotPositiveDefiniteError
from .health import _pow2_scale

__all__ = ["RankReport", "pivoted_cholesky"]



@dataclasses.dataclass(frozen=True)
class RankReport:
    """Outcome of a pivoted Cholesky factorization.

    Attributes
    ----------
    rank : int
        Numerical rank at tolerance ``tol``.
    dim : int
    order : tuple of int
        Pivot order: ``order[:rank]`` are the independent variables, chosen
        greedily by largest remaining (unit-diagonal-scaled) variance.
    independent, dependent : tuple of str
        Names (or ``"x<k>"``) of the variables kept and the ones that are
        (numerically) linear combinations of the kept ones.
    dependencies : dict
        ``name -> tuple of names`` it depends on (coefficients above ``1e-8``
        of the largest, in unit-diagonal scaling).
    coefficients : dict
        ``name -> dict(name -> coefficient)`` in the original units:
        ``x_dep ≈ sum_k c_k x_k`` (for centred data).
    residual_variance : dict
        ``name -> fraction`` of its variance not explained by the kept variables.
    tol : float
    """

    rank: int
    dim: int
    order: tuple
    independent: tuple
    dependent: tuple
    dependencies: dict
    coefficients: dict
    residual_variance: dict
    tol: float

    @property
    def full_rank(self) -> bool:
        return self.rank == self.dim

    def describe(self) -> list[str]:
        """Plain-words sentences, one per dependent variable."""
        out = []
        for d in self.dependent:
            deps = self.dependencies[d]
            if not deps:
                out.append(f"{d} has (numerically) zero variance")
            else:
                out.append(f"{d} is a linear combination of {', '.join(deps)}")
        return out


def pivoted_cholesky(a: Any, *, tol: float | None = None, columns: Sequence[str] | None = None) -> RankReport:
    """Numerical rank of a positive semi-definite matrix and the dependent variables.

    Parameters
    ----------
    a : array_like or DataFrame, shape (p, p)
        Symmetric positive semi-definite (e.g. a covariance or Gram matrix).
    tol : float, optional
        Pivots of the unit-diagonal matrix at or below ``tol`` count as zero.
        Default ``100 * p * eps`` (about 2e-14 p): only exact dependence up to
        rounding. Pass e.g. ``1e-8`` to also catch near-dependence (a variable
        with less than 1e-8 of its variance unexplained by the others).
    columns : sequence of str, optional
        Column (variable) labels.

    Returns
    -------
    RankReport

    Raises
    ------
    InputError
        Not square, not finite, not symmetric.
    NotPositiveDefiniteError
        A negative variance.

    Notes
    -----
    The matrix is scaled to unit diagonal first, so the pivot order and the
    tolerance do not depend on units. Cost p^3/3 flops plus one triangular
    solve per dependent variable.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> x = np.array([[1., 2., 3.], [4., 5., 6.], [7., 8., 10.], [2., 0., 2.]])
    >>> x = np.column_stack([x, x[:, 0] + x[:, 1]])
    >>> rep = whiten.pivoted_cholesky(x.T @ x, columns=["a", "b", "c", "d"])
    >>> rep.rank
    3
    """
    m, frame_names = as_square(a, name="a")
    names = list(columns) if columns is not None else frame_names
    p = m.shape[0]
    labels = names if names is not None else [f"x{k}" for k in range(p)]
    if len(labels) != p:
        raise InputError(f"columns: expected {p} names, got {len(labels)}")
    diag = np.diag(m)
    if np.any(diag < 0):
        k = int(np.argmin(diag))
        raise NotPositiveDefiniteError(f"a: variance of {labels[k]!r} is negative ({diag[k]:.3g})", pivot=k)
    tol = 100.0 * p * EPS if tol is None else float(tol)
    if tol < 0:
        raise InputError(f"tol: must be non-negative, got {tol}")
    s = _pow2_scale(diag.copy())
    ms = m * s[:, None] * s[None, :]
    # dpstrf compares remaining pivots (squared scale) against tol * (largest diagonal)
    c, piv, rank, info = lapack.dpstrf(ms, tol=tol, lower=1)
    if info < 0:  # pragma: no cover
        raise InputError(f"dpstrf failed with info={info}")
    piv = np.asarray(piv) - 1
    rank = int(rank)
    lc = np.tril(c)
    order = tuple(int(k) for k in piv)
    indep = order[:rank]
    dep = order[rank:]
    deps: dict = {}
    coefs: dict = {}
    resid: dict = {}
    if rank > 0 and dep:
        l11 = lc[:rank, :rank]
        l21 = lc[rank:, :rank]
        # x_dep (scaled) = l21 l11^{-1} x_indep (scaled) for the dependent rows
        cmat = solve_triangular(l11, l21.T, lower=True, trans="T")  # shape (rank, n_dep)
        for j, d in enumerate(dep):
            cj = cmat[:, j]
            big = np.max(np.abs(cj)) if cj.size else 0.0
            keep = [i for i in range(rank) if big > 0 and abs(cj[i]) > 1e-8 * big]
            keep.sort(key=lambda i: indep[i])
            deps[labels[d]] = tuple(labels[indep[i]] for i in keep)
            # back to original units: x_d = sum c_i * (s_i / s_d) x_i
            coefs[labels[d]] = {labels[indep[i]]: float(cj[i] * s[indep[i]] / s[d]) for i in keep}
            rv = ms[d, d] - float(l21[j] @ l21[j])
            resid[labels[d]] = max(0.0, rv / ms[d, d]) if ms[d, d] > 0 else 0.0
    else:
        for d in dep:
            deps[labels[d]] = ()
            coefs[labels[d]] = {}
            resid[labels[d]] = 0.0
    return RankReport(
        rank=rank, dim=p, order=order,
        independent=tuple(labels[k] for k in indep), dependent=tuple(labels[k] for k in dep),
        dependencies=deps, coefficients=coefs, residual_variance=resid, tol=tol,
    )
