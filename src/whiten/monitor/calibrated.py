"""Simulated control limits: the law of a new row's d2 under the whole fitting procedure.

Where no exact law exists (shrinkage, robust and weighted baselines, and any
number of reference rows m, even m <= p), the law of the squared distance of
a *new* row is found by a parametric bootstrap of the procedure (Efron &
Tibshirani 1993 call it the parametric bootstrap): draw m rows from the
fitted Gaussian, refit them with the same estimator and settings, score fresh
rows from the same Gaussian against the refit, and repeat. Every estimator
here is equivariant under a rescaling and a shift of the sensors (the sample
and MCD estimators under any affine map), so the draws come from the fitted
*correlation* and zero mean: the law does not depend on the units.

What is kept (:class:`SimulatedLaw`) is a compact table: the upper quantiles
of the pooled simulated d2 at 25 tail probabilities from 0.5 down to 1e-4,
and for each the Monte Carlo standard error of the tail probability at that
quantile, from the spread of the exceedance fraction across the draws (batch
means: each refit is one batch, so the refit-to-refit variation, which
dominates, is counted). Limits and p-values interpolate ``log(tail)``
linearly in d2 between table entries; beyond 1e-4 the tail is extrapolated
as a power law in d2 through the last two entries (heavier than the
chi-square's exponential tail, so p-values below 1e-4 are on the large,
cautious side) and the law says so.

Cost: ``draws`` refits of m x p rows plus ``draws x rows_per_draw`` solves;
for robust and weighted baselines with m * p above :data:`ASYMPTOTIC_CELLS`
the estimation error is O(p / m) and the exact law of the sample estimator
with m rows serves (stated as asymptotic); no simulation then runs
(``tests/monitor/test_asymptotic_switch.py`` checks the false-alarm rate just
above the threshold). Shrinkage baselines are always simulated: the shrinkage
intensity is a bias that does not vanish as fast as p / m (at p = 20,
m = 10001 the sample law gave a false-alarm rate of 0.0069 for alpha 0.01);
above :data:`ASYMPTOTIC_CELLS` the draws are cut to keep the cost near
:data:`SIM_CELLS` simulated reference cells (never below 20 draws), and the
Monte Carlo error stated grows accordingly. The robust refits use
:data:`ROBUST_STARTS` random starts instead of 500 (clean Gaussian draws have
no outliers to escape, so few starts find the same optimum), and fewer
draws; the false-alarm test in ``tests/monitor/test_calibrated_limits.py``
checks the resulting limit for the full estimator.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np

from .._numerics import column_norms
from ..errors import InputError
from ..linalg.factor import Factor

__all__ = ["SimulatedLaw", "simulate_law", "TAILS", "ASYMPTOTIC_CELLS", "ASYMPTOTIC_ROBUST_RATIO", "SIM_CELLS",
           "ROBUST_STARTS", "LIMIT_SEED", "simulated_always", "asymptotic_serves"]

TAILS = tuple(float(t) for t in np.geomspace(0.5, 1e-4, 25))  #: tail probabilities of the table
ASYMPTOTIC_CELLS = 200_000  #: above m * p reference cells the sample law with m rows serves
#: shrinkage and robust baselines with fewer rows per sensor than this get a LimitAccuracyWarning
ACCURATE_ROWS_PER_SENSOR = 10
#: measured (actual / stated) false-alarm rate of simulated shrinkage limits: (m/p below, words, lo, hi)
MEASURED_RATIO = ((10, "< 10 p", 0.25, 2.5), (21, "<= 20 p", 0.65, 1.1))
#: robust baselines also need m >= this many rows per sensor before the sample law serves (see asymptotic_serves)
ASYMPTOTIC_ROBUST_RATIO = 1000
SIM_CELLS = 10_000_000  #: shrinkage above ASYMPTOTIC_CELLS: draws x m x p kept near this
ROBUST_STARTS = 10  #: random starts of the simulated robust refits
LIMIT_SEED = 20050419  #: default seed of the simulation (fixed: limits are reproducible)
_DRAWS = {"sample": 200, "shrinkage": 200, "robust": 40}
_FRESH_CELLS = 20_000  # fresh rows per draw times p


@dataclasses.dataclass(frozen=True)
class SimulatedLaw:
    """The simulated law of a new row's d2 (see the module notes).

    Attributes
    ----------
    p : int
        Sensors.
    m : int
        Reference rows of each simulated fit.
    procedure : str
        What was refitted, in words.
    tails, quantiles, mc_se : tuple of float
        Tail probabilities, the d2 exceeded with those probabilities, and the
        Monte Carlo standard error of the tail probability at each quantile.
    draws, rows_per_draw, seed : int
    flagged_mean, flagged_se : float or None
        Robust only: mean and standard error of the reference rows the
        reweighting flags on clean Gaussian data of m rows.
    """

    p: int
    m: int
    procedure: str
    tails: tuple
    quantiles: tuple
    mc_se: tuple
    draws: int
    rows_per_draw: int
    seed: int
    flagged_mean: float | None = None
    flagged_se: float | None = None

    def _lt(self) -> tuple[np.ndarray, np.ndarray]:
        q = np.concatenate([[0.0], np.asarray(self.quantiles, dtype=float)])
        lt = np.concatenate([[0.0], np.log(np.asarray(self.tails, dtype=float))])
        return q, lt

    def sf(self, d2) -> np.ndarray:
        """Tail probability of d2 (NaN passes through)."""
        d2 = np.asarray(d2, dtype=np.float64)
        q, lt = self._lt()
        out = np.exp(np.interp(d2, q, lt))
        hi = d2 > q[-1]
        if np.any(hi):  # power law through the last two entries
            slope = (lt[-1] - lt[-2]) / (math.log(q[-1]) - math.log(q[-2]))
            out[hi] = np.exp(lt[-1] + slope * (np.log(d2[hi]) - math.log(q[-1])))
        out[np.isnan(d2)] = np.nan
        return out

    def isf(self, alpha: float) -> float:
        """The d2 exceeded with probability alpha."""
        q, lt = self._lt()
        la = math.log(alpha)
        if la >= lt[-1]:
            return float(np.interp(-la, -lt, q))
        slope = (lt[-1] - lt[-2]) / (math.log(q[-1]) - math.log(q[-2]))
        return float(math.exp(math.log(q[-1]) + (la - lt[-1]) / slope))

    def se_at(self, alpha: float) -> float:
        """Monte Carlo standard error of the tail probability at the limit for alpha (interpolated)."""
        t = np.log(np.asarray(self.tails))
        return float(np.interp(-math.log(alpha), -t, np.asarray(self.mc_se)))

    def describe(self, alpha: float) -> str:
        extra = "; below 1e-4 extrapolated (power-law tail, cautious)" if alpha < self.tails[-1] else ""
        return (f"T² law simulated by parametric bootstrap of the whole fit ({self.procedure}, m={self.m}, "
                f"p={self.p}; {self.draws} refits x {self.rows_per_draw} new rows, seed {self.seed}); "
                f"Monte Carlo s.e. of alpha at this limit {self.se_at(alpha):.2g}{extra}{self.accuracy()}")

    def accuracy(self) -> str:
        """'' where the simulated law is the estimator's own (pivotal) law; else the measured accuracy."""
        if self.procedure.startswith("weighted sample"):
            return ""
        text = accuracy_note(self.procedure.split(",")[0].split(" ")[0].lower(), self.m, self.p)
        return f"; {text}" if text else ""

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, d: dict) -> SimulatedLaw:
        known = {f.name for f in dataclasses.fields(cls)}
        if not known.issuperset(d) or not {"p", "m", "tails", "quantiles"}.issubset(d):
            raise InputError(f"limit_law: unexpected fields {sorted(set(d) ^ known)}")
        vals = dict(d)
        for k in ("tails", "quantiles", "mc_se"):
            vals[k] = tuple(float(v) for v in vals[k])
        q = np.asarray(vals["quantiles"])
        if len(q) != len(vals["tails"]) or not np.all(np.isfinite(q)) or np.any(np.diff(q) < 0) or q[0] <= 0:
            raise InputError("limit_law: the quantile table is not increasing and finite")
        return cls(**vals)


def _refit(est: str, x: np.ndarray, names: Sequence[str], settings: dict, rng) -> tuple[np.ndarray, Factor, int]:
    from ..estimate.sample import factor_from_r
    from ..estimate.streaming import block_state

    if est == "shrinkage":
        from ..estimate.shrinkage import shrunk_from_rows

        mu, f, _ = shrunk_from_rows(x, settings.get("shrinkage", "ledoit-wolf"), names)
        return mu, f, 0
    if est == "robust":
        from ..estimate.robust import fast_mcd

        res = fast_mcd(x, names, support_fraction=settings.get("support_fraction"),
                       seed=int(rng.integers(2**31)), n_starts=ROBUST_STARTS)
        return res.mean, res.factor, int((~res.kept).sum())
    w = settings.get("weights")
    st = block_state(x, w, np.zeros(x.shape[1]), "qr")
    return st.mean, factor_from_r(st.mat, 1.0 / math.sqrt(st.wsum - 1.0), names), 0


def simulate_law(estimator: str, corr_lower: np.ndarray, m: int, *, settings: dict | None = None,
                 seed: int | None = None, draws: int | None = None) -> SimulatedLaw:
    """Simulate the law of a new row's d2 for ``estimator`` fitted on m rows (see the module notes).

    Parameters
    ----------
    estimator : {"sample", "shrinkage", "robust"}
    corr_lower : ndarray (p, p)
        Lower factor of the fitted correlation matrix (the draws' covariance).
    m : int
        Reference rows per simulated fit.
    settings : dict
        ``shrinkage`` rule, ``support_fraction``, or ``weights`` (length m).
    seed, draws : int, optional

    Examples
    --------
    >>> import numpy as np
    >>> law = simulate_law("shrinkage", np.eye(3), 6, draws=50)
    >>> law.isf(0.01) > law.isf(0.05) > 0
    True
    """
    settings = dict(settings or {})
    p = corr_lower.shape[0]
    seed = LIMIT_SEED if seed is None else int(seed)
    if draws is None:
        draws = _DRAWS.get(estimator, 200)
        if estimator == "robust":  # a robust refit costs ~ m p^2 per C-step: fewer draws for large m
            draws = max(20, min(draws, 8_000 // max(m, 1)))
        elif m * p > ASYMPTOTIC_CELLS:
            draws = max(20, min(draws, SIM_CELLS // (m * p)))
    k = max(500, _FRESH_CELLS // p)
    rng = np.random.default_rng(seed)
    names = [f"x{j}" for j in range(p)]
    d2 = np.empty((draws, k))
    flagged = np.zeros(draws)
    lt = corr_lower.T
    for b in range(draws):
        x = rng.standard_normal((m, p)) @ lt
        mu, f, nf = _refit(estimator, x, names, settings, rng)
        y = rng.standard_normal((k, p)) @ lt
        d2[b] = f.quad(y, shift=mu)
        flagged[b] = nf
    pooled = d2.ravel()
    tails = np.asarray(TAILS)
    qs = np.quantile(pooled, 1.0 - tails)
    qs = np.maximum.accumulate(qs)
    exceed = (d2[:, :, None] > qs[None, None, :]).mean(axis=1)  # (draws, tails)
    se = exceed.std(axis=0, ddof=1) / math.sqrt(draws)
    what = {"shrinkage": f"shrinkage, {settings.get('shrinkage', 'ledoit-wolf')}",
            "robust": f"FastMCD reweighted, {ROBUST_STARTS} starts per refit",
            "sample": "weighted sample covariance, the same weights"}.get(estimator, estimator)
    fm = fse = None
    if estimator == "robust":
        fm, fse = float(flagged.mean()), float(flagged.std(ddof=1) / math.sqrt(draws))
    return SimulatedLaw(p=p, m=int(m), procedure=what, tails=tuple(float(t) for t in tails),
                        quantiles=tuple(float(v) for v in qs), mc_se=tuple(float(v) for v in se),
                        draws=draws, rows_per_draw=k, seed=seed, flagged_mean=fm, flagged_se=fse)


def asymptotic_serves(estimator: str | None, m: int, p: int) -> bool:
    """True when the sample estimator's F law with m rows serves as the (asymptotic) law of a new row.

    Never for shrinkage (:func:`simulated_always`). Weighted sample baselines: above
    :data:`ASYMPTOTIC_CELLS` reference cells. Robust baselines also need ``m >= ASYMPTOTIC_ROBUST_RATIO * p``:
    the reweighted MCD is less efficient than the sample covariance, and its extra error is a multiple of p / m
    that the cell count alone does not bound (at p = 50, m = 4001, above the cell threshold, the F law gave a
    false-alarm rate of 1.07% for 1%; ``tests/monitor/test_asymptotic_switch.py`` measures the excess).

    Examples
    --------
    >>> asymptotic_serves("robust", 4001, 50), asymptotic_serves("robust", 20001, 10)
    (False, True)
    """
    if simulated_always(estimator) or m * p <= ASYMPTOTIC_CELLS:
        return False
    return estimator != "robust" or m >= ASYMPTOTIC_ROBUST_RATIO * p


def accuracy_note(estimator: str | None, m: int, p: int) -> str:
    """The measured accuracy of a simulated shrinkage or robust limit with m rows (empty when not known to be off).

    The bootstrap draws from the fitted correlation, and the law of these estimators depends on the true
    one, so the stated alpha is approximate. Measured (``tests/monitor/test_calibrated_limits.py``, control
    variates of known mean): Ledoit-Wolf and OAS limits alarmed between :data:`MEASURED_RATIO` times alpha
    (too often for moderately correlated sensors at m = 2p, too rarely for strongly correlated ones; below
    m = 2p the rate could not be measured: it is carried by rare baselines and a typical one alarms far less);
    robust limits at m <= 10 p between 0.5 and about 4 times alpha, with a wide spread from baseline to
    baseline.
    """
    if estimator == "fastmcd":
        estimator = "robust"
    if estimator == "shrinkage":
        for below, words, lo, hi in MEASURED_RATIO:
            if m < below * p:
                return (f"approximate at m = {m} {words}: actual false-alarm rates of {lo:g} to {hi:g} times "
                        "alpha were measured for shrinkage limits of this size (deaf for strongly correlated "
                        "sensors, too many alarms for moderate correlation at m near 2 p)")
        return ""
    if estimator == "robust" and m < ACCURATE_ROWS_PER_SENSOR * p:
        return (f"approximate at m = {m} < {ACCURATE_ROWS_PER_SENSOR} p: actual false-alarm rates of about 0.5 to "
                "4 times alpha were measured for robust limits of this size")
    return ""


def simulated_always(estimator: str | None) -> bool:
    """True for the estimators whose limit is simulated whatever m * p (shrinkage; see the module notes)."""
    return estimator == "shrinkage"


def correlation_lower(factor: Factor) -> np.ndarray:
    """Lower factor of the correlation of ``L L^T``: rows of L divided by their norms."""
    low = factor.lower
    return low / column_norms(low.T)[:, None]  # row norms without overflow (a 1e+160 column has ~1e+320)
