"""The Baseline: a Gaussian reference model of healthy operation (mean, covariance factor, health).

Fitted by :func:`whiten.fit_baseline` (:mod:`whiten.baseline.fit`), read back by
:func:`load_baseline`; sliding windows in :mod:`whiten.baseline.window`, the file
format in :mod:`whiten.baseline.modelfile`.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import Any

import numpy as np

from .. import _validate
from .._numerics import column_norms
from ..errors import InputError
from ..gaussian import Gaussian
from ..linalg.factor import Factor
from ..monitor.calibrated import SimulatedLaw
from ..monitor.score import score
from .health import BaselineHealth, health_from_factor
from .modelfile import payload_of, read_payload, save_payload
from .window import fold

__all__ = ["Baseline", "load_baseline"]


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
    limit_law : SimulatedLaw or None
        The simulated law of a new row's d2 that ``score(phase="new")`` uses.
    """

    def __init__(self, *, mean: np.ndarray, factor: Factor, n: int, columns: Sequence[str], estimator: str,
                 params: dict, health: BaselineHealth, weight_sum: float | None = None,
                 created_utc: str | None = None, limit_law: SimulatedLaw | None = None,
                 settings: dict | None = None, provenance: dict | None = None, checksum: str | None = None,
                 model_format: str | None = None):
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
        self._law = limit_law
        self._settings = dict(settings or {})
        self._provenance = dict(provenance or {})
        #: the SHA-256 of the model file it was read from (None for a fitted, unsaved model), and its format
        self.checksum = checksum
        self.model_format = model_format

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
    def limit_law(self) -> SimulatedLaw | None:
        """The simulated law of a new row's d2 (:mod:`whiten.monitor.calibrated`), or None where the
        exact law (unweighted sample estimate) or the asymptotic one (robust and weighted baselines
        with m p above ``ASYMPTOTIC_CELLS``; shrinkage is always simulated) serves."""
        return self._law

    @property
    def created_utc(self) -> str | None:
        return self._created

    @property
    def settings(self) -> dict:
        """How the rows were read and fitted, for scoring to read new rows the same way
        (:mod:`whiten.baseline.record`): ``index_column``, ``index_kind``, ``columns``, ``na_values``,
        ``estimator`` and its options. Empty for a model file older than format 4."""
        return dict(self._settings)

    @property
    def provenance(self) -> dict:
        """Where the model came from (:mod:`whiten.baseline.record`): source file, size, SHA-256, rows
        read and used, first and last index label, whiten version, creation time, the call. Empty for a
        model file older than format 4."""
        return dict(self._provenance)

    def tag(self) -> str:
        """How outputs name this model: its file checksum (12 hex digits) and training period."""
        from .record import model_tag

        return model_tag(self, self.checksum)

    def with_record(self, settings: dict, provenance: dict, *, created_utc: str | None = None) -> Baseline:
        """The same model carrying these settings and provenance (a new Baseline)."""
        return Baseline(mean=self._mean, factor=self._factor, n=self._n, columns=self._columns,
                        estimator=self._estimator, params=self._params, health=self._health,
                        weight_sum=self._wsum, created_utc=created_utc or self._created, limit_law=self._law,
                        settings=settings, provenance=provenance)

    @property
    def gaussian(self) -> Gaussian:
        if self._gaussian is None:
            self._gaussian = Gaussian(self._mean, self._factor, columns=self._columns)
        return self._gaussian

    def __repr__(self) -> str:
        h = self._health
        return (f"Baseline(estimator={self._estimator!r}, n={self._n}, columns={self._columns}, "
                f"method={h.method!r}, digits_lost={h.digits_lost:.1f}, jitter={h.jitter:.3g})")

    def to_dict(self) -> dict:
        """Plain-Python description (what the model file holds, without the checksum)."""
        return payload_of(self)

    def to_frame(self):
        """One row per column: ``mean``, ``sd`` (square root of the variance) and
        ``own_share``, the share of its variance not explained by the other
        columns (1 / VIF), from the factor's reported precision diagonal."""
        import pandas as pd

        sd = column_norms(self._factor.lower.T)  # row norms of L, without overflow at extreme scales
        own = 1.0 / (sd * self._factor.inv_sd()) ** 2  # inverse-ok: reported share of variance, not an operator
        return pd.DataFrame({"mean": self._mean, "sd": sd, "own_share": own},
                            index=pd.Index(self._columns, name="column"))

    # -- sliding windows (whiten.baseline.window)
    def _rows_for_window(self, rows: Any, what: str) -> np.ndarray:
        if self._estimator != "sample":
            raise InputError(
                f"{what}: rows can be folded in or out of a 'sample' baseline only; a {self._estimator!r} "
                "estimate depends on all rows at once, so refit it with fit_baseline")
        x, _, _ = _validate.as_rows(rows, self.dim, names=self._columns, name="rows")
        return x

    def _windowed(self, x: np.ndarray, sign: int) -> Baseline:
        mean, f, wsum = fold(self._mean, self._factor, self._wsum, x, sign)
        k = x.shape[0]
        params = dict(self._params)
        params["weight_sum"] = wsum
        key = "rows_added" if sign > 0 else "rows_removed"
        params[key] = int(params.get(key, 0)) + k
        h = self._health
        health = health_from_factor(f, method="updated", gram_digits_lost=h.gram_digits_lost,
                                    n_rows_read=h.n_rows_read, n_dropped=h.n_dropped, n_chunks=h.n_chunks,
                                    passes=h.passes)
        return Baseline(mean=mean, factor=f, n=self._n + sign * k, columns=self._columns,
                        estimator=self._estimator, params=params, health=health, weight_sum=wsum,
                        created_utc=self._created, settings=self._settings,
                        provenance=dict(self._provenance, windowed=True) if self._provenance else None)

    def update(self, rows: Any) -> Baseline:
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
        return self._windowed(self._rows_for_window(rows, "update"), +1)

    def downdate(self, rows: Any) -> Baseline:
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
        return self._windowed(x, -1)

    # -- files (whiten.baseline.modelfile)
    def save(self, path: str | os.PathLike, *, force: bool = False):
        """Write the baseline to a JSON model file (format ``whiten.baseline/4``), atomically.

        Raises
        ------
        InputError
            The file exists and ``force`` is False, or the folder is missing.

        Returns
        -------
        pathlib.Path
        """
        return save_payload(payload_of(self), path, force=force)

    # -- scoring lives in whiten.monitor; this is a thin hook
    def score(self, data, **options):
        """Score rows against this baseline; see :func:`whiten.monitor.score`."""
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
    return Baseline(**read_payload(path))
