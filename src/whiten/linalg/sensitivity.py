"""Componentwise sensitivity pieces of a covariance object, for the likelihood's digits statements.

Two nonnegative matrices describe how far a covariance ``S`` can move:

* ``G_data``: the change of ``S`` when each of its inputs changes by one unit
  in its last digit (relative ``eps``), to first order, divided by ``eps``:
  ``|S|`` for a matrix, ``d`` for a diagonal, ``2|U||U|^T + D`` for
  ``U U^T + D``, ``2 G_A (x) G_B`` for a Kronecker product, blockwise for blocks.
  For a Factor given only by its ``L`` the input is ``L``: ``2|L||L|^T``.
* ``G_factor``: the scale of the backward error of the Cholesky factorization
  (Demmel, 1989; Higham, 2002, Thm 10.3): ``|L||L|^T``.

The log-determinant moves by ``tr(S^{-1} dS)``, so its worst first-order change
is ``eps * sum_ij |S^{-1}_ij| G_ij``; :func:`logdet_sums` evaluates that sum
exactly for n up to :data:`EXACT_MAX` (entries of ``S^{-1}`` from triangular
solves, used only in this reported bound), and bounds it by
``n / rcond_scaled`` beyond (the sum is invariant under diagonal scaling, and
the scaled ``G`` has entries at most 1).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import blas

from .factor import Factor
from .structured import (
    BlockDiagonalCovariance,
    DiagonalCovariance,
    KroneckerCovariance,
    LowRankPlusDiagonal,
    StructuredCovariance,
)

__all__ = ["abs_cov_matvec", "chi2_sums", "logdet_sums", "EXACT_MAX"]

#: largest dimension for which the log-det sums are evaluated exactly (cost about n^3 flops)
EXACT_MAX = 1500


def _dense_input(f: Factor) -> np.ndarray | None:
    return f._matrix  # the matrix the factor was made from, when it was made from one


def abs_cov_matvec(cov, v: np.ndarray, which: str = "data") -> np.ndarray:
    """``G |v|`` for rows ``v`` (N, n), G the data (``"data"``) or factor (``"factor"``) sensitivity matrix."""
    av = np.abs(v)
    if isinstance(cov, Factor):
        lab = np.abs(cov.lower)
        m = _dense_input(cov)
        if which == "data" and m is not None:
            return av @ np.abs(m)
        g = (av @ lab) @ lab.T
        return 2.0 * g if which == "data" else g
    if isinstance(cov, DiagonalCovariance):
        return av * cov.variances[None, :]
    if isinstance(cov, LowRankPlusDiagonal):
        au = np.abs(cov._u)
        return 2.0 * (av @ au) @ au.T + av * cov._d[None, :]
    if isinstance(cov, BlockDiagonalCovariance):
        out = np.empty_like(av)
        for p, a, b in cov._slices():
            out[:, a:b] = abs_cov_matvec(p, v[:, a:b], which)
        return out
    if isinstance(cov, KroneckerCovariance):
        fa, fb = cov.factors
        na, nb = fa.dim, fb.dim
        ga = _dense_g(fa, which)
        gb = _dense_g(fb, which)
        t = av.reshape(-1, na, nb)
        out = np.einsum("ik,nkl,jl->nij", ga, t, gb)   # (G_A (x) G_B) vec(V) = vec(G_A V G_B^T), row-major
        return 2.0 * out.reshape(av.shape)
    if isinstance(cov, StructuredCovariance):
        return av @ np.abs(cov.dense())
    raise TypeError(f"not a covariance object: {type(cov).__name__}")


def chi2_sums(cov, v: np.ndarray, which: str = "data") -> np.ndarray:
    """Per row of ``v`` (N, n): ``sum |v_i dS_ij v_j| / eps`` for the worst one-ulp change of the inputs.

    ``|v|^T G |v|`` in general; sharper where the structure allows: ``2 |U^T v| . (|U|^T |v|) + sum d v^2``
    for ``U U^T + D`` and ``sum |A o (V B V^T)| + sum |B o (V^T A V)|`` (``V`` the row as an a x b array,
    ``|A|``, ``|B|`` replaced by ``|L||L|^T`` for ``which="factor"``) for a Kronecker product.
    """
    if isinstance(cov, LowRankPlusDiagonal):
        u = np.asarray(cov._u)
        return 2.0 * np.einsum("ik,ik->i", np.abs(v @ u), np.abs(v) @ np.abs(u)) + (v * v) @ cov._d
    if isinstance(cov, KroneckerCovariance):
        fa, fb = cov.factors
        a, b = fa.matrix(), fb.matrix()
        vv = v.reshape(-1, fa.dim, fb.dim)
        ta = np.einsum("nij,jk,nlk->nil", vv, b, vv)   # V B V^T
        tb = np.einsum("nji,jk,nkl->nil", vv, a, vv)   # V^T A V
        ga, gb = _dense_g(fa, which), _dense_g(fb, which)
        if which == "data" and fa._matrix is None:
            ga = ga / 2.0
        if which == "data" and fb._matrix is None:
            gb = gb / 2.0
        return np.einsum("ij,nij->n", ga, np.abs(ta)) + np.einsum("ij,nij->n", gb, np.abs(tb))
    if isinstance(cov, BlockDiagonalCovariance):
        out = np.zeros(v.shape[0])
        for p, a0, b0 in cov._slices():
            out += chi2_sums(p, v[:, a0:b0], which)
        return out
    return np.einsum("ij,ij->i", np.abs(v), abs_cov_matvec(cov, v, which))


def _dense_g(f: Factor, which: str) -> np.ndarray:
    m = _dense_input(f)
    if which == "data" and m is not None:
        return np.abs(m)
    lab = np.abs(f.lower)
    g = lab @ lab.T
    return 2.0 * g if which == "data" and m is None else g


def _factor_sums(f: Factor) -> tuple[float, float]:
    n = f.dim
    if n > EXACT_MAX:
        rc = f.health.rcond_scaled
        t = n / rc if rc > 0 else math.inf
        return t, t
    x = blas.dtrsm(  # inverse-ok: entries of S^{-1} only enter the reported log-det sensitivity
        1.0, np.asfortranarray(f.lower), np.eye(n, order="F"), side=0, lower=1)
    w = np.abs(x.T @ x)
    return float(np.sum(w * _dense_g(f, "data"))), float(np.sum(w * _dense_g(f, "factor")))


def logdet_sums(cov) -> tuple[float, float]:
    """``(sum |S^{-1}| o G_data, sum |S^{-1}| o G_factor)``: worst first-order change of ``log det S`` per eps.

    Diagonal: ``(n, n)`` exactly. Low rank plus diagonal: ``2 sum |S^{-1}U| o |U| + tr(S^{-1}D)`` with
    ``S^{-1}U`` one solve and ``tr(S^{-1}D) = n - tr(U^T S^{-1} U)``. Kronecker ``A (x) B``:
    ``n_B T_A + n_A T_B``. Blocks: the sum over blocks.
    """
    if isinstance(cov, Factor):
        return _factor_sums(cov)
    if isinstance(cov, DiagonalCovariance):
        return float(cov.dim), float(cov.dim)
    if isinstance(cov, LowRankPlusDiagonal):
        u = np.asarray(cov._u)
        su = cov.solve(u)
        t = 2.0 * float(np.sum(np.abs(su) * np.abs(u))) + max(0.0, cov.dim - float(np.sum(su * u)))
        return t, t
    if isinstance(cov, BlockDiagonalCovariance):
        parts = [logdet_sums(p) for p in cov.blocks]
        return float(sum(p[0] for p in parts)), float(sum(p[1] for p in parts))
    if isinstance(cov, KroneckerCovariance):
        fa, fb = cov.factors
        ta, tb = _factor_sums(fa), _factor_sums(fb)
        return fb.dim * ta[0] + fa.dim * tb[0], fb.dim * ta[1] + fa.dim * tb[1]
    n = cov.dim
    rc = cov.health.rcond_scaled
    t = n / rc if rc > 0 else math.inf
    return t, t
