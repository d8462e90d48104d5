"""Health of a Cholesky factor, and the exact unit-diagonal scaling every factorization goes through.

:class:`FactorHealth` is the one health record of the covariance objects
(dense factors and the structured covariances alike). ``digits_lost`` on it is
always :func:`whiten._numerics.digits_lost_from_rcond` of a condition estimate
of the matrix scaled to unit diagonal (van der Sluis, 1969): Cholesky solves
are accurate relative to that scaling, which is exact because it uses powers
of two.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from scipy.linalg import lapack

from .._numerics import digits_lost_from_rcond, digits_trusted, json_ready, pow2_level_scale

__all__ = ["FactorHealth", "health_of", "factor_scaled"]


@dataclasses.dataclass(frozen=True)
class FactorHealth:
    """Numerical health of a factorization.

    Attributes
    ----------
    rcond : float
        LAPACK ``dpocon`` estimate of ``1 / cond_1(m)`` for the matrix actually
        factored, ``m = a + jitter * I``.
    rcond_scaled : float
        The same estimate for ``m`` scaled to unit diagonal. Cholesky solves are
        accurate relative to this one (van der Sluis, 1969), so it drives
        ``digits_lost``: a covariance such as ``diag(1, 1e-11)`` has a tiny
        ``rcond`` but loses no digits.
    digits_lost : float
        ``digits_lost_from_rcond(rcond_scaled)`` = ``log10(1 / rcond_scaled)``: decimal digits a
        solve may lose.
    jitter : float
        Absolute amount added to the diagonal (0.0 when none).
    jitter_relative : float
        ``jitter / mean(diag(a))``.
    method : str
        ``"cholesky"``, ``"cholesky+jitter"``, ``"updated"`` or ``"given"``.
    """

    rcond: float
    rcond_scaled: float
    digits_lost: float
    jitter: float
    jitter_relative: float
    method: str

    @property
    def digits_trusted(self) -> float:
        """Roughly how many significant decimal digits a solve keeps."""
        return digits_trusted(self.digits_lost)

    def to_dict(self) -> dict:
        return json_ready(dataclasses.asdict(self) | {"digits_trusted": self.digits_trusted})


def _pow2_scale(diag: np.ndarray) -> np.ndarray:
    """Powers of two close to diag**-0.5 (1 where diag <= 0).

    Scaling by powers of two is exact in binary floating point, so the factor of
    the scaled matrix maps back to the factor of the original without rounding.
    """
    d = np.where(diag > 0, diag, 1.0)
    return np.exp2(-np.round(0.5 * np.log2(d)))


def _pocon(lower: np.ndarray, anorm: float) -> float:
    if anorm == 0 or not np.isfinite(anorm):
        return 0.0
    rc, info = lapack.dpocon(lower, anorm, uplo="L")
    return float(rc) if info == 0 else 0.0


def _scale_columns_and_norms(ms: np.ndarray, s: np.ndarray) -> tuple[float, float]:
    """Scale the columns of ``ms = S m`` by s in place (so ``ms = S m S``), in column
    slabs, and return the 1-norms of ``m`` and of ``S m S`` read off each slab
    while it is in cache.

    No p x p temporary and no BLAS call: numpy and scipy may each load their
    own OpenBLAS, and a numpy matrix-vector product just before ``dpotrf``
    leaves numpy's worker threads spinning on the cores the factorization
    needs (measured: ``dpotrf`` at p=2000 twice as slow right after one).
    ``|m_ij| = |ms_ij| / (s_i s_j)`` exactly, since s holds powers of two.
    """
    p = ms.shape[0]
    width = max(1, (1 << 17) // max(p, 1))  # slabs of about 1 MB
    inv_s = 1.0 / s
    anorm = anorm_s = 0.0
    for j0 in range(0, p, width):
        j1 = min(p, j0 + width)
        slab = ms[:, j0:j1]
        slab *= s[None, j0:j1]
        blk = np.abs(slab)
        anorm_s = max(anorm_s, float(blk.sum(axis=0).max()))
        blk *= inv_s[:, None]
        anorm = max(anorm, float((blk.sum(axis=0) * inv_s[j0:j1]).max()))
    return anorm, anorm_s


def factor_scaled(m: np.ndarray):
    """Factor m through its (power-of-two) unit-diagonal scaling; m is not modified.

    Returns ``(lower, scale, info, rcond_scaled, anorm)``: ``lower`` is the factor
    of m (None on failure), ``scale`` the diagonal scaling s with m_s = S m S,
    ``anorm`` the 1-norm of m (for the unscaled condition estimate, which is
    computed only when asked for). The scaled copy is factored in place, so the
    only n x n array made is that copy.
    """
    s = _pow2_scale(np.diag(m).copy())
    ms = np.multiply(m, s[:, None], order="F")
    anorm, anorm_s = _scale_columns_and_norms(ms, s)
    c, info = lapack.dpotrf(ms, lower=1, clean=1, overwrite_a=1)
    if info != 0:
        return None, s, int(info), 0.0, anorm
    rc_s = _pocon(c, anorm_s)
    c /= s[:, None]  # exact: s holds powers of two
    return c, s, 0, rc_s, anorm


@dataclasses.dataclass(frozen=True)
class _PendingHealth:
    """A factor's health before the unscaled condition estimate is made.

    ``digits_lost`` (from the scaled estimate, which every factorization makes)
    is known at once; the unscaled ``rcond`` is a reported quantity, so its
    ``dpocon`` (a fifth of a p=2000 factorization) runs on first request.
    """

    rcond_scaled: float
    anorm: float
    jitter: float
    jitter_relative: float
    method: str

    @property
    def digits_lost(self) -> float:
        return digits_lost_from_rcond(self.rcond_scaled)

    def resolve(self, lower: np.ndarray) -> FactorHealth:
        return FactorHealth(_pocon(lower, self.anorm), self.rcond_scaled, self.digits_lost,
                            self.jitter, self.jitter_relative, self.method)


def health_of(lower: np.ndarray, jitter: float, jitter_rel: float, method: str) -> FactorHealth:
    """Condition estimates for a factor whose matrix is L L^T (O(p^2) beyond the product).

    Rows of L at extreme scales (a variance of 1e+320 or 1e-320) are first
    multiplied by powers of two, exactly; the unit-diagonal estimate does not
    depend on that scaling, and the unscaled ``rcond`` is reported as 0 when the
    matrix's own 1-norm is beyond float64.
    """
    c = pow2_level_scale(np.max(np.abs(lower), axis=1)) if lower.size else np.ones(0)
    if np.any(c != 1.0):
        with np.errstate(over="ignore", under="ignore", invalid="ignore"):
            lc = lower * c[:, None]
            anorm = float(((np.abs(lc) @ np.abs(lc).T) / c[:, None] / c[None, :]).sum(axis=0).max())
        rc = _pocon(np.asfortranarray(lower), anorm) if np.isfinite(anorm) else 0.0
        h = health_of(lc, 0.0, 0.0, method)
        return FactorHealth(rc, h.rcond_scaled, h.digits_lost, float(jitter), float(jitter_rel), method)
    m = lower @ lower.T
    rc = _pocon(np.asfortranarray(lower), float(np.abs(m).sum(axis=0).max()))
    s = _pow2_scale(np.diag(m).copy())
    ls = lower * s[:, None]
    ms = m * s[:, None] * s[None, :]
    rc_s = _pocon(np.asfortranarray(ls), float(np.abs(ms).sum(axis=0).max()))
    return FactorHealth(rc, rc_s, digits_lost_from_rcond(rc_s), float(jitter), float(jitter_rel), method)
