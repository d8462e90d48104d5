"""Exact control limits for squared Mahalanobis distances (Hotelling T²).

Three situations, chosen with ``phase``:

``"new"``
    A row that was *not* part of the m reference rows, scored against the
    sample mean and unbiased sample covariance of those rows::

        T² ~ p (m + 1)(m - 1) / (m (m - p)) · F(p, m - p)

``"reference"``
    A row of the reference set itself (a retrospective check of the data the
    baseline was fitted on)::

        T² ~ (m - 1)² / m · Beta(p / 2, (m - p - 1) / 2)

``"known"``
    The mean and covariance are known exactly (not estimated)::

        T² ~ chi-square(p)

Sources: Tracy, Young & Mason (1992), "Multivariate control charts for
individual observations", Journal of Quality Technology 24(2), 88-95, derive
the reference-set Beta law and the F law for a future observation; the same
limits are given in D. C. Montgomery, *Introduction to Statistical Quality
Control* (Wiley), in the chapter on multivariate process monitoring. The
formulas above are written from memory of those sources; the tests check
them against simulation and against the scipy.stats distributions.

When a row has only ``k < p`` sensors observed, it is scored on the marginal
of those k sensors, which is estimated from the same m rows, so the same laws
hold with p replaced by k (per row).

The laws assume the baseline is the plain sample estimate (``estimator
"sample"``) of m independent rows from a Gaussian. For shrinkage, robust and
weighted baselines the law of a new row is simulated
(:mod:`whiten.monitor.calibrated`); :func:`whiten.monitor.score` states the
law it used in ``DataFrame.attrs["limit_basis"]``.

A screen is *weak* when its limit is more than :data:`WEAK_RATIO` times the
known-parameter chi-square limit: estimation error, not the process, then
sets the limit. :func:`screen_check` says so, with the reference rows the
exact law needs to bring the limit within 10% (:func:`rows_within`).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import special, stats

from ..errors import InputError

__all__ = ["PHASES", "WEAK_RATIO", "check_phase", "t2_pvalue", "t2_limit", "t2_law", "rows_within", "screen_check"]

PHASES = ("new", "reference", "known")
WEAK_RATIO = 1.5  #: a limit above this multiple of the chi-square limit makes a weak screen


def check_phase(phase: str, p: int, m: int | None) -> None:
    """Raise :class:`~whiten.errors.InputError` when ``phase`` cannot be used with p sensors and m rows."""
    if phase not in PHASES:
        raise InputError(f"phase: expected one of {PHASES}, got {phase!r}")
    if phase == "known":
        return
    if m is None:
        raise InputError(f"phase={phase!r} needs the number of reference rows m; use phase='known' "
                         "when the mean and covariance are not estimates")
    if phase == "new" and m <= p:
        raise InputError(
            f"phase='new' needs more reference rows than sensors (m={m}, p={p}): the F({p}, m-p) "
            "limit does not exist. Fit the baseline on more rows, or use phase='known' if the "
            "covariance is not a sample estimate")
    if phase == "reference" and m <= p + 1:
        raise InputError(
            f"phase='reference' needs m >= p + 2 reference rows (m={m}, p={p}): the Beta(p/2, "
            "(m-p-1)/2) law does not exist. Fit the baseline on more rows")


def t2_law(phase: str, p: int, m: int | None = None) -> str:
    """A one-line statement of the distribution used (for reports and chart captions)."""
    check_phase(phase, p, m)
    if phase == "new":
        assert m is not None  # check_phase refuses m=None for this phase
        return f"T² ~ {p}({m}+1)({m}-1)/({m}({m}-{p})) · F({p}, {m - p})  [Tracy, Young & Mason 1992]"
    if phase == "reference":
        assert m is not None  # check_phase refuses m=None for this phase
        return f"T² ~ ({m}-1)²/{m} · Beta({p}/2, {m - p - 1}/2)  [Tracy, Young & Mason 1992]"
    return f"T² ~ chi-square({p})  [parameters known]"


def _broadcast(d2: Any, p: Any) -> tuple[np.ndarray, np.ndarray]:
    d2 = np.asarray(d2, dtype=np.float64)
    p = np.asarray(p)
    if p.dtype.kind not in "iu":
        if not np.all(np.isfinite(p)) or np.any(p != np.round(p)):
            raise InputError("p: the number of sensors must be a whole number")
        p = p.astype(np.int64)
    d2b, pb = np.broadcast_arrays(d2, p)
    return d2b, pb


def t2_pvalue(d2: Any, p: Any, m: int | None = None, *, phase: str = "new") -> np.ndarray:
    """Upper-tail probability of squared distances ``d2`` under the law of ``phase``.

    Parameters
    ----------
    d2 : array_like, shape (N,)
        Squared Mahalanobis distances (NaN passes through as NaN).
    p : int or array_like of int, shape (N,)
        Sensors used per row (``n_observed``); rows with p = 0 get NaN.
    m : int, optional
        Reference rows the mean and covariance were estimated from (not needed
        for ``phase="known"``).
    phase : {"new", "reference", "known"}

    Returns
    -------
    ndarray, shape (N,)

    Raises
    ------
    InputError
        Unknown phase, or too few reference rows for the largest p (see
        :func:`check_phase`).

    Notes
    -----
    The survival functions behind scipy.stats' F, Beta and chi-square laws
    (``scipy.special.fdtrc``, ``betaincc``, ``chdtrc``) are used, so small
    p-values keep their relative accuracy (no ``1 - cdf`` cancellation).

    Examples
    --------
    >>> import numpy as np
    >>> from whiten.monitor import t2_pvalue, t2_limit
    >>> lim = t2_limit(0.01, 4, 50, phase="new")
    >>> bool(np.isclose(t2_pvalue(lim, 4, 50, phase="new"), 0.01))
    True
    """
    d2, pp = _broadcast(d2, p)
    out = np.full(d2.shape, np.nan)
    ok = (pp > 0) & ~np.isnan(d2)
    if not ok.any():
        return out
    check_phase(phase, int(pp[ok].max()), m)
    full = bool(ok.all())
    x = d2 if full else d2[ok]
    k = pp if full else pp[ok]
    if full and k.size and (k == k.flat[0]).all():
        k = int(k.flat[0])  # one law for every row: scalar shape parameters
    # the survival functions scipy.stats itself evaluates (fdtrc, betaincc, chdtrc), called
    # directly: the same values without the per-call argument machinery
    if phase == "new":
        assert m is not None  # check_phase refuses m=None for this phase
        scale = k * (m + 1.0) * (m - 1.0) / (m * (m - k))
        res = special.fdtrc(k, m - k, x / scale)
    elif phase == "reference":
        assert m is not None  # check_phase refuses m=None for this phase
        scale = (m - 1.0) ** 2 / m
        res = special.betaincc(np.divide(k, 2.0), (m - k - 1) / 2.0, np.minimum(x / scale, 1.0))
    else:
        res = special.chdtrc(k, x)
    if full:
        return np.asarray(res, dtype=np.float64).reshape(d2.shape)
    out[ok] = res
    return out


def t2_limit(alpha: float, p: Any, m: int | None = None, *, phase: str = "new") -> np.ndarray | float:
    """Squared-distance limit exceeded with probability ``alpha`` under the law of ``phase``.

    Parameters
    ----------
    alpha : float
        False-alarm probability per row, 0 < alpha < 1.
    p : int or array_like of int
        Sensors used (rows with p = 0 get NaN).
    m : int, optional
        Reference rows (not needed for ``phase="known"``).
    phase : {"new", "reference", "known"}

    Returns
    -------
    float for scalar p, else ndarray

    Raises
    ------
    InputError
        alpha outside (0, 1), unknown phase, too few reference rows.
    """
    alpha = check_alpha(alpha)
    scalar = np.ndim(p) == 0
    pp = np.atleast_1d(np.asarray(p))
    out = np.full(pp.shape, np.nan)
    ok = pp > 0
    if ok.any():
        # one quantile per distinct number of sensors (there are at most p), not per row
        if ok.all() and pp.min() == pp.max():  # every row on all sensors: one law, no sort
            uniq, inv = pp[:1].astype(np.int64), np.zeros(pp.size, dtype=np.intp)
        else:
            uniq, inv = np.unique(pp[ok].astype(np.int64), return_inverse=True)
        check_phase(phase, int(uniq.max()), m)
        k = uniq.astype(np.float64)
        if phase == "new":
            assert m is not None  # check_phase refuses m=None for this phase
            lim = k * (m + 1.0) * (m - 1.0) / (m * (m - k)) * stats.f.isf(alpha, k, m - k)
        elif phase == "reference":
            assert m is not None  # check_phase refuses m=None for this phase
            lim = (m - 1.0) ** 2 / m * stats.beta.isf(alpha, k / 2.0, (m - k - 1) / 2.0)
        else:
            lim = stats.chi2.isf(alpha, k)
        out[ok] = np.atleast_1d(lim)[np.asarray(inv).reshape(-1)]
    return float(out[0]) if scalar else out


def check_alpha(alpha: Any, name: str = "alpha") -> float:
    try:
        a = float(alpha)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected a probability between 0 and 1, got {alpha!r}") from None
    if not (0.0 < a < 1.0):
        raise InputError(f"{name}: expected a probability strictly between 0 and 1, got {alpha!r}")
    return a


def rows_within(alpha: float, p: int, within: float = 0.10) -> int:
    """Fewest reference rows m whose exact new-row limit (sample estimator) is within ``within`` of the
    chi-square limit: ``t2_limit(alpha, p, m) <= (1 + within) chi2.isf(alpha, p)``.

    The limit decreases with m towards the chi-square limit, so a doubling search and a bisection
    on whole m find the smallest such m.

    Examples
    --------
    >>> m = rows_within(0.001, 8)
    >>> bool(t2_limit(0.001, 8, m) <= 1.1 * stats.chi2.isf(0.001, 8) < t2_limit(0.001, 8, m - 1))
    True
    """
    alpha = check_alpha(alpha)
    target = (1.0 + within) * float(stats.chi2.isf(alpha, p))

    def ok(m: int) -> bool:
        return float(t2_limit(alpha, p, m, phase="new")) <= target

    lo, hi = p, 2 * p + 2  # ok(lo) is False: no law at m = p
    while not ok(hi):
        lo, hi = hi, 2 * hi
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid
    return hi


def screen_check(limit: float, alpha: float, p: int, m: int | None) -> dict | None:
    """None for a sound screen; else the facts of a weak one (limit, chi-square limit, ratio, rows needed)."""
    chi = float(stats.chi2.isf(alpha, p))
    if not limit > WEAK_RATIO * chi:
        return None
    need = rows_within(alpha, p)
    text = (f"weak screen: the alarm limit {limit:.4g} at alpha={alpha:g} is {limit / chi:.3g} times the "
            f"known-parameter chi-square({p}) limit {chi:.4g}, so estimation error, not the process, sets it and "
            f"faults can go unseen; about {need} reference rows (the sample estimator's exact law; now "
            f"{m}) would bring the limit within 10% of {chi:.4g}")
    return {"alpha": alpha, "limit": float(limit), "chi2_limit": chi, "ratio": float(limit / chi),
            "rows_needed": int(need), "reference_rows": m, "message": text}
