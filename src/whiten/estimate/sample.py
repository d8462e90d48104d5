"""The sample mean and covariance with an automatic numerical path.

Fast path ("gram"): per row block, the rows are moved to a pilot shift and
their block mean removed, and the scatter matrix is accumulated with one
``dsyrk`` per block and exact pairwise merges; the covariance is then factored
by :func:`whiten.cholesky`. This squares the condition number of the centred
data, which is harmless while few digits are at stake.

Accurate path ("tsqr"): when the Gram factor's condition estimate says more
than ``whiten.current_settings().gram_digits_max`` decimal digits are lost, the
factor is recomputed from a tall-skinny QR of the centred data (a Householder
QR per row block, then QR of stacked R factors through the same exact merges).
The R of a QR of the centred data is, up to signs, the Cholesky factor of the
scatter matrix, and its error grows with cond(X) instead of cond(X)^2.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from collections.abc import Callable, Iterator, Sequence

import numpy as np

from .._numerics import EPS
from .._settings import current
from .._validate import scale_problems
from .._warn import warn
from ..errors import ConditioningWarning, InputError, NotPositiveDefiniteError
from ..linalg.cholesky import cholesky
from ..linalg.factor import Factor
from ..linalg.health import health_of
from ..linalg.pivoted import pivoted_cholesky
from .streaming import Block, ScatterState, accumulate

__all__ = ["ScatterFit", "fit_scatter", "check_scatter", "check_rows", "covariance_factor", "factor_from_r",
           "gram_factor", "no_rows_error", "METHODS"]

METHODS = ("auto", "gram", "tsqr")


@dataclasses.dataclass(frozen=True)
class ScatterFit:
    """Outcome of the scatter pass(es).

    Attributes
    ----------
    state : ScatterState
        Final accumulated state (``kind="gram"`` or ``"qr"``).
    method : str
        ``"gram"`` or ``"tsqr"``: which route produced the factor.
    gram_digits_lost : float or None
        Digits lost estimated on the Gram route (None when it did not run).
    gram_factor : Factor or None
        The Gram route's covariance factor when it was kept.
    n_blocks : int
    passes : int
        Passes over the data (2 when the TSQR route re-read it).
    """

    state: ScatterState
    method: str
    gram_digits_lost: float | None
    gram_factor: Factor | None
    n_blocks: int
    passes: int


def no_rows_error(names: Sequence[str], watch: _Watch | None = None) -> InputError:
    if watch is not None and watch.rows and watch.weighted and watch.positive == 0:
        return InputError(
            f"weights: every one of the {watch.rows} complete row(s) has weight 0, so no row counts in the fit; "
            "give at least two rows a positive weight")
    return InputError(
        f"no complete rows to fit (columns {list(names)}); check the missing values or the column selection")


class _Watch:
    """Counts the rows and weights of the blocks passing by, and each column's smallest and largest value.

    The ranges make the scale checks scale-free: they are read from the data,
    not from a scatter matrix whose squares may have overflowed or underflowed.
    """

    def __init__(self, blocks: Iterator[Block]):
        self._blocks = blocks
        self.rows = 0
        self.positive = 0
        self.weighted = False
        self.lo: np.ndarray | None = None
        self.hi: np.ndarray | None = None

    def __iter__(self) -> Iterator[Block]:
        for blk in self._blocks:
            m = blk.values.shape[0]
            self.rows += m
            if blk.weights is not None:
                self.weighted = True
                self.positive += int(np.count_nonzero(blk.weights > 0))
            else:
                self.positive += m
            if m:
                lo, hi = blk.values.min(axis=0), blk.values.max(axis=0)
                self.lo = lo if self.lo is None else np.minimum(self.lo, lo)
                self.hi = hi if self.hi is None else np.maximum(self.hi, hi)
            yield blk


def _cov_divisor(state: ScatterState) -> float:
    """Unbiased divisor: n - 1, or sum(w) - 1 for frequency weights."""
    return state.wsum - 1.0


def check_rows(state: ScatterState, names: Sequence[str]) -> None:
    """The row count the sample covariance needs: more rows than columns."""
    p = state.dim
    if state.n == 0:
        raise no_rows_error(names)
    if state.n <= p:
        raise InputError(
            f"{state.n} complete row(s) for {p} column{'s' if p != 1 else ''}: the sample covariance of "
            "n <= p rows is singular "
            f"(rank at most n - 1 = {state.n - 1}), so no Mahalanobis distance exists. Use "
            "estimator='shrinkage', which is defined for n < p, or collect more rows than columns")
    if state.wsum <= 1.0:
        raise InputError(
            f"the weights sum to {state.wsum:.6g}; frequency weights (a weight of 3 counts as three rows) "
            "must sum to more than 1 so that sum(w) - 1 > 0. Scale them to counts")


def check_scatter(state: ScatterState, names: Sequence[str], *, dependent: bool = True) -> None:
    """Refuse constant columns and linearly dependent columns, naming them."""
    s = state.scatter()
    d = np.diag(s)
    loc = state.location
    # a constant column centres to exact zeros; allow rounding of its level
    tiny = state.wsum * (8 * EPS * np.maximum(np.abs(loc), np.finfo(np.float64).tiny)) ** 2
    const = [j for j in range(state.dim) if d[j] <= tiny[j]]
    problems: list[str] = []
    leave: list[str] = []
    if const:
        desc = ", ".join(f"{names[j]!r} (every row holds {loc[j]:.10g})" for j in const)
        problems.append(f"constant column(s) {desc}: a Gaussian baseline needs spread in every column")
        leave += [str(names[j]) for j in const]
    rest = [j for j in range(state.dim) if j not in const]
    if dependent and len(rest) > 1:
        # the dependencies among the columns that vary, so one message names every troublesome column
        rep = pivoted_cholesky(s[np.ix_(rest, rest)], columns=[names[j] for j in rest])
        if not rep.full_rank:
            parts = "; ".join(rep.describe())
            problems.append(f"columns are linearly dependent (numerical rank {rep.rank} of {rep.dim} "
                            f"among the columns that vary): {parts}")
            leave += [str(c) for c in rep.dependent]
    if problems:
        alt = ", or use --estimator shrinkage (estimator='shrinkage' in Python)" if len(leave) > len(const) else ""
        raise InputError(f"{'; '.join(problems)}. Leave out {', '.join(repr(c) for c in leave)} "
                         f"with --columns (columns=[...] in Python){alt}")


def factor_from_r(r: np.ndarray, scale: float, names: Sequence[str] | None, method: str = "tsqr") -> Factor:
    """Covariance factor ``L = (D R)^T * scale`` from an upper-triangular R (D fixes signs)."""
    p = r.shape[1]
    if r.shape[0] < p:
        raise NotPositiveDefiniteError(
            f"the R factor has only {r.shape[0]} rows for {p} columns; the scatter matrix is singular",
            pivot=r.shape[0])
    dg = np.diag(r)
    if np.any(dg == 0):
        k = int(np.flatnonzero(dg == 0)[0])
        raise NotPositiveDefiniteError(f"the R factor has a zero pivot at column {k}", pivot=k)
    lower = (np.sign(dg)[:, None] * r).T * scale
    lower = np.tril(lower)
    return Factor(lower, health_of(lower, 0.0, 0.0, method), names)


def _conditioning_warning(f: Factor, what: str) -> None:
    opts = current()
    if f.digits_lost > opts.digits_warn:
        warn(ConditioningWarning,
             f"{what} is ill-conditioned: rcond {f.health.rcond_scaled:.3g} (unit-diagonal scaling), "
             f"about {f.digits_lost:.1f} of ~16 significant digits may be lost in solves "
             f"(threshold {opts.digits_warn:g}). Near-redundant columns are the usual cause "
             "(whiten.pivoted_cholesky names them); consider estimator='shrinkage'")


def gram_factor(state: ScatterState, names: Sequence[str]) -> tuple[Factor | None, float]:
    """Try the Gram route's factor without jitter; returns (factor or None, digits lost)."""
    cov = state.scatter() / _cov_divisor(state)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConditioningWarning)
        try:
            f = cholesky(cov, jitter=False, columns=list(names))
        except NotPositiveDefiniteError:
            return None, math.inf
    return f, f.digits_lost


def fit_scatter(blocks: Callable[[], Iterator[Block]], names: Sequence[str], *, method: str = "auto",
                reiterable: bool = True) -> ScatterFit:
    """Accumulate the scatter of the blocks along the automatic path.

    Parameters
    ----------
    blocks : callable returning an iterator of Block
        Called once, or twice when the TSQR route must re-read the data.
    names : sequence of str
    method : {"auto", "gram", "tsqr"}
        ``"auto"``: Gram first, TSQR when the Gram factor loses more than
        ``gram_digits_max`` digits. A source that can be read only once
        (``reiterable=False``) goes straight to TSQR under ``"auto"``.

    Returns
    -------
    ScatterFit
    """
    if method not in METHODS:
        raise InputError(f"method: expected one of {METHODS}, got {method!r}")
    qr_first = method == "tsqr" or (method == "auto" and not reiterable)
    watch = _Watch(blocks())
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        st, nb = accumulate(iter(watch), "qr" if qr_first else "gram")
    if st is None or st.n == 0:
        raise no_rows_error(names, watch)
    if watch.lo is not None and watch.hi is not None:
        bad = scale_problems(watch.lo, watch.hi, names)
        if bad:
            raise InputError(bad)
    check_rows(st, names)
    if qr_first:
        return ScatterFit(st, "tsqr", None, None, nb, 1)
    f, digits = gram_factor(st, names)
    if method == "gram" or digits <= current().gram_digits_max:
        return ScatterFit(st, "gram", digits, f, nb, 1)
    st2, _ = accumulate(blocks(), "qr", shift=st.shift)
    if st2 is None or st2.n != st.n:
        raise InputError(
            "the data changed between the two passes of the accurate (TSQR) route "
            f"({st.n} rows first, {0 if st2 is None else st2.n} the second time); pass data that can be read twice")
    return ScatterFit(st2, "tsqr", digits, None, nb, 2)


def covariance_factor(fit: ScatterFit, names: Sequence[str]) -> Factor:
    """Factor of the unbiased covariance ``S / (W - 1)`` from a scatter fit (checks first)."""
    st = fit.state
    check_scatter(st, names)
    div = _cov_divisor(st)
    if fit.method == "tsqr":
        f = factor_from_r(st.mat, 1.0 / math.sqrt(div), names)
        _conditioning_warning(f, "the covariance")
        return f
    if fit.gram_factor is not None:
        _conditioning_warning(fit.gram_factor, "the covariance")
        return fit.gram_factor
    return cholesky(st.scatter() / div, columns=list(names))
