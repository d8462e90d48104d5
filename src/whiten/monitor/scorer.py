"""The in-memory scoring engine: a baseline prepared once, rows scored block by block.

:class:`Scorer` holds the factors of the sub-models for each pattern of
missing sensors, so many batches (the chunks of a large file) are scored at
the cost of the solves only. :func:`whiten.monitor.score` builds one per call;
:func:`whiten.monitor.score_file` keeps one for every chunk of a file. The
columns it produces are described in :mod:`whiten.monitor.score`.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np

from .._numerics import column_norms
from .._settings import current
from .._validate import as_float_array, as_rows
from .._warn import warn
from ..errors import ConditioningWarning, InputError, WeakScreenWarning
from ..io.tables import select_columns
from ..linalg.factor import Factor
from .calibrated import ASYMPTOTIC_CELLS, ASYMPTOTIC_ROBUST_RATIO, SimulatedLaw, asymptotic_serves
from .contributions import chain_terms, score_terms_into, whitened_and_drop
from .fdr import add_fdr
from .limits import check_alpha, check_phase, screen_check, t2_law, t2_limit, t2_pvalue

__all__ = ["Scorer", "KINDS", "column_name"]

KINDS = ("drop", "chain", "dev")
_MISSING = ("marginalize", "error")
_CACHE_MAX = 512


def column_name(kind: str, sensor: str) -> str:
    """The per-sensor column name: ``f"{kind}:{sensor}"`` with kind in drop/chain/dev."""
    return f"{kind}:{sensor}"


class _SubModel:
    """Everything needed to score rows that observe the sensors ``obs``."""

    __slots__ = ("obs", "factor", "chain_obs", "chain_factor")

    def __init__(self, full: Factor, obs: np.ndarray, chain_rank: np.ndarray):
        self.obs = obs
        # chain order restricted to the observed sensors
        self.chain_obs = obs[np.argsort(chain_rank[obs], kind="stable")]
        with warnings.catch_warnings():
            # a principal sub-matrix is no worse conditioned than the whole
            warnings.simplefilter("ignore", ConditioningWarning)
            if obs.size == full.dim and np.array_equal(obs, np.arange(full.dim)):
                self.factor = full
            else:
                self.factor = full.subset(obs)
            if np.array_equal(self.chain_obs, obs):
                self.chain_factor = self.factor
            else:
                self.chain_factor = full.subset(self.chain_obs)
        self.factor.inv_sd()  # once per sub-model


def _baseline_parts(baseline: Any):
    """(mean, factor, m, columns, estimator) from a Baseline, or a Gaussian (m unknown)."""
    factor = getattr(baseline, "factor", None)
    mean = getattr(baseline, "mean", None)
    if not isinstance(factor, Factor) or mean is None:
        raise InputError("baseline: expected a whiten Baseline (from whiten.fit_baseline or "
                         "whiten.load_baseline) or a whiten.Gaussian")
    mu, _, _ = as_float_array(mean, name="baseline.mean", ndim=(1,))
    if mu.shape[0] != factor.dim:
        raise InputError(f"baseline: mean has {mu.shape[0]} entries but the factor is {factor.dim} x {factor.dim}")
    cols = getattr(baseline, "columns", None)
    if cols is None:
        cols = getattr(baseline, "columns", None) or factor.columns
    cols = [str(c) for c in cols] if cols is not None else [f"x{j}" for j in range(factor.dim)]
    m = getattr(baseline, "n", None)
    m = None if m is None else int(m)
    est = getattr(baseline, "estimator", None)
    return mu, factor, m, cols, est


class Scorer:
    """A baseline prepared for scoring many batches (factors of sub-models cached).

    :func:`~whiten.monitor.score` builds one per call;
    :func:`~whiten.monitor.score_file` keeps one for all chunks of a large file. Parameters are those of :func:`score`.
    """

    def __init__(self, baseline: Any, *, alpha: float = 0.001, missing: str = "marginalize",
                 phase: str = "new", order: Sequence[str] | None = None):
        self.mean, self.factor, self.m, self.columns, self.estimator = _baseline_parts(baseline)
        self.p = len(self.columns)
        self.alpha = check_alpha(alpha)
        if missing not in _MISSING:
            raise InputError(f"missing: expected one of {_MISSING}, got {missing!r}")
        self.missing = missing
        if phase in ("new", "reference") and self.m is None:
            raise InputError(f"phase={phase!r} needs the number of reference rows; this model has none "
                             "(a Gaussian with known parameters): use phase='known'")
        law = getattr(baseline, "limit_law", None)
        self.law: SimulatedLaw | None = law if phase == "new" and isinstance(law, SimulatedLaw) \
            and law.p == self.p else None
        if self.law is None:
            check_phase(phase, self.p, self.m)
        self.phase = phase
        if order is None:
            self.order = list(self.columns)
        else:
            order = [str(c) for c in order]
            unknown = [c for c in order if c not in self.columns]
            if unknown or sorted(order) != sorted(self.columns):
                left = [c for c in self.columns if c not in order]
                raise InputError(f"order: must list every sensor once; unknown {unknown}, "
                                 f"not listed {left}, sensors {self.columns}")
            self.order = order
        rank = np.empty(self.p, dtype=np.intp)
        rank[[self.columns.index(c) for c in self.order]] = np.arange(self.p)
        self._rank = rank
        # sd_j = sqrt(S_jj) = norm of row j of L (no inverse involved)
        low = self.factor.lower
        self.sd = column_norms(low.T)  # without overflow or underflow at extreme scales
        self._cache: dict[bytes, _SubModel] = {}
        # rows the fit saw (a robust fit's n counts only the rows it kept): the asymptotic switch's m
        self._m_fit = int((getattr(baseline, "params", None) or {}).get("n_total", self.m or 0))
        ws = getattr(baseline, "weight_sum", None)
        self.weight_sum = None if ws is None else float(ws)
        self.limit_basis = self._limit_basis()
        self.full_limit = self.law.isf(self.alpha) if self.law is not None else \
            float(t2_limit(self.alpha, self.p, self.m, phase=phase))
        self.weak = screen_check(self.full_limit, self.alpha, self.p, self.m)
        if self.weak is not None:
            warn(WeakScreenWarning, self.weak["message"])

    def _limit_basis(self) -> str:
        """The law of the full-row limit, led by its kind (exact / simulated / asymptotic / approximate /
        known-parameter); the kind alone is ``self.law_kind``."""
        if self.law is not None:
            self.law_kind = "simulated"
            part = ""
            if self.m is not None and self.m > self.p:
                part = "; rows with missing sensors: " + t2_law("new", self.p, self.m).replace(
                    f"{self.p}", "k") + " (the sample estimator's law with k observed, approximate here)"
            return "simulated: " + self.law.describe(self.alpha) + part
        law = t2_law(self.phase, self.p, self.m)
        est = self.estimator
        weighted = self.weight_sum is not None and self.m is not None \
            and abs(self.weight_sum - self.m) > 1e-9 * self.m
        other = est not in (None, "sample") or weighted
        if self.phase == "known":
            self.law_kind = "known-parameter"
            return f"known-parameter: {law}"
        if self.phase == "new" and other and self.m is not None and \
                not asymptotic_serves(est, self._m_fit, self.p):
            self.law_kind = "approximate"
            return (f"approximate: {law}; this {est} baseline carries no simulated law (a model file "
                    "older than whiten.baseline/3?); refit it for a limit that holds")
        if self.phase == "new" and other:
            self.law_kind = "asymptotic"
            return (f"asymptotic: {law}; with m p = {self._m_fit * self.p} > {ASYMPTOTIC_CELLS} reference cells"
                    + (f" and m >= {ASYMPTOTIC_ROBUST_RATIO} p" if est == "robust" else "") + " "
                    f"the extra estimation error of this {'weighted ' if weighted else ''}{est} baseline is "
                    "O(p/m), so the sample estimator's exact law serves")
        if self.phase == "reference" and other:
            self.law_kind = "approximate"
            return (f"approximate: {law}; the law holds for the plain unweighted sample estimate, "
                    f"this baseline uses estimator {est!r}{' with row weights' if weighted else ''}")
        self.law_kind = "exact"
        return f"exact: {law}"

    def _law_values(self, d2: np.ndarray, nobs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """p-values and limits per row: the simulated law for complete rows when there is one."""
        if self.law is None:
            limit = t2_limit(self.alpha, nobs, self.m, phase=self.phase)
            assert isinstance(limit, np.ndarray)  # nobs is an array, so t2_limit gives one limit per row
            return t2_pvalue(d2, nobs, self.m, phase=self.phase), limit
        full = nobs == self.p
        pval = np.full(d2.shape, np.nan)
        limit = np.full(d2.shape, np.nan)
        pval[full] = self.law.sf(d2[full])
        limit[full] = self.full_limit
        part = ~full & (nobs > 0)
        if part.any():
            ph = "new" if self.m is not None and self.m > int(nobs[part].max()) else "known"
            pval[part] = t2_pvalue(d2[part], nobs[part], self.m, phase=ph)
            limit[part] = t2_limit(self.alpha, nobs[part], self.m, phase=ph)
        return pval, limit

    def _sub(self, obs: np.ndarray) -> _SubModel:
        key = obs.tobytes()
        sub = self._cache.get(key)
        if sub is None:
            if len(self._cache) >= _CACHE_MAX:
                self._cache.clear()
            sub = self._cache[key] = _SubModel(self.factor, obs, self._rank)
        return sub

    # ----------------------------------------------------------- the work
    def rows(self, data: Any, *, name: str = "data") -> tuple[np.ndarray, Any]:
        """Validate data into an (N, p) float array in model column order, and its index."""
        if hasattr(data, "columns") and hasattr(data, "dtypes"):
            # extra columns are ignored; the reader's wording for the missing ones
            select_columns(data.columns, self.columns, where=name, what="the model")
        x, _, index = as_rows(data, self.p, names=self.columns, name=name,
                              allow_nan=(self.missing == "marginalize"))
        return x, index

    def score_array(self, x: np.ndarray) -> dict[str, np.ndarray]:
        """Score an (N, p) array in model column order (NaN = missing); arrays keyed by column."""
        n, p = x.shape
        mask = np.isnan(x)
        gaps = bool(mask.any())
        # with no missing value every cell is written below; otherwise unscored cells stay NaN
        alloc = (lambda shape: np.full(shape, np.nan)) if gaps else np.empty
        d2 = alloc(n)
        nobs = np.full(n, p, dtype=np.int64)
        drop = alloc((n, p))
        chain = alloc((n, p))
        dev = np.subtract(x, self.mean)
        dev /= self.sd
        rows_per_block = max(1, int(current().block_rows))
        for a in range(0, n, rows_per_block):
            b = min(n, a + rows_per_block)
            self._block(x[a:b], mask[a:b], d2[a:b], nobs[a:b], drop[a:b], chain[a:b])
        pval, limit = self._law_values(d2, nobs)
        alarm = np.zeros(n, dtype=bool)
        scored = ~np.isnan(pval)
        alarm[scored] = pval[scored] < self.alpha
        top = np.full(n, "", dtype=object)
        names = np.asarray(self.columns, dtype=object)
        if scored.all() and not gaps:  # the common case: no NaN to step around
            top[:] = names[np.argmax(drop, axis=1)]
        elif scored.any():
            filled = np.where(np.isnan(drop[scored]), -np.inf, drop[scored])
            top[scored] = names[np.argmax(filled, axis=1)]
        note = np.full(n, "", dtype=object)
        partial = np.flatnonzero(nobs < p)
        for i in partial:
            if nobs[i] == 0:
                note[i] = "no sensor observed: not scored"
            else:
                gone = [self.columns[j] for j in np.flatnonzero(mask[i])]
                note[i] = f"scored on {nobs[i]} of {p} sensors; missing {', '.join(gone)}"
        for i in np.flatnonzero(np.isinf(d2)):
            extra = ("d2 overflows double precision: a reading is beyond about 1e150 times its sensor's "
                     "spread (a unit or logging error?); alarmed, contributions not meaningful")
            note[i] = f"{note[i]}; {extra}" if note[i] else extra
        if self.phase == "reference":
            # a reference row cannot exceed (m-1)^2/m (Tracy, Young & Mason 1992)
            bound = (self.m - 1.0) ** 2 / self.m
            for i in np.flatnonzero(d2 > bound * (1.0 + 1e-12)):
                extra = (f"d2 above {bound:.6g}, the largest a reference row can reach: "
                         "is this row from the reference set? (use phase='new' for new rows)")
                note[i] = f"{note[i]}; {extra}" if note[i] else extra
        out: dict[str, np.ndarray] = {
            "d2": d2, "p_value": pval, "limit": limit, "alarm": alarm, "n_observed": nobs,
            "top_contributor": top, "note": note,
        }
        for kind, arr in (("drop", drop), ("chain", chain), ("dev", dev)):
            for j, c in enumerate(self.columns):
                out[column_name(kind, c)] = arr[:, j]
        return out

    def _block(self, x, mask, d2, nobs, drop, chain) -> None:
        complete = ~mask.any(axis=1)
        groups: list[tuple[np.ndarray, np.ndarray]] = []
        if complete.all():
            groups.append((np.arange(x.shape[0]), np.arange(self.p)))
        else:
            if complete.any():
                groups.append((np.flatnonzero(complete), np.arange(self.p)))
            partial = np.flatnonzero(~complete)
            pats, inv = np.unique(mask[partial], axis=0, return_inverse=True)
            inv = np.asarray(inv).reshape(-1)
            for k, pat in enumerate(pats):
                groups.append((partial[inv == k], np.flatnonzero(~pat)))
        rows: slice | np.ndarray
        cols: slice | np.ndarray
        for which, obs in groups:
            nobs[which] = obs.size
            if obs.size == 0:
                continue
            sub = self._sub(obs)
            if which.size == x.shape[0] and obs.size == self.p and sub.chain_factor is sub.factor:
                # every row complete, chain order = column order: solve straight into the outputs
                score_terms_into(sub.factor, x, self.mean, d2, chain, drop)
                continue
            if which.size == x.shape[0] and obs.size == self.p:
                # every row complete: plain slices instead of fancy indexing (no copies)
                rows, cols = slice(None), slice(None)
                d = x - self.mean
            else:
                rows, cols = which[:, None], obs[None, :]
                d = x[rows, cols] - self.mean[obs]
            z, dr = whitened_and_drop(sub.factor, d)
            d2[which] = np.einsum("ij,ij->i", z, z)
            drop[rows, cols] = dr
            if sub.chain_factor is sub.factor:
                chain[rows, cols] = z * z
            else:
                dc = x[which[:, None], sub.chain_obs[None, :]] - self.mean[sub.chain_obs]
                chain[which[:, None], sub.chain_obs[None, :]] = chain_terms(sub.chain_factor, dc)

    def frame(self, data: Any, *, fdr: float | None = None, name: str = "data"):
        """Score ``data`` and return the DataFrame described in :func:`score`."""
        import pandas as pd

        x, index = self.rows(data, name=name)
        cols = self.score_array(x)
        if fdr is not None:
            add_fdr(cols, fdr)
        df = pd.DataFrame(cols, index=index if index is not None else pd.RangeIndex(x.shape[0]))
        df.attrs.update(self.attrs(fdr))
        return df

    def attrs(self, fdr: float | None = None) -> dict:
        h = self.factor.health
        return {
            "alpha": self.alpha, "phase": self.phase, "reference_rows": self.m, "sensors": list(self.columns),
            "order": list(self.order), "fdr": fdr, "limit_basis": self.limit_basis,
            "estimator": self.estimator, "digits_trusted": h.digits_trusted, "jitter": h.jitter,
            "limit_law": self.law_kind,
            "weak_screen": None if self.weak is None else {k: v for k, v in self.weak.items() if k != "message"},
        }
