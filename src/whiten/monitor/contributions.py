"""Per-sensor explanations of a squared distance, by triangular solves only.

For a centred row ``d = x - mu`` and covariance ``S = L L^T``:

chain (conditional decomposition along a sensor order)
    ``z = L^{-1} d`` for the factor of S with the sensors in the chosen order.
    ``z_k^2`` is the squared standardized residual of the k-th sensor given
    the sensors before it, so the terms are non-negative and sum exactly to
    ``d2 = ||z||^2`` (the decomposition of Mason, Tracy & Young, 1995, "Decomposition of T² for
    multivariate control chart interpretation", J. Quality Technology 27(2),
    99-108, for one ordering; reference given from memory). The split depends
    on the order.

drop (order-free)
    ``d2 - d2_without_j``: how much the distance falls when sensor j is left
    out. With ``w = S^{-1} d`` (two triangular solves) it equals
    ``w_j^2 / (S^{-1})_jj`` -- the squared standardized residual of sensor j
    given *all* the others. The denominators are the diagonal of the
    precision, computed once per model from triangular solves
    (:meth:`whiten.Factor.inv_diag`) and only used as reported scalars.

dev (plain standardized deviation)
    ``(x_j - mu_j) / sd_j`` with ``sd_j = sqrt(S_jj)`` -- each sensor judged on
    its own. A fault that breaks correlations shows a large d2 and large drop
    terms while every ``dev`` stays within about ±3.
"""

from __future__ import annotations

import numpy as np

from ..linalg.factor import Factor

__all__ = ["chain_terms", "drop_terms", "whitened_and_drop", "score_terms_into"]


def whitened_and_drop(factor: Factor, d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Whitened rows ``z = L^{-1} d`` and drop terms for centred rows ``d`` (N, k).

    ``w = S^{-1} d = L^{-T} z`` reuses z, so the pair costs two triangular
    solves with a matrix right-hand side (BLAS-3), 2 N k^2 flops.
    """
    # a reading far beyond the double range of its sensor's spread overflows to inf (the row is
    # noted by the scorer); numpy's overflow warning would only repeat that
    with np.errstate(over="ignore", invalid="ignore"):
        z = factor.whiten(d)
        w = factor.solve_lower(z.T, trans=True).T
        w /= factor.inv_sd()[None, :]  # (w_j / sd_j)^2 rather than w_j^2 / prec_jj: no overflow at extreme scales
        return z, w * w


def score_terms_into(factor: Factor, x: np.ndarray, shift: np.ndarray, d2: np.ndarray, chain: np.ndarray,
                     drop: np.ndarray) -> None:
    """d2, chain and drop terms of validated complete rows ``x`` (m, p), written into the given arrays.

    The many-row path of :class:`~whiten.monitor.Scorer`: ``drop`` (a C-ordered
    (m, p) slice) is the work space. ``z = L^{-1}(x - shift)`` is solved in it,
    ``d2 = ||z||^2`` and ``chain = z**2`` are taken from it, then
    ``w = L^{-T} z`` overwrites it and becomes ``w**2 / (S^{-1})_jj``. Two BLAS-3
    triangular solves and no temporary array.
    """
    with np.errstate(over="ignore", invalid="ignore"):  # overflow to inf is noted by the scorer
        z = factor._whiten_block(x, shift, drop)  # solved in place in drop
        np.einsum("ij,ij->i", z, z, out=d2)  # the same reduction as the general path, bit for bit
        np.multiply(z, z, out=chain)
        w = factor._solve_rows(z, trans=True)
        w /= factor.inv_sd()[None, :]
        np.multiply(w, w, out=w)


def drop_terms(factor: Factor, d: np.ndarray) -> np.ndarray:
    """``d2 - d2_without_j`` for every row of centred ``d`` (N, k) and sensor j.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> from whiten.monitor import drop_terms
    >>> s = np.array([[1.0, 0.9], [0.9, 1.0]])
    >>> d = np.array([[1.0, -1.0]])
    >>> full = whiten.cholesky(s).quad(d[0])
    >>> # leaving out sensor 0 leaves d2 = d_1^2 / s_11 = 1
    >>> bool(np.isclose(drop_terms(whiten.cholesky(s), d)[0, 0], full - 1.0))
    True
    """
    return whitened_and_drop(factor, d)[1]


def chain_terms(factor: Factor, d: np.ndarray) -> np.ndarray:
    """Squared whitened components ``(L^{-1} d)_k^2`` (columns in the factor's order); they sum to d2.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> from whiten.monitor import chain_terms
    >>> f = whiten.cholesky(np.array([[2.0, 0.6, 0.1], [0.6, 1.0, 0.3], [0.1, 0.3, 0.5]]))
    >>> d = np.array([[0.5, -1.0, 2.0]])
    >>> bool(np.isclose(chain_terms(f, d).sum(), f.quad(d[0])))
    True
    """
    z = factor.whiten(d)
    return z * z
