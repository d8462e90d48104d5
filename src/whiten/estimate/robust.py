"""Minimum Covariance Determinant by FastMCD, with consistency factor and reweighting.

The MCD (Rousseeuw, 1984) is the mean and covariance of the h rows whose
covariance has the smallest determinant. FastMCD (Rousseeuw & Van Driessen,
1999, Technometrics 41, 212-223) finds it with random elemental starts and
"concentration steps": given a mean and covariance, the h rows of smallest
Mahalanobis distance give a new mean and covariance whose determinant is not
larger. What this module does:

1. 500 starts from random (p + 1)-row subsets (enlarged while singular),
   each followed by two C-steps; for more than 1500 rows the starts run on a
   random subset of 1500 rows (a simplification of the paper's nested
   partitions, documented in ``params``).
2. The 10 best candidates are iterated to convergence on all rows; the one of
   smallest log-determinant is the raw MCD.
3. The raw covariance is multiplied by the consistency factor
   ``c = (h/n) / F_{chi2(p+2)}(chi2_p^{-1}(h/n))`` (Croux & Haesbroeck, 1999),
   which makes it unbiased for Gaussian data.
4. One reweighting step: rows with squared distance above the 0.975 quantile
   of chi2(p) are left out (these are the *flagged* rows), the rest give the
   final mean and (n_kept - 1)-covariance, again multiplied by the
   consistency factor of a 0.975 truncation.

Distances are ``Factor.quad`` and determinants ``Factor.logdet`` (log space,
no overflow); no inverse is formed. The random starts use a fixed internal
seed (:data:`MCD_SEED`) unless one is given, so fits are reproducible.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from collections.abc import Sequence

import numpy as np
from scipy import stats

from ..errors import ConditioningWarning, InputError, NotPositiveDefiniteError
from ..linalg.cholesky import cholesky
from ..linalg.factor import Factor
from ..linalg.health import health_of
from .sample import factor_from_r
from .streaming import block_state

__all__ = ["MCD_SEED", "MCDResult", "fast_mcd", "consistency_factor"]

MCD_SEED = 19990801  #: default seed of the random starts (fixed: fits are reproducible)
_N_STARTS = 500
_N_BEST = 10
_POOL = 1500
_MAX_CSTEPS = 200
_REWEIGHT_Q = 0.975


@dataclasses.dataclass(frozen=True)
class MCDResult:
    """Outcome of :func:`fast_mcd`.

    Attributes
    ----------
    mean : ndarray (p,)
        Reweighted mean.
    factor : Factor
        Factor of the reweighted, consistency-corrected covariance.
    kept : ndarray of bool (n,)
        Rows used by the reweighted estimate; ``~kept`` are the flagged rows.
    raw_mean : ndarray (p,)
    raw_factor : Factor
        Factor of the raw MCD covariance (consistency-corrected).
    params : dict
    """

    mean: np.ndarray
    factor: Factor
    kept: np.ndarray
    raw_mean: np.ndarray
    raw_factor: Factor
    params: dict


def consistency_factor(frac: float, p: int) -> float:
    """``frac / F_{chi2(p+2)}(chi2_p^{-1}(frac))`` (Croux & Haesbroeck, 1999).

    The covariance of the fraction ``frac`` of Gaussian rows nearest the
    centre (in Mahalanobis distance) underestimates the covariance by the
    reciprocal of this factor.
    """
    if frac >= 1.0:
        return 1.0
    q = stats.chi2.ppf(frac, p)
    return float(frac / stats.chi2.cdf(q, p + 2))


def _subset_fit(rows: np.ndarray) -> tuple[np.ndarray, Factor | None]:
    """Mean and factor of the (1/m) covariance of the rows; None when singular."""
    mu = rows.mean(axis=0)
    c = rows - mu
    cov = (c.T @ c) / rows.shape[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConditioningWarning)
        try:
            f = cholesky(cov, jitter=False)
        except (NotPositiveDefiniteError, InputError):
            return mu, None
    if not math.isfinite(f.logdet()) or f.digits_lost > 14:
        return mu, None
    return mu, f


def _csteps(y: np.ndarray, h: int, mu: np.ndarray, f: Factor, max_steps: int):
    """Concentration steps until the subset repeats; returns (logdet, mu, f, subset, steps)."""
    prev = None
    steps = 0
    while steps < max_steps:
        d2 = f.quad(y, shift=mu)
        sub = np.sort(np.argpartition(d2, h - 1)[:h])
        if prev is not None and np.array_equal(sub, prev):
            break
        mu_new, f_new = _subset_fit(y[sub])
        steps += 1
        if f_new is None:
            raise InputError(
                f"{h} or more rows lie on a hyperplane (their covariance is singular), so the MCD is not "
                "defined; look for duplicated rows, constant or dependent columns")
        mu, f, prev = mu_new, f_new, sub
    return f.logdet(), mu, f, prev, steps


def fast_mcd(x: np.ndarray, names: Sequence[str], *, support_fraction: float | None = None,
             seed: int | None = None, n_starts: int = _N_STARTS) -> MCDResult:
    """FastMCD with consistency factor and one reweighting step (see the module notes).

    Parameters
    ----------
    x : ndarray, shape (n, p)
        Complete rows.
    names : sequence of str
    support_fraction : float in [0.5, 1], optional
        h / n; default h = floor((n + p + 1) / 2).
    seed : int, optional
        Default :data:`MCD_SEED`.
    n_starts : int

    Returns
    -------
    MCDResult

    Raises
    ------
    InputError
        n <= p + 1, a support fraction outside [0.5, 1], or an exact fit
        (h rows on a hyperplane).

    Notes
    -----
    Cost: ``n_starts`` x (p^3 + 3 m p^2) for the starts on m <= 1500 rows,
    then about ten C-steps of n p^2 for each of the 10 best candidates.
    """
    n, p = x.shape
    if n <= p + 1:
        raise InputError(f"robust: {n} complete row(s) for {p} columns; the MCD needs more than p + 1 = {p + 1} "
                         "rows (and many more to be useful). Use estimator='shrinkage' for few rows")
    h_min = (n + p + 1) // 2
    if support_fraction is None:
        h = h_min
    else:
        if not 0.5 <= float(support_fraction) <= 1.0:
            raise InputError(f"support_fraction: expected a value in [0.5, 1], got {support_fraction!r}")
        h = max(h_min, min(n, int(math.ceil(float(support_fraction) * n))))
    seed = MCD_SEED if seed is None else int(seed)
    rng = np.random.default_rng(seed)
    # work on standardized data: shift by the coordinate-wise median and divide by the MAD (the
    # standard deviation where the MAD is 0). Every step below is affine equivariant and the random
    # subsets are drawn by position, so units enter only through these two exact-to-rounding maps
    shift = np.median(x, axis=0)
    y = x - shift
    unit = np.median(np.abs(y), axis=0)
    flat = ~(unit > 0)
    if flat.any():
        unit[flat] = y[:, flat].std(axis=0)
    unit[~(unit > 0)] = 1.0
    y = y / unit

    if h == n:
        mu, f = _subset_fit(y)
        if f is None:
            raise InputError("robust: the covariance of all rows is singular")
        best = (f.logdet(), mu, f, np.arange(n), 0)
        pool_n = n
    else:
        pool = np.sort(rng.choice(n, _POOL, replace=False)) if n > _POOL else np.arange(n)
        yp = y[pool]
        m = yp.shape[0]
        hp = max(p + 1, int(math.ceil(h * m / n)))
        cands = []
        for _ in range(n_starts):
            idx = list(rng.choice(m, p + 1, replace=False))
            mu, f = _subset_fit(yp[idx])
            if f is None:
                # enlarge the elemental subset until it spans the space (the paper's rule)
                rest = [k for k in rng.permutation(m) if k not in set(idx)]
                while f is None and rest:
                    idx.append(rest.pop())
                    mu, f = _subset_fit(yp[idx])
                if f is None:
                    continue
            try:
                cands.append(_csteps(yp, hp, mu, f, 2))
            except InputError:
                continue
        if not cands:
            raise InputError("robust: every start was singular; the rows span fewer than p dimensions")
        cands.sort(key=lambda c: c[0])
        finals = []
        for _, mu, f, _, _ in cands[:_N_BEST]:
            finals.append(_csteps(y, h, mu, f, _MAX_CSTEPS))
        best = min(finals, key=lambda c: c[0])
        pool_n = m
    _, mu_raw, f_raw_h, subset, steps = best
    c_raw = consistency_factor(h / n, p)
    low_raw = f_raw_h.lower * math.sqrt(c_raw)
    f_raw = Factor(low_raw, f_raw_h.health, list(names))  # of the standardized data

    cutoff = float(stats.chi2.ppf(_REWEIGHT_Q, p))
    d2 = f_raw.quad(y, shift=mu_raw)
    assert isinstance(d2, np.ndarray)  # y holds rows (2-D), so one distance per row
    kept = d2 <= cutoff
    n_kept = int(kept.sum())
    if n_kept <= p + 1:  # pragma: no cover - needs pathological data
        raise InputError(f"robust: only {n_kept} rows survive the reweighting; too few for {p} columns")
    st = block_state(y[kept], None, np.zeros(p), "qr")
    c_rw = consistency_factor(_REWEIGHT_Q, p)
    fs = factor_from_r(st.mat, math.sqrt(c_rw / (n_kept - 1.0)), list(names), method="mcd")
    low = unit[:, None] * fs.lower  # back to the data's units
    f = Factor(low, health_of(low, 0.0, 0.0, "mcd"), list(names))
    low_raw = unit[:, None] * f_raw.lower
    f_raw = Factor(low_raw, health_of(low_raw, 0.0, 0.0, "mcd"), list(names))
    params = {
        "h": int(h), "support_fraction": h / n, "seed": seed, "n_starts": int(n_starts),
        "start_rows": int(pool_n), "raw_consistency": c_raw, "reweight_consistency": c_rw,
        "reweight_quantile": _REWEIGHT_Q, "cutoff_d2": cutoff, "raw_logdet": f_raw.logdet(),
        "raw_mean": (shift + unit * mu_raw).tolist(), "csteps_final": int(steps), "n_total": int(n),
    }
    return MCDResult(shift + unit * st.mean, f, kept, shift + unit * mu_raw, f_raw, params)
