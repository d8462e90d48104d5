"""Compensated (double-double) arithmetic: least-squares residuals in more than double precision.

Iterative refinement (Björck, 1967) gains digits only when the residual
``b - r - A x`` is computed more accurately than the working precision. Two
ways are provided:

``"compensated"``
    Error-free transformations in plain float64: every product ``a_ij x_j`` is
    split exactly into a sum of two doubles (Dekker's TwoProduct, 1971) and the
    terms of each row are added by TwoSum with the errors carried along
    (Ogita, Rump & Oishi, 2005, "Accurate sum and dot product", algorithm
    Dot2). The result is as accurate as if computed in twice the working
    precision (about 32 digits) and then rounded, and it is *the same on every
    platform*. Cost: about 25 flops per term, vectorised over rows.
``"longdouble"``
    ``numpy.longdouble`` arithmetic. On x86-64 Linux/macOS-Intel this is the
    80-bit x87 format with a 64-bit significand (about 19 digits, 3 more than
    double). On platforms where ``longdouble`` is just ``double`` (Windows,
    ARM64 macOS) it would give nothing, so :func:`extended_kind` then answers
    ``"compensated"`` instead: the residuals are never silently computed in
    plain double.

The dense least-squares path uses ``"compensated"`` (the strongest, and
platform-independent); the many-row path uses ``"longdouble"`` where it is
wider than double because numpy's longdouble matrix product is faster than the
vectorised error-free transformations.
"""

from __future__ import annotations

import numpy as np

__all__ = ["LONGDOUBLE_IS_WIDER", "extended_kind", "residual", "gradient", "ExtendedProducts"]

LONGDOUBLE_IS_WIDER = bool(np.finfo(np.longdouble).eps < np.finfo(np.float64).eps)

_SPLIT = 134217729.0  # 2**27 + 1, Dekker's splitting constant for 53-bit significands


def extended_kind(preferred: str) -> str:
    """The residual arithmetic actually used when ``preferred`` is asked for."""
    if preferred == "longdouble" and not LONGDOUBLE_IS_WIDER:
        return "compensated"
    return preferred


def _two_sum(a, b):
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


def _split(a):
    c = _SPLIT * a
    hi = c - (c - a)
    return hi, a - hi


def _two_prod(a, b):
    p = a * b
    ah, al = _split(a)
    bh, bl = _split(b)
    return p, al * bl - (((p - ah * bh) - al * bh) - ah * bl)


def _sum2_columns(terms: np.ndarray, errs: np.ndarray) -> np.ndarray:
    """Row sums of ``terms + errs`` (n, m) with TwoSum along a pairwise tree.

    Each level adds neighbouring columns exactly (sum + rounding error) and
    moves the errors into ``errs``; the errors are summed in ordinary
    arithmetic at the end (they are ~eps times smaller, so their own rounding
    is ~eps^2 of the result: the Sum2 bound of Ogita, Rump & Oishi, 2005).
    """
    t = terms
    err_total = errs.sum(axis=1)
    while t.shape[1] > 1:
        m = t.shape[1]
        half = m // 2
        s, e = _two_sum(t[:, 0:2 * half:2], t[:, 1:2 * half:2])
        err_total = err_total + e.sum(axis=1)
        if m % 2:
            s = np.concatenate([s, t[:, m - 1:m]], axis=1)
        t = s
    return t[:, 0] + err_total


def residual(a: np.ndarray, x: np.ndarray, b: np.ndarray, r: np.ndarray | None, kind: str) -> np.ndarray:
    """``b - r - a @ x`` (``r`` may be None) accurate to about eps**2 relative, rounded to float64.

    Parameters
    ----------
    a : ndarray, shape (n, p)
    x : ndarray, shape (p,)
    b, r : ndarray, shape (n,)
    kind : {"compensated", "longdouble"}
    """
    kind = extended_kind(kind)
    if kind == "longdouble":
        out = b.astype(np.longdouble) - a.astype(np.longdouble) @ x.astype(np.longdouble)
        if r is not None:
            out -= r.astype(np.longdouble)
        return out.astype(np.float64)
    n, p = a.shape
    prod, perr = _two_prod(a, -x[None, :])
    cols = [b[:, None], prod] if r is None else [b[:, None], -r[:, None], prod]
    terms = np.concatenate(cols, axis=1)
    errs = perr
    return _sum2_columns(terms, errs)


def gradient(a: np.ndarray, r: np.ndarray, kind: str) -> np.ndarray:
    """``a.T @ r`` accurate to about eps**2 relative, rounded to float64 (shape (p,))."""
    kind = extended_kind(kind)
    if kind == "longdouble":
        return (a.T.astype(np.longdouble) @ r.astype(np.longdouble)).astype(np.float64)
    prod, perr = _two_prod(a.T, r[None, :])
    return _sum2_columns(prod, perr)


class ExtendedProducts:
    """``b - r - A x`` and ``A^T r`` in extended precision for one fixed matrix A.

    Refinement applies the same A many times; the exact splitting of its
    entries (Dekker, 1971) or its conversion to ``longdouble`` is done once
    here instead of at every step.
    """

    def __init__(self, a: np.ndarray, kind: str):
        self.kind = extended_kind(kind)
        self.a = a
        if self.kind == "longdouble":
            self.a_ext = a.astype(np.longdouble)
        else:
            self.a_hi, self.a_lo = _split(a)

    def _products(self, a, ahi, alo, v):
        p = a * v
        vh, vl = _split(v)
        return p, alo * vl - (((p - ahi * vh) - alo * vh) - ahi * vl)

    def residual(self, x: np.ndarray, b: np.ndarray, r: np.ndarray | None) -> np.ndarray:
        if self.kind == "longdouble":
            out = b.astype(np.longdouble) - self.a_ext @ x.astype(np.longdouble)
            if r is not None:
                out -= r.astype(np.longdouble)
            return out.astype(np.float64)
        prod, perr = self._products(self.a, self.a_hi, self.a_lo, -x[None, :])
        cols = [b[:, None], prod] if r is None else [b[:, None], -r[:, None], prod]
        return _sum2_columns(np.concatenate(cols, axis=1), perr)

    def gradient(self, r: np.ndarray) -> np.ndarray:
        if self.kind == "longdouble":
            return (self.a_ext.T @ r.astype(np.longdouble)).astype(np.float64)
        prod, perr = self._products(self.a.T, self.a_hi.T, self.a_lo.T, r[None, :])
        return _sum2_columns(prod, perr)
