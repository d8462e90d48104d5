"""Drift: the multivariate EWMA statistic, computed through the baseline's factor, and its run-length limit.

The statistic (Lowry, Woodall, Champ & Rigdon 1992, "A multivariate
exponentially weighted moving average control chart", Technometrics 34(1),
46-53; reference given from memory) smooths the centred rows,

    z_t = lambda (x_t - mu) + (1 - lambda) z_{t-1},   z_0 = 0,

and charts ``T2_t = z_t' S_t^{-1} z_t`` with the exact covariance of z_t for
independent rows of covariance Sigma,

    S_t = c_t Sigma,   c_t = lambda / (2 - lambda) * (1 - (1 - lambda)^(2 t)).

No inverse is formed: with ``Sigma = L L'`` the smoothing commutes with the
whitening, so ``v_t = L^{-1} z_t`` is the EWMA of the whitened rows
``u_t = L^{-1}(x_t - mu)`` (one BLAS-3 triangular solve per block) and
``T2_t = ||v_t||^2 / c_t``. Each ``T2_t`` of in-control rows is exactly
chi-square with p degrees of freedom; the rows are strongly correlated, so
the limit ``h`` is set for an in-control average run length (ARL) by
simulation (:func:`mewma_limit`). The statistic is invariant to any affine
change of the sensors, so whitened N(0, I) rows serve for every baseline of p
sensors.

Rows with a missing reading are *held*: they are not smoothed in, ``z`` and
the count ``t`` keep their values, and the row's EWMA columns are NaN (no
alarm) with a note. ``z_t`` is then the EWMA of the complete rows in order,
so ``S_t`` stays exact for the rows used (missing at random assumed); time
runs in complete rows, not in clock time.

Cautions: the limit assumes independent rows with the baseline's mean and
covariance known. Autocorrelated readings (and a baseline estimated from few
rows) make the in-control run length shorter than stated.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._records import fields_to_dict
from ..errors import InputError
from ..linalg.factor import Factor

__all__ = ["EwmaLimit", "EwmaSmoother", "mewma_arl", "mewma_limit", "check_lambda", "SMOOTH_KIND",
           "DEFAULT_DRAWS", "DEFAULT_SEED", "EWMA_CAUTION"]

SMOOTH_KIND = "smooth"  # per-sensor columns smooth:<sensor>: drop terms of the smoothed vector
DEFAULT_DRAWS = 2000
DEFAULT_SEED = 19920201
_GROUPS = 20  # jackknife groups for the Monte Carlo standard errors
_VARIANCES = ("exact", "asymptotic")
EWMA_CAUTION = ("Caution: the EWMA and persistence limits assume independent rows and the baseline's parameters "
                "known; autocorrelated readings (or few reference rows) shorten in-control run lengths and "
                "raise false-alarm rates.")


def check_lambda(lam: Any, name: str = "ewma") -> float:
    """The smoothing weight as a float in (0, 1], or an InputError."""
    try:
        v = float(lam)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected a smoothing weight lambda in (0, 1], got {lam!r}") from None
    if not (0.0 < v <= 1.0):
        raise InputError(f"{name}: expected a smoothing weight lambda in (0, 1] (0.05 to 0.25 is usual), got {lam!r}")
    return v


def _check_arl(arl: Any, name: str = "ewma_arl") -> float:
    try:
        v = float(arl)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected an in-control average run length (rows) > 1, got {arl!r}") from None
    if not (1.0 < v <= 1e6) or not math.isfinite(v):
        raise InputError(f"{name}: expected an in-control average run length between 1 and 1e6 rows, got {arl!r}")
    return v


def _c(t: np.ndarray, lam: float, variance: str) -> np.ndarray:
    """c_t with S_t = c_t Sigma; 1 - (1-lam)^(2t) by expm1/log1p (accurate for small lam t)."""
    if variance == "asymptotic":
        return np.full(np.shape(t), lam / (2.0 - lam))
    if lam == 1.0:
        return np.ones(np.shape(t))
    return lam / (2.0 - lam) * -np.expm1(2.0 * np.asarray(t, dtype=float) * math.log1p(-lam))


# ----------------------------------------------------------------- simulation
def _records(p: int, lam: float, draws: int, horizon: int, h_top: float, seed: int, variance: str):
    """Running-maximum records of T2_t for ``draws`` in-control paths of whitened N(0, I) rows.

    A path stops at ``horizon`` or once its maximum passes ``h_top`` (the run
    length of any h <= h_top is then known). Returns (path, time, value)
    sorted by path then time; values increase within a path.
    """
    rng = np.random.default_rng(seed)
    alive = np.arange(draws)
    z = np.zeros((draws, p))
    top = np.full(draws, -np.inf)
    recs_i, recs_t, recs_v = [], [], []
    c = _c(np.arange(1, horizon + 1), lam, variance)
    for t in range(1, horizon + 1):
        z *= 1.0 - lam
        z += lam * rng.standard_normal(z.shape)
        t2 = np.einsum("ij,ij->i", z, z) / c[t - 1]
        new = np.flatnonzero(t2 > top)
        if new.size:
            top[new] = t2[new]
            recs_i.append(alive[new])
            recs_t.append(np.full(new.size, t, dtype=np.int64))
            recs_v.append(t2[new])
            done = top > h_top
            if done.any():
                keep = ~done
                alive, z, top = alive[keep], z[keep], top[keep]
                if alive.size == 0:
                    break
    i = np.concatenate(recs_i)
    tt = np.concatenate(recs_t)
    v = np.concatenate(recs_v)
    order = np.argsort(i, kind="stable")  # within a path the records stay in time order
    return i[order], tt[order], v[order]


def _run_lengths(recs, h: float, draws: int, horizon: int) -> np.ndarray:
    """First time each path's T2 exceeds h (horizon + 1 when it does not within the horizon)."""
    i, t, v = recs
    above = v > h
    # records rise within a path, so the first record above h in each path is where `above` switches on
    first = above.copy()
    first[1:] &= ~(above[:-1] & (i[1:] == i[:-1]))
    rl = np.full(draws, horizon + 1, dtype=np.int64)
    rl[i[first]] = t[first]
    return rl


def _arl_from_sums(s_min: float, s_tail: float, s_mid: float, n: float, horizon: int, mid: int) -> float:
    """ARL = sum_t P(RL > t): the observed part plus a geometric tail fitted on (mid, horizon]."""
    observed = s_min / n
    surv_end, surv_mid = s_tail / n, s_mid / n
    if surv_end == 0.0:
        return observed
    if surv_end >= surv_mid:
        return math.inf  # no alarm at all in the fitting window: the horizon was far too short
    q = (surv_end / surv_mid) ** (1.0 / (horizon - mid))
    return observed + surv_end / (1.0 - q)


def _arl_and_jackknife(rl: np.ndarray, horizon: int) -> tuple[float, np.ndarray]:
    """ARL of the run lengths and its leave-one-group-out values (``_GROUPS`` groups)."""
    mid = horizon // 2
    n = rl.size
    g = np.arange(n) % _GROUPS
    parts = np.stack([np.minimum(rl, horizon), rl > horizon, rl > mid]).astype(float)
    sums = np.stack([np.bincount(g, weights=row, minlength=_GROUPS) for row in parts])  # (3, G)
    cnt = np.bincount(g, minlength=_GROUPS).astype(float)
    tot = sums.sum(axis=1)
    full = _arl_from_sums(tot[0], tot[1], tot[2], float(n), horizon, mid)
    loo = np.array([_arl_from_sums(tot[0] - sums[0, k], tot[1] - sums[1, k], tot[2] - sums[2, k],
                                   float(n) - cnt[k], horizon, mid) for k in range(_GROUPS)])
    return full, loo


def _jack_se(loo: np.ndarray) -> float:
    g = loo.size
    if not np.all(np.isfinite(loo)):
        return math.inf
    return float(math.sqrt((g - 1) / g * np.sum((loo - loo.mean()) ** 2)))


def _check_sim(p: Any, draws: Any, seed: Any, variance: str) -> tuple[int, int, int]:
    if variance not in _VARIANCES:
        raise InputError(f"variance: expected one of {_VARIANCES}, got {variance!r}")
    try:
        pp, dd, ss = int(p), int(draws), int(seed)
    except (TypeError, ValueError):
        raise InputError(f"p, draws and seed must be integers, got {p!r}, {draws!r}, {seed!r}") from None
    if pp < 1 or dd < 10 * _GROUPS:
        raise InputError(f"need p >= 1 sensors and draws >= {10 * _GROUPS} simulated paths, got p={p}, draws={draws}")
    return pp, dd, ss


def mewma_arl(p: int, lam: float, h: float, *, horizon: int = 2000, draws: int = DEFAULT_DRAWS,
              seed: int = DEFAULT_SEED, variance: str = "exact") -> tuple[float, float]:
    """In-control average run length of the MEWMA chart with limit ``h``, by simulation.

    Parameters
    ----------
    p : int
        Sensors.
    lam : float
        Smoothing weight in (0, 1].
    h : float
        Limit on T2_t.
    horizon : int
        Rows simulated per path; the survival beyond is extended by a
        geometric tail fitted on the second half (choose horizon >= the ARL).
    draws, seed : int
        Paths simulated and the seed (reproducible).
    variance : {"exact", "asymptotic"}
        ``"exact"``: c_t as above (what scoring uses); ``"asymptotic"``:
        c = lambda / (2 - lambda) at every t, the form of the published tables.

    Returns
    -------
    (arl, se) : the estimate and its Monte Carlo standard error (grouped jackknife)

    Examples
    --------
    >>> import whiten
    >>> arl, se = whiten.monitor.mewma_arl(1, 1.0, 9.0, draws=400, horizon=2000)  # Shewhart: 1/P(chi2_1 > 9)
    >>> abs(arl - 370.4) < 5 * se
    True
    """
    pp, dd, ss = _check_sim(p, draws, seed, variance)
    lam = check_lambda(lam, "lam")
    horizon = int(horizon)
    if horizon < 20:
        raise InputError(f"horizon: expected at least 20 rows, got {horizon}")
    recs = _records(pp, lam, dd, horizon, float(h), ss, variance)
    full, loo = _arl_and_jackknife(_run_lengths(recs, float(h), dd, horizon), horizon)
    return float(full), _jack_se(loo)


@dataclass(frozen=True)
class EwmaLimit:
    """The MEWMA limit for an in-control ARL, with its Monte Carlo error.

    Attributes
    ----------
    p, lam, arl : the sensors, the smoothing weight and the in-control ARL aimed at
    h : the limit on T2_t
    h_se : Monte Carlo standard error of h (grouped jackknife over the paths)
    arl_se : standard error of the simulated ARL at h (the ARL achieved is arl +- arl_se)
    draws, seed, horizon : the simulation (reproducible from them)
    """

    p: int
    lam: float
    arl: float
    h: float
    h_se: float
    arl_se: float
    draws: int
    seed: int
    horizon: int

    def describe(self) -> str:
        return (f"MEWMA (Lowry et al. 1992), lambda {self.lam:g}: limit {self.h:.4g} (Monte Carlo s.e. "
                f"{self.h_se:.2g}) for an in-control ARL of {self.arl:g} rows (s.e. {self.arl_se:.2g}), "
                f"{self.draws} simulated paths, seed {self.seed}")

    def to_dict(self) -> dict:
        return fields_to_dict(self)


def _root(recs, draws: int, horizon: int, lo: float, hi: float, target: float, rows=None) -> float:
    """h in [lo, hi] where the simulated ARL (of the paths ``rows``) crosses ``target`` (bisection)."""
    i, t, v = recs
    if rows is not None:
        keep = rows[i]
        recs = (i[keep], t[keep], v[keep])
    sel = rows if rows is not None else np.ones(draws, dtype=bool)

    def arl(h: float) -> float:
        rl = _run_lengths(recs, h, draws, horizon)[sel]
        return _arl_and_jackknife(rl, horizon)[0]

    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if arl(mid) < target:
            lo = mid
        else:
            hi = mid
        if hi - lo <= 1e-6 * hi:
            break
    return 0.5 * (lo + hi)


@functools.lru_cache(maxsize=64)
def _limit_cached(p: int, lam: float, arl: float, draws: int, seed: int) -> EwmaLimit:
    from scipy import stats

    horizon = int(math.ceil(2.0 * arl + 20.0 / lam))
    # every T2_t is chi-square(p), so the ARL at the 1 / (2 arl) quantile is at least 2 arl: h lies below it
    hi = float(stats.chi2.isf(0.5 / arl, p))
    lo = 0.0
    recs = _records(p, lam, draws, horizon, hi, seed, "exact")
    rl_hi = _run_lengths(recs, hi, draws, horizon)
    if _arl_and_jackknife(rl_hi, horizon)[0] < arl:  # pragma: no cover - would contradict the chi-square margin
        raise InputError(f"ewma: could not bracket the limit for ARL {arl:g} (p={p}, lambda={lam:g})")
    h = float(_root(recs, draws, horizon, lo, hi, arl))
    groups = np.arange(draws) % _GROUPS
    loo = np.array([_root(recs, draws, horizon, lo, hi, arl, rows=groups != k) for k in range(_GROUPS)])
    full, loo_arl = _arl_and_jackknife(_run_lengths(recs, h, draws, horizon), horizon)
    return EwmaLimit(p=p, lam=lam, arl=arl, h=h, h_se=_jack_se(loo), arl_se=_jack_se(loo_arl),
                     draws=draws, seed=seed, horizon=horizon)


def mewma_limit(p: int, lam: float, arl: float, *, draws: int = DEFAULT_DRAWS, seed: int = DEFAULT_SEED) -> EwmaLimit:
    """The limit h on the exact-variance MEWMA statistic giving in-control ARL ``arl``, by simulation.

    Parameters
    ----------
    p : int
        Sensors.
    lam : float
        Smoothing weight in (0, 1].
    arl : float
        In-control average run length, rows (e.g. ``1 / alpha`` to match a
        per-row T² screen at false-alarm probability alpha).
    draws, seed : int
        Simulated paths and seed: the same arguments give the same limit.

    Returns
    -------
    EwmaLimit

    Notes
    -----
    ``draws`` paths of whitened N(0, I) rows (the statistic is affine
    invariant, so no baseline parameter enters) are run up to ``2 arl + 20 /
    lambda`` rows, or until their T2 passes the chi-square(p) quantile at
    1 / arl, above which the limit cannot lie because each T2_t is exactly
    chi-square. The records of each path's running maximum give the run
    length for every h at once; the survival beyond the horizon is a
    geometric tail fitted on its second half. h solves ARL(h) = arl by
    bisection; its standard error is a jackknife over 20 groups of paths.
    Cost: about ``draws * (2 arl) * p`` normal draws (a second or so for
    p = 8, arl = 1000). Results are kept for the life of the process
    (keyed by p, lambda, arl, draws, seed): a limit depends on no baseline
    parameter, so it needs no place in the model file, and the seed makes a
    recomputation in a new process give the same digits.

    Examples
    --------
    >>> import whiten
    >>> lim = whiten.monitor.mewma_limit(1, 1.0, 100.0, draws=1000)  # lambda = 1: Shewhart, h = chi2_1 quantile
    >>> abs(lim.h - 6.635) < 4 * lim.h_se + 0.05
    True
    """
    pp, dd, ss = _check_sim(p, draws, seed, "exact")
    return _limit_cached(pp, check_lambda(lam), _check_arl(arl), dd, ss)


# ----------------------------------------------------------------- scoring
class EwmaSmoother:
    """The MEWMA state across batches: whitened smoothed vector and the count of rows smoothed in.

    ``update(x)`` takes rows in the model's column order (NaN = missing) and
    returns the EWMA columns for them; successive calls continue the same
    chart (the chunks of a file).
    """

    def __init__(self, mean: np.ndarray, factor: Factor, columns: list[str], lam: float, limit: EwmaLimit):
        self.mean, self.factor, self.columns = mean, factor, list(columns)
        self.lam = float(lam)
        self.limit = limit
        self.v = np.zeros(factor.dim)
        self.t = 0
        self.n_alarm = 0
        self.n_held = 0
        self.first_alarm: int | None = None  # 0-based row of the first alarm
        self._rows = 0

    def update(self, x: np.ndarray) -> dict[str, np.ndarray]:
        from scipy.signal import lfilter

        n, p = x.shape
        lam = self.lam
        complete = ~np.isnan(x).any(axis=1)
        idx = np.flatnonzero(complete)
        t2 = np.full(n, np.nan)
        drop = np.full((n, p), np.nan)
        count = np.empty(n, dtype=np.int64)
        top = np.full(n, "", dtype=object)
        if idx.size:
            # a reading beyond the double range of its spread overflows to inf, as T2's d2 does (the
            # scores note it); numpy's overflow warning would only repeat that
            with np.errstate(over="ignore", invalid="ignore"):
                u = self.factor.whiten(x[idx] - self.mean)
                # v_t = lam u_t + (1 - lam) v_{t-1}; the filter's carried state is (1 - lam) v_{t-1}
                v, _ = lfilter([lam], [1.0, -(1.0 - lam)], u, axis=0, zi=((1.0 - lam) * self.v)[None, :])
                tt = self.t + np.arange(1, idx.size + 1)
                c = _c(tt, lam, "exact")
                t2[idx] = np.einsum("ij,ij->i", v, v) / c
                w = self.factor.solve_lower(v.T, trans=True).T  # Sigma^{-1} z_t up to the factor c_t
                w /= self.factor.inv_sd()[None, :]
                drop[idx] = w * w / c[:, None]
                top[idx] = np.asarray(self.columns, dtype=object)[np.argmax(drop[idx], axis=1)]
                self.v = v[-1].copy()
        held_before = np.cumsum(~complete)
        count[:] = self.t + np.cumsum(complete)
        self.t += idx.size
        alarm = np.zeros(n, dtype=bool)
        alarm[idx] = t2[idx] > self.limit.h
        if alarm.any() and self.first_alarm is None:
            self.first_alarm = self._rows + int(np.flatnonzero(alarm)[0])
        self.n_alarm += int(alarm.sum())
        self.n_held += int(held_before[-1]) if n else 0
        self._rows += n
        out: dict[str, np.ndarray] = {
            "ewma_t2": t2, "ewma_limit": np.full(n, self.limit.h), "ewma_alarm": alarm,
            "ewma_top": top, "ewma_rows": count,
        }
        for j, col in enumerate(self.columns):
            out[f"{SMOOTH_KIND}:{col}"] = drop[:, j]
        return out

    def attrs(self) -> dict:
        return {"ewma_lambda": self.lam, "ewma_limit": self.limit.to_dict(), "ewma_basis": self.limit.describe(),
                "ewma_caution": EWMA_CAUTION}
