"""Baselines: the Gaussian reference model of healthy operation, fitted from data.

:func:`fit_baseline` reads rows (an array, a DataFrame, a CSV or Parquet file
read in chunks, or an iterable of DataFrame chunks), estimates a mean and a
covariance factor with one of three estimators, and returns a
:class:`Baseline`, which carries its numerical health and saves to a checked
JSON model file (:func:`load_baseline` reads it back).
"""

from __future__ import annotations

import dataclasses
import math
import os
from typing import Any, Callable, Iterable, Iterator, Sequence

import numpy as np

from . import _validate
from ._settings import current
from ._version import __version__
from ._warn import warn
from .errors import InputError, ModelFileError, NotPositiveDefiniteError
from .gaussian import Gaussian
from .linalg.factor import Factor, _health_of
from .estimate.streaming import Block

__all__ = ["Baseline", "BaselineHealth", "fit_baseline", "load_baseline", "MODEL_FORMAT"]

MODEL_FORMAT = "whiten.baseline/1"
_ESTIMATORS = ("sample", "shrinkage", "robust")
_MISSING = ("drop", "error")


# ----------------------------------------------------------------- health
@dataclasses.dataclass(frozen=True)
class BaselineHealth:
    """Numerical health of a fitted baseline.

    Attributes
    ----------
    rcond : float
        ``dpocon`` estimate of 1/cond_1 of the covariance.
    rcond_scaled : float
        The same for the covariance scaled to unit diagonal (the correlation);
        this is what ``digits_lost`` uses.
    digits_lost : float
        ``log10(1/rcond_scaled)``: decimal digits a distance may lose.
    jitter : float
        Absolute diagonal jitter in the factor (0.0 when none).
    jitter_relative : float
        Jitter relative to the mean diagonal.
    path : str
        Numerical route of the scatter factor: ``"gram"`` (shifted Gram
        matrix + Cholesky) or ``"tsqr"`` (tall-skinny QR of the centred data;
        also the route of ``"shrinkage"``); ``"mcd"`` for ``"robust"`` (the final
        factor is a QR of the retained rows); ``"updated"`` after
        :meth:`Baseline.update` / :meth:`Baseline.downdate`.
    gram_digits_lost : float or None
        Digits the Gram route's factor would lose (what made the choice);
        None when the Gram route did not run.
    n_rows_read : int
        Rows read from the input.
    n_dropped : int
        Incomplete rows left out (``missing="drop"``).
    n_chunks : int
        Blocks or chunks the data arrived in.
    passes : int
        Passes over the data.
    """

    rcond: float
    rcond_scaled: float
    digits_lost: float
    jitter: float
    jitter_relative: float
    path: str
    gram_digits_lost: float | None
    n_rows_read: int
    n_dropped: int
    n_chunks: int
    passes: int

    @property
    def digits_trusted(self) -> float:
        """About how many significant decimal digits a distance keeps."""
        # the same rule as FactorHealth.digits_trusted: -log10(eps) minus the digits lost
        return max(0.0, -math.log10(2.0 ** -52) - self.digits_lost) if math.isfinite(self.digits_lost) else 0.0

    @property
    def condition(self) -> float:
        """Condition estimate of the correlation matrix, ``1 / rcond_scaled``."""
        return math.inf if self.rcond_scaled <= 0 else 1.0 / self.rcond_scaled

    def to_dict(self) -> dict:
        return dataclasses.asdict(self) | {"digits_trusted": self.digits_trusted}

    def to_frame(self):
        import pandas as pd

        d = self.to_dict()
        return pd.DataFrame({"value": list(d.values())}, index=pd.Index(list(d), name="quantity"))


def _health_from_factor(f: Factor, **kw) -> BaselineHealth:
    h = f.health
    return BaselineHealth(rcond=h.rcond, rcond_scaled=h.rcond_scaled, digits_lost=h.digits_lost,
                          jitter=h.jitter, jitter_relative=h.jitter_relative, **kw)


# ----------------------------------------------------------------- sources
def _is_frame(x: Any) -> bool:
    return hasattr(x, "columns") and hasattr(x, "dtypes") and hasattr(x, "to_numpy")


def array_column_names(columns: Sequence[str] | None, p: int) -> list[str]:
    """Names for the p columns of an array: ``columns`` checked, or ``x0, x1, ...``."""
    if columns is None:
        return [f"x{k}" for k in range(p)]
    names = [str(c) for c in columns]
    if len(names) != p:
        raise InputError(f"columns: {len(names)} name(s) given for an array with {p} columns")
    if len(set(names)) != p:
        raise InputError(f"columns: names must be unique, got {names}")
    return names


class _Source:
    """Rows from any supported input, as raw blocks (NaN possible), readable again when possible."""

    def __init__(self, data: Any, columns: Sequence[str] | None, chunksize: int | None,
                 index_column: str | None, weight_column: str | None, progress: bool | None):
        self.weight_column = weight_column
        self.progress = progress
        self.chunksize = chunksize
        self.total_rows: int | None = None
        self._index_column: str | None = None
        if chunksize is not None and (not isinstance(chunksize, (int, np.integer)) or chunksize < 1):
            raise InputError(f"chunksize: expected a positive integer, got {chunksize!r}")
        if isinstance(data, (str, os.PathLike)):
            self._init_path(os.fspath(data), columns, index_column)
        elif _is_frame(data):
            self._init_frame(data, columns, index_column)
        elif isinstance(data, np.ndarray) or (isinstance(data, (list, tuple)) and (
                len(data) == 0 or not (_is_frame(data[0]) or (
                    isinstance(data[0], np.ndarray) and data[0].ndim == 2)))):
            self._init_array(data, columns, index_column)
        elif isinstance(data, Iterable):
            self._init_chunks(data, columns, index_column)
        else:
            raise InputError(
                f"data: cannot read rows from a {type(data).__name__}; pass an array, a DataFrame, a CSV or "
                "Parquet path, or an iterable of DataFrame chunks")

    # -- kinds
    def _init_path(self, path: str, columns, index_column) -> None:
        from pathlib import Path

        from .io.tables import _select, read_table_chunks, table_columns

        extra = [self.weight_column] if self.weight_column else []
        # validate now (missing file, columns) so errors come before any work
        header = table_columns(path)
        cols, _ = _select(Path(path), header, columns, index_column, extra)
        self.names = cols
        self.reiterable = True
        self.label = f"data file {path!r}"

        def frames():
            from .io.tables import progress

            chunks = read_table_chunks(path, columns if columns is not None else cols, self.chunksize,
                                       index_column, extra_columns=extra)
            return progress(chunks, desc="reading", enabled=self.progress)

        self._frames = frames
        self._array = None

    def _init_frame(self, df, columns, index_column) -> None:
        if index_column is not None:
            if index_column not in df.columns:
                raise InputError(f"index_column: {index_column!r} is not a column of the DataFrame")
            df = df.set_index(index_column)
        names_all = [str(c) for c in df.columns]
        wcol = self.weight_column
        if wcol is not None and wcol not in names_all:
            raise InputError(f"weights: column {wcol!r} not found in the DataFrame; columns are {names_all}")
        if columns is None:
            cols = [c for c, s in zip(df.columns, names_all) if s != wcol]
        else:
            want = [str(c) for c in columns]
            missing = [c for c in want if c not in names_all]
            if missing:
                extra = [c for c in names_all if c not in want and c != wcol]
                raise InputError(f"columns: missing {missing} in the DataFrame; not selected: {extra}")
            lookup = {s: c for c, s in zip(df.columns, names_all)}
            cols = [lookup[c] for c in want]
        values, names, index = _validate.as_float_array(df[cols], name="data", ndim=(2,), allow_nan=True)
        self.names = names
        self._array = values
        self._index = index
        self._wvals = None
        if wcol is not None:
            w, _, _ = _validate.as_float_array(df[wcol], name=f"weights column {wcol!r}", ndim=(1,), allow_nan=True)
            self._wvals = w
        self.reiterable = True
        self.label = "DataFrame"
        self.total_rows = values.shape[0]

    def _init_array(self, data, columns, index_column=None) -> None:
        if index_column is not None:
            raise InputError("index_column: works with DataFrame or file input; an array has no columns to "
                             "take labels from")
        if self.weight_column is not None:
            raise InputError("weights: a column name works with DataFrame or file input; pass an array of weights")
        arr = np.asarray(data)
        if arr.ndim == 2 and arr.dtype.kind in "biuf":
            # no copy for float64 input; infinities are caught block by block by the cleaner,
            # which saves a full pass (and an N x p mask) over a large array
            values = arr.astype(np.float64, copy=False)
        else:  # the general converter gives the precise message
            values, _, _ = _validate.as_float_array(data, name="data", ndim=(2,), allow_nan=True)
        self.names = array_column_names(columns, values.shape[1])
        self._array = values
        self._index = None
        self._wvals = None
        self.reiterable = True
        self.label = "array"
        self.total_rows = values.shape[0]

    def _init_chunks(self, data, columns, index_column) -> None:
        self.reiterable = isinstance(data, (list, tuple))
        self._chunks_src = data
        self._array = None
        self._consumed = False
        self.label = "chunks"
        self._index_column = index_column
        self._columns_arg = None if columns is None else [str(c) for c in columns]
        self.names = self._columns_arg  # may be set by the first chunk
        if self.names is None:
            if self.reiterable and len(data):
                first = data[0]
                self.names = self._chunk_names(first)
            elif not self.reiterable:
                it = iter(data)
                try:
                    first = next(it)
                except StopIteration:
                    raise InputError("data: the iterable of chunks is empty") from None
                self.names = self._chunk_names(first)
                import itertools

                self._chunks_src = itertools.chain([first], it)
            else:
                raise InputError("data: the list of chunks is empty")

        def frames():
            if not self.reiterable:
                if self._consumed:
                    raise InputError("data: the chunk iterator was already consumed; pass a list to read it twice")
                self._consumed = True
            from .io.tables import progress

            return progress(self._chunks_src, desc="chunks", enabled=self.progress)

        self._frames = frames

    def _chunk_names(self, chunk) -> list[str]:
        if _is_frame(chunk):
            cols = [str(c) for c in chunk.columns]
            drop = {self.weight_column, self._index_column}
            return [c for c in cols if c not in drop]
        arr = np.asarray(chunk)
        if arr.ndim != 2:
            raise InputError(f"data: chunks must be 2-D, got shape {arr.shape}")
        return [f"x{k}" for k in range(arr.shape[1])]

    # -- blocks
    def raw_blocks(self) -> Iterator[tuple[np.ndarray, np.ndarray | None, np.ndarray, Any]]:
        """(values with NaN, weights-from-column or None, positions, labels) per block."""
        if self._array is not None:
            rows = max(1, int(current().block_rows))
            if self.chunksize is not None:
                rows = int(self.chunksize)
            n = self._array.shape[0]
            for a in range(0, n, rows):
                b = min(a + rows, n)
                w = None if self._wvals is None else self._wvals[a:b]
                lab = None if self._index is None else self._index[a:b]
                yield self._array[a:b], w, np.arange(a, b), lab
            return
        offset = 0
        for k, chunk in enumerate(self._frames()):
            vals, w, lab = self._convert_chunk(chunk, k)
            m = vals.shape[0]
            yield vals, w, np.arange(offset, offset + m), lab
            offset += m
        self.total_rows = offset

    def _convert_chunk(self, chunk, k: int):
        where = f"chunk {k}"
        if _is_frame(chunk):
            if self._index_column is not None and self._index_column in chunk.columns:
                chunk = chunk.set_index(self._index_column)
            cols = [str(c) for c in chunk.columns]
            missing = [c for c in self.names if c not in cols]
            if missing:
                extra = [c for c in cols if c not in self.names and c != self.weight_column]
                raise InputError(f"data ({where}): missing column(s) {missing}; extra: {extra}")
            lookup = {str(c): c for c in chunk.columns}
            vals, _, index = _validate.as_float_array(chunk[[lookup[c] for c in self.names]],
                                                      name=f"data ({where})", ndim=(2,), allow_nan=True)
            w = None
            if self.weight_column is not None:
                if self.weight_column not in lookup:
                    raise InputError(f"data ({where}): weights column {self.weight_column!r} not found")
                w, _, _ = _validate.as_float_array(chunk[lookup[self.weight_column]], name="weights",
                                                   ndim=(1,), allow_nan=True)
            return vals, w, index
        if self.weight_column is not None:
            raise InputError(f"data ({where}): a weights column needs DataFrame chunks")
        vals, _, _ = _validate.as_float_array(chunk, name=f"data ({where})", ndim=(2,), allow_nan=True)
        if vals.shape[1] != len(self.names):
            raise InputError(f"data ({where}): expected {len(self.names)} columns, got {vals.shape[1]}")
        return vals, None, None


def check_frequency_weights(w: np.ndarray, where: Callable[[int], str]) -> None:
    """Frequency weights must be finite and non-negative; the first bad one is named by ``where(k)``."""
    bad = ~np.isfinite(w) | (w < 0)
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        raise InputError(f"weights: {where(k)} has weight {w[k]}; weights must be finite and non-negative")


class _Cleaner:
    """Applies the missing-value policy and the weights to raw blocks; counts what it drops."""

    def __init__(self, source: _Source, missing: str, weights: np.ndarray | None):
        self.source = source
        self.missing = missing
        self.weights = weights
        self.n_read = 0
        self.n_dropped = 0
        self.first_dropped: tuple[int, str] | None = None
        self.n_blocks = 0

    def __call__(self) -> Iterator[Block]:
        self.n_read = 0
        self.n_dropped = 0
        self.first_dropped = None
        self.n_blocks = 0
        names = self.source.names
        self.col_missing = np.zeros(len(names), dtype=np.int64)
        for vals, wcol, pos, lab in self.source.raw_blocks():
            self.n_blocks += 1
            m = vals.shape[0]
            self.n_read += m
            w = wcol
            if self.weights is not None:
                if pos.size and pos[-1] >= self.weights.shape[0]:
                    raise InputError(f"weights: {self.weights.shape[0]} entries, but the data has more rows")
                w = self.weights[pos]
            if w is not None:
                check_frequency_weights(w, lambda k, pos=pos: f"row {int(pos[k])}")
            # cheap screen: the total is finite unless some value is NaN or infinite (or the sum
            # overflows, a harmless false alarm); only then look cell by cell
            bad = None
            if vals.size and not np.isfinite(vals.sum()):
                inf = np.isinf(vals)
                if inf.any():
                    r, c = (int(v) for v in np.argwhere(inf)[0])
                    where = f"row {int(pos[r])}" + ("" if lab is None or lab[r] == pos[r] else f" (index {lab[r]!r})")
                    raise InputError(f"data: {where}, column {names[c]!r} is {vals[r, c]}; every value must be "
                                     "a finite number (a missing value may be NaN)")
                nan = np.isnan(vals)
                self.col_missing += nan.sum(axis=0)
                bad = nan.any(axis=1)
                if not bad.any():
                    bad = None
            if bad is not None:
                k = int(np.flatnonzero(bad)[0])
                j = int(np.flatnonzero(nan[k])[0])
                where = f"row {int(pos[k])}" + ("" if lab is None or lab[k] == pos[k] else f" (index {lab[k]!r})")
                if self.missing == "error":
                    raise InputError(f"data: {where}, column {names[j]!r} is missing; pass missing='drop' "
                                     "to leave incomplete rows out (they are counted and reported)")
                if self.first_dropped is None:
                    self.first_dropped = (int(pos[k]), names[j])
                keep = ~bad
                self.n_dropped += int(bad.sum())
                vals = vals[keep]
                pos = pos[keep]
                w = None if w is None else w[keep]
                lab = None if lab is None else lab[keep]
            yield Block(vals, w, pos, lab)
        if self.weights is not None and self.n_read != self.weights.shape[0]:
            raise InputError(f"weights: {self.weights.shape[0]} entries for {self.n_read} rows of data")
        if self.n_read and self.n_dropped == self.n_read:
            empty = [names[j] for j in range(len(names)) if self.col_missing[j] == self.n_read]
            worst = ", ".join(f"{names[j]!r} ({int(self.col_missing[j])})"
                              for j in np.argsort(-self.col_missing)[:3] if self.col_missing[j])
            raise InputError(
                f"every one of the {self.n_read} rows has a missing value, so no complete row is left"
                + (f"; column(s) {empty} are missing in every row" if empty else f"; most missing: {worst}")
                + ". Leave such columns out with columns=[...]")

    def report(self) -> None:
        if self.n_dropped:
            r, c = self.first_dropped
            warn(UserWarning,
                 f"left out {self.n_dropped} incomplete row(s) of {self.n_read} (first: row {r}, column {c!r} "
                 f"missing); the baseline uses the other {self.n_read - self.n_dropped} row(s). "
                 "Pass missing='error' to stop at the first one instead")


# ---------------------------------------------------------------- baseline
class Baseline:
    """A Gaussian reference model: mean, covariance factor and how it was obtained.

    Build one with :func:`fit_baseline` or :func:`load_baseline`. A Baseline
    is immutable: :meth:`update` and :meth:`downdate` return new ones.

    Attributes
    ----------
    mean : ndarray, shape (p,), read-only
    cov : ndarray, shape (p, p)
        The covariance ``L L^T`` (a new array on every access).
    factor : Factor
        Lower Cholesky factor of ``cov``, with the column names.
    n : int
        Rows the estimate rests on (for ``"robust"``: the rows kept by the
        reweighting step).
    weight_sum : float
        Sum of the row weights (``n`` without weights).
    columns : list of str
    estimator : str
        ``"sample"``, ``"shrinkage"`` or ``"robust"``.
    params : dict
        Estimator details: divisor, shrinkage intensity, MCD subset size and
        flagged rows, ...
    health : BaselineHealth
    gaussian : Gaussian
        ``N(mean, cov)`` built on ``factor`` (no refactorization).
    """

    def __init__(self, *, mean: np.ndarray, factor: Factor, n: int, columns: Sequence[str], estimator: str,
                 params: dict, health: BaselineHealth, weight_sum: float | None = None,
                 created_utc: str | None = None):
        mean = np.array(mean, dtype=np.float64, copy=True)
        mean.setflags(write=False)
        cols = [str(c) for c in columns]
        if factor.dim != mean.shape[0] or len(cols) != mean.shape[0]:
            raise InputError(f"baseline: mean ({mean.shape[0]}), factor ({factor.dim}) and columns "
                             f"({len(cols)}) disagree in length")
        if factor.columns != cols:
            factor = Factor(factor.lower, factor.health, cols)
        self._mean = mean
        self._factor = factor
        self._n = int(n)
        self._wsum = float(n if weight_sum is None else weight_sum)
        self._columns = cols
        self._estimator = str(estimator)
        self._params = dict(params)
        self._health = health
        self._created = created_utc
        self._gaussian: Gaussian | None = None

    # -- attributes
    @property
    def mean(self) -> np.ndarray:
        return self._mean

    @property
    def cov(self) -> np.ndarray:
        return self._factor.lower @ self._factor.lower.T

    @property
    def factor(self) -> Factor:
        return self._factor

    @property
    def n(self) -> int:
        return self._n

    @property
    def weight_sum(self) -> float:
        return self._wsum

    @property
    def dim(self) -> int:
        return self._mean.shape[0]

    @property
    def columns(self) -> list[str]:
        return list(self._columns)

    @property
    def estimator(self) -> str:
        return self._estimator

    @property
    def params(self) -> dict:
        return dict(self._params)

    @property
    def health(self) -> BaselineHealth:
        return self._health

    @property
    def created_utc(self) -> str | None:
        return self._created

    @property
    def gaussian(self) -> Gaussian:
        if self._gaussian is None:
            self._gaussian = Gaussian(self._mean, self._factor, columns=self._columns)
        return self._gaussian

    def __repr__(self) -> str:
        h = self._health
        return (f"Baseline(estimator={self._estimator!r}, n={self._n}, columns={self._columns}, "
                f"path={h.path!r}, digits_lost={h.digits_lost:.1f}, jitter={h.jitter:.3g})")

    def to_dict(self) -> dict:
        """Plain-Python description (what the model file holds, without the checksum)."""
        return self._payload()

    def to_frame(self):
        """One row per column: ``mean``, ``sd`` (square root of the variance) and
        ``own_share``, the share of its variance not explained by the other
        columns (1 / VIF), from the factor's reported precision diagonal."""
        import pandas as pd

        low = self._factor.lower
        var = np.einsum("ij,ij->i", low, low)
        own = 1.0 / (var * self._factor.inv_diag())  # inverse-ok: reported share of variance, not an operator
        return pd.DataFrame({"mean": self._mean, "sd": np.sqrt(var), "own_share": own},
                            index=pd.Index(self._columns, name="column"))

    # -- sliding windows
    def _rows_for_window(self, rows: Any, what: str) -> np.ndarray:
        if self._estimator != "sample":
            raise InputError(
                f"{what}: rows can be folded in or out of a 'sample' baseline only; a {self._estimator!r} "
                "estimate depends on all rows at once, so refit it with fit_baseline")
        x, _, _ = _validate.as_rows(rows, self.dim, names=self._columns, name="rows")
        return x

    def _scatter_factor(self) -> Factor:
        div = self._wsum - 1.0
        low = self._factor.lower * math.sqrt(div)
        return Factor(low, self._factor.health, self._columns)

    def _windowed(self, mean: np.ndarray, scatter_f: Factor, n: int, wsum: float, k: int, sign: str) -> "Baseline":
        low = scatter_f.lower / math.sqrt(wsum - 1.0)
        h0 = self._factor.health
        f = Factor(low, _health_of(low, h0.jitter, h0.jitter_relative, "updated"), self._columns)
        params = dict(self._params)
        params["weight_sum"] = wsum
        key = "rows_added" if sign == "+" else "rows_removed"
        params[key] = int(params.get(key, 0)) + k
        health = dataclasses.replace(
            _health_from_factor(f, path="updated", gram_digits_lost=self._health.gram_digits_lost,
                                n_rows_read=self._health.n_rows_read, n_dropped=self._health.n_dropped,
                                n_chunks=self._health.n_chunks, passes=self._health.passes))
        return Baseline(mean=mean, factor=f, n=n, columns=self._columns, estimator=self._estimator,
                        params=params, health=health, weight_sum=wsum, created_utc=self._created)

    def update(self, rows: Any) -> "Baseline":
        """A new baseline with ``rows`` folded in, equal to refitting on the enlarged set.

        Parameters
        ----------
        rows : array_like or DataFrame, shape (p,) or (k, p)
            Complete rows (a DataFrame's columns are matched by name), each
            with unit weight.

        Returns
        -------
        Baseline

        Notes
        -----
        With ``W`` rows (or weight sum), mean ``mu`` and scatter ``S``, adding
        ``x`` gives ``mu' = mu + (x - mu) / (W + 1)`` and ``S' = S + (W / (W + 1))
        (x - mu)(x - mu)^T``: a rank-one update (``Factor.update``, O(p^2)) of
        the scatter factor ``L sqrt(W - 1)``, rescaled by ``1 / sqrt(W')`` at
        the end so the covariance stays ``S' / (W' - 1)``.

        Examples
        --------
        >>> import numpy as np, whiten
        >>> x = np.random.default_rng(0).normal(size=(50, 3))
        >>> b = whiten.fit_baseline(x[:40]).update(x[40:])
        >>> bool(np.allclose(b.cov, np.cov(x, rowvar=False)))
        True
        """
        x = self._rows_for_window(rows, "update")
        mu = self._mean.astype(np.float64).copy()
        w = self._wsum
        vecs = np.empty_like(x)
        for i, xi in enumerate(x):
            d = xi - mu
            vecs[i] = math.sqrt(w / (w + 1.0)) * d
            mu = mu + d / (w + 1.0)
            w += 1.0
        sf = self._scatter_factor().update(vecs) if x.shape[0] else self._scatter_factor()
        return self._windowed(mu, sf, self._n + x.shape[0], w, x.shape[0], "+")

    def downdate(self, rows: Any) -> "Baseline":
        """A new baseline with ``rows`` (that were part of the fit) folded out.

        Removing ``x`` from ``W`` rows: ``mu' = mu - (x - mu) / (W - 1)``,
        ``S' = S - (W / (W - 1)) (x - mu)(x - mu)^T``, a rank-one downdate
        (``Factor.downdate``, hyperbolic rotations).

        Raises
        ------
        InputError
            Fewer than ``p + 2`` rows would remain.
        NotPositiveDefiniteError
            The rows were not part of the fit (the scatter would lose
            positive definiteness).
        """
        x = self._rows_for_window(rows, "downdate")
        if self._n - x.shape[0] <= self.dim:
            raise InputError(f"downdate: removing {x.shape[0]} row(s) from {self._n} would leave no more rows "
                             f"than columns ({self.dim}); the covariance would be singular")
        mu = self._mean.astype(np.float64).copy()
        w = self._wsum
        vecs = np.empty_like(x)
        for i, xi in enumerate(x):
            d = xi - mu
            vecs[i] = math.sqrt(w / (w - 1.0)) * d
            mu = mu - d / (w - 1.0)
            w -= 1.0
        sf = self._scatter_factor().downdate(vecs) if x.shape[0] else self._scatter_factor()
        return self._windowed(mu, sf, self._n - x.shape[0], w, x.shape[0], "-")

    # -- files
    def _payload(self) -> dict:
        from .io.modelfile import jsonable

        low = self._factor.lower
        return jsonable({
            "columns": self._columns,
            "n": self._n,
            "weight_sum": self._wsum,
            "mean": self._mean.tolist(),
            "factor_lower": [low[i, : i + 1].tolist() for i in range(low.shape[0])],
            "estimator": self._estimator,
            "params": self._params,
            # JSON has no infinity: a non-finite health figure is written as the string "inf"
            "health": {k: ("inf" if isinstance(v, float) and math.isinf(v) else v)
                       for k, v in dataclasses.asdict(self._health).items()},
            "created_utc": self._created,
            "library_version": __version__,
        })

    def save(self, path: str | os.PathLike, *, force: bool = False):
        """Write the baseline to a JSON model file (format ``whiten.baseline/1``), atomically.

        Raises
        ------
        InputError
            The file exists and ``force`` is False, or the folder is missing.

        Returns
        -------
        pathlib.Path
        """
        from .io.modelfile import utc_now, write_model

        payload = self._payload()
        if payload["created_utc"] is None:
            payload["created_utc"] = utc_now()
        return write_model(path, MODEL_FORMAT, payload, force=force)

    @classmethod
    def _from_payload(cls, payload: dict, source: str) -> "Baseline":
        def bad(msg: str) -> ModelFileError:
            return ModelFileError(f"model file {source!r}: {msg}")

        try:
            cols = [str(c) for c in payload["columns"]]
            p = len(cols)
            mean = np.asarray(payload["mean"], dtype=np.float64)
            rows = payload["factor_lower"]
            low = np.zeros((p, p))
            if len(rows) != p or mean.shape != (p,):
                raise bad(f"mean/factor sizes do not match the {p} columns")
            for i, r in enumerate(rows):
                if len(r) != i + 1:
                    raise bad(f"factor row {i} has {len(r)} entries, expected {i + 1}")
                low[i, : i + 1] = np.asarray(r, dtype=np.float64)
            hd = {k: (math.inf if v == "inf" else v) for k, v in dict(payload["health"]).items()}
            known = {f.name for f in dataclasses.fields(BaselineHealth)}
            if set(hd) != known:
                raise bad(f"health fields {sorted(set(hd) ^ known)} missing or unknown")
            for k in ("rcond", "rcond_scaled", "digits_lost", "jitter", "jitter_relative"):
                hd[k] = float(hd[k])
            health = BaselineHealth(**hd)
            n = int(payload["n"])
            est = str(payload["estimator"])
        except ModelFileError:
            raise
        except (KeyError, TypeError, ValueError) as exc:
            raise bad(f"payload is incomplete or malformed ({type(exc).__name__}: {exc})") from None
        if est not in _ESTIMATORS:
            raise bad(f"unknown estimator {est!r}")
        if not np.isfinite(mean).all() or not np.isfinite(low).all():
            raise bad("mean or factor holds non-finite values")
        try:
            f0 = Factor.from_lower(low, columns=cols, jitter=health.jitter)
        except (InputError, NotPositiveDefiniteError) as exc:
            raise bad(f"the factor is not a valid Cholesky factor ({exc})") from None
        f = Factor(low, _health_of(low, health.jitter, health.jitter_relative, f0.health.method), cols)
        return cls(mean=mean, factor=f, n=n, columns=cols, estimator=est, params=dict(payload.get("params") or {}),
                   health=health, weight_sum=float(payload.get("weight_sum", n)),
                   created_utc=payload.get("created_utc"))

    # -- scoring lives in whiten.monitor; this is a thin hook
    def score(self, data, **options):
        """Score rows against this baseline; see :func:`whiten.monitor.score`."""
        from .monitor import score
        return score(self, data, **options)


def load_baseline(path: str | os.PathLike) -> Baseline:
    """Read a baseline written by :meth:`Baseline.save`.

    Raises
    ------
    ModelFileError
        Missing, truncated, edited (checksum mismatch), another format or
        version, or an inconsistent payload.

    Examples
    --------
    >>> import numpy as np, tempfile, os, whiten
    >>> b = whiten.fit_baseline(np.random.default_rng(1).normal(size=(30, 2)), columns=["a", "b"])
    >>> f = os.path.join(tempfile.mkdtemp(), "m.json")
    >>> _ = b.save(f)
    >>> bool(np.array_equal(whiten.load_baseline(f).mean, b.mean))
    True
    """
    from .io.modelfile import read_model

    payload = read_model(path, MODEL_FORMAT)
    return Baseline._from_payload(payload, os.fspath(path))


# -------------------------------------------------------------------- fit
def _weights_array(weights: Any) -> tuple[np.ndarray | None, str | None]:
    if weights is None:
        return None, None
    if isinstance(weights, str):
        return None, weights
    w, _, _ = _validate.as_float_array(weights, name="weights", ndim=(1,), allow_nan=True)
    return w, None


def fit_baseline(data: Any, *, estimator: str = "sample", columns: Sequence[str] | None = None,
                 chunksize: int | None = None, weights: Any = None, missing: str = "drop",
                 index_column: str | None = None, path: str = "auto", shrinkage: str = "ledoit-wolf",
                 support_fraction: float | None = None, seed: int | None = None,
                 progress: bool | None = None) -> Baseline:
    """Fit a Gaussian baseline (mean and covariance factor) from reference rows.

    Parameters
    ----------
    data : ndarray (N, p), DataFrame, str or PathLike, or iterable of DataFrames
        Rows of healthy operation. A path to a ``.csv``/``.tsv``/``.parquet``
        file is read in chunks of ``chunksize`` rows with bounded memory (a
        progress bar appears when stderr is a terminal). A list of chunks can
        be read twice; a one-shot iterator is read once.
    estimator : {"sample", "shrinkage", "robust"}
        ``"sample"``: unbiased sample covariance along the automatic numerical
        path (see Notes). ``"shrinkage"``: towards a scaled identity, intensity
        by ``shrinkage``; defined for N <= p. ``"robust"``: Minimum Covariance
        Determinant (FastMCD) with consistency factor and one reweighting step;
        the reference rows it leaves out are in ``params["flagged_rows"]``.
    columns : sequence of str, optional
        Columns to use (DataFrame, file, chunks) or names for an array's
        columns (default ``x0, x1, ...``).
    chunksize : int, optional
        Rows per chunk for files (default 100000) and per block for arrays.
    weights : array_like (N,) or str, optional
        Frequency weights (a weight of 3 counts a row three times), or the
        name of a weight column. The mean is ``sum w x / sum w`` and the
        covariance divides the weighted scatter by ``sum(w) - 1``, which
        matches ``numpy.cov(..., fweights=w)``. ``"sample"`` only.
    missing : {"drop", "error"}
        ``"drop"`` leaves incomplete rows out, counts them in
        ``health.n_dropped`` and warns; ``"error"`` raises at the first,
        naming its row and column.
    index_column : str, optional
        Column holding row labels (files and DataFrames).
    path : {"auto", "gram", "tsqr"}
        Numerical route for ``"sample"`` (and the scatter of ``"shrinkage"``).
    shrinkage : {"ledoit-wolf", "oas"}
        Intensity rule for ``estimator="shrinkage"``.
    support_fraction : float, optional
        ``"robust"``: fraction h/N of rows the MCD subset covers (default
        ``(N + p + 1) / 2`` rows, the highest breakdown point).
    seed : int, optional
        ``"robust"``: seed of the random starting subsets (default a fixed
        internal seed, so fits are reproducible).
    progress : bool, optional
        Force the progress bar on or off (default: when stderr is a terminal).

    Returns
    -------
    Baseline

    Raises
    ------
    InputError
        Unknown option, unreadable or non-numeric data (row and column
        named), N <= p for ``"sample"`` (suggesting ``"shrinkage"``), constant
        columns, linearly dependent columns ("s4 is a linear combination of
        s1, s2"), an incomplete row with ``missing="error"``.

    Warns
    -----
    UserWarning
        Incomplete rows were left out (how many, and the first).
    ConditioningWarning
        The covariance loses more than ``digits_warn`` digits.

    Notes
    -----
    The sample route accumulates, per row block, the scatter of rows moved to
    a pilot shift (the first block's mean) with exact pairwise merges (Chan,
    Golub & LeVeque, 1979): ``N p^2`` flops in BLAS-3 ``dsyrk`` calls and
    memory for one block. When the Gram factor loses more than
    ``whiten.get_options().gram_digits_max`` digits (default 6), the factor is
    recomputed by a second pass from a tall-skinny QR of the centred data
    (``2 N p^2`` flops), whose error grows with cond(X) rather than
    cond(X)^2; ``health.path`` says which route ran. A one-shot iterator
    cannot be read twice, so ``"auto"`` takes the QR route from the start.

    Memory: ``"sample"`` holds one chunk and one block at a time.
    ``"shrinkage"`` (Ledoit-Wolf) reads the data twice, keeping the chunks of
    a one-shot iterator in memory for the second pass. ``"robust"`` holds all
    complete rows in memory (the MCD compares every row with every subset).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> x = np.random.default_rng(7).normal(size=(200, 3)) @ [[1, .5, 0], [0, 1, .3], [0, 0, 1]]
    >>> b = whiten.fit_baseline(x, columns=["flow", "temp", "power"])
    >>> bool(np.allclose(b.cov, np.cov(x, rowvar=False)))
    True
    """
    if estimator not in _ESTIMATORS:
        raise InputError(f"estimator: expected one of {_ESTIMATORS}, got {estimator!r}")
    from .parallel.dask import is_dask_collection

    if is_dask_collection(data):
        # the dask engine: per-block states reduced in a tree on the workers
        unused = [k for k, v in (("chunksize", chunksize), ("index_column", index_column)) if v is not None]
        if unused:
            raise InputError(f"{', '.join(unused)}: not used with dask input (dask's own partitions are the "
                             "chunks; labels are the collection's index)")
        if weights is not None and not isinstance(weights, str):
            raise InputError("weights: with dask input, pass the name of a weights column of the dask DataFrame "
                             "(an in-memory array could not be matched to the partitions' rows)")
        from .parallel.dask import fit_baseline_dask

        return fit_baseline_dask(data, estimator=estimator, columns=columns, missing=missing, path=path,
                                 weights=weights)
    if missing not in _MISSING:
        raise InputError(f"missing: expected one of {_MISSING}, got {missing!r}")
    wvals, wcol = _weights_array(weights)
    if (wvals is not None or wcol is not None) and estimator != "sample":
        raise InputError(f"weights: supported with estimator='sample' only, not {estimator!r}")
    src = _Source(data, columns, chunksize, index_column, wcol, progress)
    clean = _Cleaner(src, missing, wvals)
    if estimator == "sample":
        b = _fit_sample(src, clean, path)
    elif estimator == "shrinkage":
        b = _fit_shrinkage(src, clean, path, shrinkage)
    else:
        b = _fit_robust(src, clean, support_fraction, seed)
    clean.report()
    return b


def _common_health(f: Factor, clean: _Cleaner, path: str, gram_digits: float | None, passes: int) -> BaselineHealth:
    return _health_from_factor(f, path=path, gram_digits_lost=gram_digits, n_rows_read=clean.n_read,
                               n_dropped=clean.n_dropped, n_chunks=clean.n_blocks, passes=passes)


def _fit_sample(src: _Source, clean: _Cleaner, path: str) -> Baseline:
    from .estimate.sample import covariance_factor, fit_scatter

    fit = fit_scatter(clean, src.names, path=path, reiterable=src.reiterable)
    f = covariance_factor(fit, src.names)
    st = fit.state
    weighted = clean.weights is not None or src.weight_column is not None
    params = {"divisor": "sum(w) - 1" if weighted else "n - 1", "weighted": weighted, "weight_sum": st.wsum}
    health = _common_health(f, clean, fit.path, fit.gram_digits_lost, fit.passes)
    return Baseline(mean=st.location, factor=f, n=st.n, columns=src.names, estimator="sample", params=params,
                    health=health, weight_sum=st.wsum)


def _cached(clean: _Cleaner, src: _Source) -> tuple[Callable[[], Iterator[Block]], bool]:
    """Blocks readable twice: the source itself, or (one-shot iterators) a list in memory."""
    if src.reiterable:
        return clean, True
    blocks = list(clean())
    return (lambda: iter(blocks)), True


def _fit_shrinkage(src: _Source, clean: _Cleaner, path: str, method: str) -> Baseline:
    from .estimate.sample import check_scatter
    from .estimate.shrinkage import SHRINKAGE_METHODS, shrinkage_intensity, shrunk_factor
    from .estimate.streaming import accumulate

    if method not in SHRINKAGE_METHODS:
        raise InputError(f"shrinkage: expected one of {SHRINKAGE_METHODS}, got {method!r}")
    blocks, _ = _cached(clean, src)
    # the shrunk factor is built from R; take the QR route directly (one pass)
    st, nb = accumulate(blocks(), "qr")
    if st is None or st.n == 0:
        raise InputError(f"no complete rows to fit (columns {src.names})")
    if st.n < 2:
        raise InputError("shrinkage needs at least 2 complete rows")
    check_scatter(st, src.names, dependent=False)
    norm4 = None
    passes = 1
    if method == "ledoit-wolf":
        norm4 = 0.0
        for blk in blocks():
            if blk.values.shape[0]:
                z = blk.values - st.shift - st.mean
                q = np.einsum("ij,ij->i", z, z)
                norm4 += float(q @ q)
        passes = 2
    delta, m = shrinkage_intensity(st.mat, st.n, method, norm4)
    f = shrunk_factor(st.mat, st.n, delta, m, src.names)
    params = {"shrinkage": method, "intensity": delta, "target": "scaled identity", "target_scale": m,
              "divisor": "n"}
    health = _common_health(f, clean, "tsqr", None, passes)
    return Baseline(mean=st.location, factor=f, n=st.n, columns=src.names, estimator="shrinkage",
                    params=params, health=health)


def _fit_robust(src: _Source, clean: _Cleaner, support_fraction: float | None, seed: int | None) -> Baseline:
    from .estimate.robust import fast_mcd

    blocks = list(clean())
    if not blocks or sum(b.values.shape[0] for b in blocks) == 0:
        raise InputError(f"no complete rows to fit (columns {src.names})")
    x = np.vstack([b.values for b in blocks])
    pos = np.concatenate([b.positions for b in blocks])
    labels = None
    if any(b.labels is not None for b in blocks):
        labels = [lab for b in blocks for lab in (b.labels if b.labels is not None else b.positions)]
    res = fast_mcd(x, src.names, support_fraction=support_fraction, seed=seed)
    flagged = np.flatnonzero(~res.kept)
    params = dict(res.params)
    params["flagged_rows"] = [int(pos[k]) for k in flagged]
    if labels is not None:
        params["flagged_labels"] = [labels[k] for k in flagged]
    params["n_flagged"] = int(flagged.size)
    health = _common_health(res.factor, clean, "mcd", None, 1)
    return Baseline(mean=res.mean, factor=res.factor, n=int(res.kept.sum()), columns=src.names,
                    estimator="robust", params=params, health=health)
