"""The :func:`cholesky` entry: validate, factor through the unit-diagonal scaling, repair with disclosure.

The jitter ladder runs only when the plain factorization fails and the matrix
is not clearly indefinite (judged by the smallest eigenvalue of the
unit-diagonal matrix); every repair is reported by a
:class:`~whiten.errors.JitterWarning` and recorded on the factor's health.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from .._settings import current
from .._validate import as_square
from .._warn import warn
from ..errors import (
    ConditioningWarning,
    InputError,
    JitterWarning,
    NotPositiveDefiniteError,
)
from .factor import Factor, _name
from .health import _PendingHealth, factor_scaled

__all__ = ["cholesky"]


def _min_eig(ms: np.ndarray) -> float:
    from scipy.linalg import eigvalsh

    return float(eigvalsh(ms, subset_by_index=[0, 0], check_finite=False)[0])


def cholesky(a: Any, *, jitter: str | bool | float = "auto", columns: Sequence[str] | None = None) -> Factor:
    """Cholesky factor of a symmetric positive (semi-)definite matrix, with disclosed repair.

    Parameters
    ----------
    a : array_like or pandas.DataFrame, shape (p, p)
        Symmetric to ``whiten.current_settings().symmetry_rtol`` relative to ``max|a|``.
        A DataFrame's column names become the factor's ``columns``.
    jitter : {"auto", False} or float
        ``"auto"`` (default): factor ``a`` as given; only if that fails, add an
        increasing ladder of diagonal jitter ``jitter_start * mean(diag a)``,
        ... up to ``jitter_ceiling * mean(diag a)`` (see :func:`whiten.settings`),
        with a :class:`~whiten.errors.JitterWarning` giving the amount.
        ``False``: never add jitter; failure raises. A non-negative number:
        add exactly this absolute amount to the diagonal; a positive amount is
        recorded (``jitter``) and disclosed with a ``JitterWarning`` like every
        other jitter. Anything else (``True``, ``None``, a string, NaN, a
        negative number) is an ``InputError``.
    columns : sequence of str, optional
        Column (variable) labels used in messages and results.

    Returns
    -------
    Factor

    Raises
    ------
    InputError
        Not square, empty, non-finite, non-numeric or not symmetric.
    NotPositiveDefiniteError
        Clearly indefinite (smallest eigenvalue of the unit-diagonal matrix below
        ``-indefinite_tol``), a negative variance, ``jitter=False`` on a singular
        matrix, or still failing at the jitter ceiling.

    Warns
    -----
    JitterWarning
        When jitter was added (amount, relative amount, condition afterwards).
    ConditioningWarning
        When ``digits_lost`` exceeds ``whiten.current_settings().digits_warn``.

    Notes
    -----
    Definiteness is judged on the matrix scaled to unit diagonal (by powers of
    two, which is exact), so a valid covariance with a wide dynamic range such
    as ``diag(1, 1e-11)`` factors without jitter or warning. Cost: p^3/3 flops
    for the factorization and O(p^2) for each condition estimate (``dpocon``);
    the eigenvalue check runs only when the plain factorization fails.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> f = whiten.cholesky(np.diag([1.0, 1e-11]))
    >>> f.jitter, bool(f.digits_lost < 1)
    (0.0, True)
    """
    jitter = _check_jitter(jitter)
    opts = current()
    m, frame_names = as_square(a, name="a")
    names = list(columns) if columns is not None else frame_names
    if names is not None and len(names) != m.shape[0]:
        raise InputError(f"columns: expected {m.shape[0]} names, got {len(names)}")
    diag = np.diag(m)
    if np.any(diag < 0):
        k = int(np.argmin(diag))
        raise NotPositiveDefiniteError(
            f"a: diagonal entry {_name(names, k)} is negative ({diag[k]:.3g}); a covariance has "
            "non-negative variances. Check the sign convention or the input",
            pivot=k, value=float(diag[k]))
    mean_diag = float(diag.mean())
    if mean_diag == 0:
        raise NotPositiveDefiniteError("a: is the zero matrix; nothing to factor", pivot=0, value=0.0)

    if jitter is not False and jitter != "auto":
        amount = float(jitter)
        mj = m + amount * np.eye(m.shape[0])
        lower, _, info, rc_s, anorm = factor_scaled(mj)
        if info != 0:
            raise NotPositiveDefiniteError(
                f"a + {amount:.3g}*I is not positive definite (failed at pivot {_name(names, info - 1)}); "
                "use a larger jitter or jitter='auto'", pivot=info - 1)
        f = _finish(lower, mj, rc_s, anorm, amount, amount / mean_diag,
                    "cholesky" if amount == 0 else "cholesky+jitter", names, opts)
        if amount > 0:
            warn(JitterWarning,
                 f"added jitter {amount:.3g} to the diagonal as asked ({amount / mean_diag:.1e} of the mean "
                 f"diagonal); condition after: rcond {f.rcond:.3g}, about {f.digits_lost:.1f} digits lost. "
                 "Results describe a + jitter*I")
        return f

    lower, sc, info, rc_s, anorm = factor_scaled(m)
    if info == 0:
        return _finish(lower, m, rc_s, anorm, 0.0, 0.0, "cholesky", names, opts)

    # The plain factorization failed at pivot info-1. Indefinite or merely singular?
    pivot = info - 1
    ms = m * sc[:, None] * sc[None, :]
    lam = _min_eig(ms)
    lam_rel = lam / float(np.diag(ms).mean())
    zero_var = [k for k in range(m.shape[0]) if diag[k] == 0]
    zv = f"; zero variance in {', '.join(_name(names, k) for k in zero_var)}" if zero_var else ""
    if lam_rel < -opts.indefinite_tol:
        raise NotPositiveDefiniteError(
            f"a: is indefinite: the unit-diagonal matrix has eigenvalue {lam_rel:.3g} "
            f"(tolerance {-opts.indefinite_tol:g}); factorization failed at pivot {_name(names, pivot)}. "
            "Jitter would hide a real error here: check how the matrix was built "
            "(pairwise-deleted covariances and hand-edited entries are common causes)",
            pivot=pivot, value=lam_rel)
    if jitter is False:
        raise NotPositiveDefiniteError(
            f"a: is singular to working precision (positive semi-definite, smallest eigenvalue "
            f"{lam_rel:.3g} of the unit-diagonal matrix; failed at pivot {_name(names, pivot)}{zv}). "
            "Use jitter='auto' to repair with disclosure, whiten.pivoted_cholesky(a) to find the "
            "dependent variables, or a shrinkage estimate",
            pivot=pivot, value=lam_rel)
    rel = opts.jitter_start
    while rel <= opts.jitter_ceiling * (1 + 1e-12):
        amount = rel * mean_diag
        mj = m + amount * np.eye(m.shape[0])
        lower, _, info, rc_s, anorm = factor_scaled(mj)
        if info == 0:
            f = _finish(lower, mj, rc_s, anorm, amount, rel, "cholesky+jitter", names, opts, conditioning_warning=False)
            warn(JitterWarning,
                 f"matrix is singular to working precision (failed at pivot {_name(names, pivot)}{zv}); "
                 f"added jitter {amount:.3g} to the diagonal ({rel:.1e} of the mean diagonal). "
                 f"Condition after repair: rcond {f.rcond:.3g}, about {f.digits_lost:.1f} digits lost. "
                 "Results describe a + jitter*I; find dependent variables with whiten.pivoted_cholesky")
            return f
        rel *= opts.jitter_factor
    raise NotPositiveDefiniteError(
        f"a: could not be factored even with jitter {opts.jitter_ceiling:.1e} of the mean diagonal "
        f"(failed at pivot {_name(names, pivot)}{zv}). Remove dependent variables (see "
        "whiten.pivoted_cholesky), use a shrinkage estimate, or raise whiten.settings(jitter_ceiling=...)",
        pivot=pivot, value=lam_rel)


def _finish(lower, m, rc_s, anorm, amount, rel, method, names, opts, conditioning_warning=True) -> Factor:
    h = _PendingHealth(rc_s, anorm, float(amount), float(rel), method)
    f = Factor(lower, h, names, matrix=m, _copy=False)  # both arrays were made for this factor
    if conditioning_warning and h.digits_lost > opts.digits_warn:
        warn(ConditioningWarning,
             f"matrix is ill-conditioned: rcond {rc_s:.3g} (unit-diagonal scaling), about "
             f"{h.digits_lost:.1f} of ~16 significant digits may be lost in solves "
             f"(threshold {opts.digits_warn:g}). Consider removing near-redundant variables "
             "(whiten.pivoted_cholesky names them) or a shrinkage estimate")
    return f


def _check_jitter(jitter: Any) -> str | bool | float:
    """``"auto"``, ``False`` or a finite non-negative number; else an InputError saying what is accepted."""
    if jitter is False or (isinstance(jitter, str) and jitter == "auto"):
        return jitter
    ok = isinstance(jitter, (int, float, np.integer, np.floating)) and not isinstance(jitter, (bool, np.bool_))
    if ok and np.isfinite(float(jitter)) and float(jitter) >= 0:
        return float(jitter)
    raise InputError(f"jitter: expected 'auto', False or a non-negative number (an amount added to the "
                     f"diagonal), got {jitter!r}")
