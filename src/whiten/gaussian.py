"""The multivariate Gaussian, evaluated through its Cholesky factor."""

from __future__ import annotations

import dataclasses
import math
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np

from ._validate import as_float_array, as_rows, nonfinite_error
from .errors import ConditioningWarning, InputError
from .linalg.cholesky import cholesky
from .linalg.factor import Factor, factor_scaled, health_of

__all__ = ["Gaussian", "RowEvaluation"]

_LOG_2PI = math.log(2.0 * math.pi)
_MISSING = ("error", "marginalize")


@dataclasses.dataclass(frozen=True)
class RowEvaluation:
    """Per-row results of :meth:`Gaussian.evaluate` (arrays of length N).

    Attributes
    ----------
    d2 : ndarray
        Squared Mahalanobis distance on the observed variables (NaN when none).
    logpdf : ndarray
        Log-density of the observed variables under their marginal (NaN when none).
    n_observed : ndarray of int
        Number of variables observed in the row.
    index : pandas.Index or None
        Row labels of a DataFrame input.
    """

    d2: np.ndarray
    logpdf: np.ndarray
    n_observed: np.ndarray
    index: Any = None


class Gaussian:
    """Multivariate normal distribution N(mean, cov), held as mean and Cholesky factor.

    Parameters
    ----------
    mean : array_like or pandas.Series, shape (p,)
    cov : array_like, DataFrame or Factor, shape (p, p)
        A Factor is used as is (no refactorization).
    jitter : {"auto", False} or float
        Passed to :func:`whiten.cholesky` when ``cov`` is a matrix.
    columns : sequence of str, optional
        Column (variable) labels; taken from a DataFrame/Series/Factor when not given.

    Raises
    ------
    InputError
        Shapes disagree, non-finite values, names disagree.
    NotPositiveDefiniteError
        ``cov`` cannot be factored (see :func:`whiten.cholesky`).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> g = whiten.Gaussian([0.0, 0.0], [[2.0, 0.5], [0.5, 1.0]])
    >>> x = np.array([[0.3, -0.2], [1.0, 1.0]])
    >>> bool(np.all(g.logpdf(x) < g.logpdf([0.0, 0.0])))
    True
    """

    def __init__(self, mean: Any, cov: Any, *, jitter: str | bool | float = "auto",
                 columns: Sequence[str] | None = None):
        names = columns
        mu, mu_names, mu_index = as_float_array(mean, name="mean", ndim=(1,))
        if mu_index is not None and mu_names is None:
            mu_names = [str(k) for k in mu_index]
        if isinstance(cov, Factor):
            factor = cov
        else:
            factor = cholesky(cov, jitter=jitter, columns=names)
        if factor.dim != mu.shape[0]:
            raise InputError(f"mean has length {mu.shape[0]} but cov is {factor.dim} x {factor.dim}")
        cand = [list(names)] if names is not None else []
        cand += [n for n in (factor.columns, mu_names) if n is not None]
        final = cand[0] if cand else None
        for other in cand[1:]:
            if list(other) != list(cand[0]):
                raise InputError(f"variable names disagree: {list(cand[0])} vs {list(other)}")
        if final is not None and len(final) != mu.shape[0]:
            raise InputError(f"columns: expected {mu.shape[0]} names, got {len(final)}")
        if final is not None and factor.columns != list(final):
            factor = Factor(factor.lower, factor.health, final, matrix=factor.matrix())
        mu = mu.copy()
        mu.setflags(write=False)
        self._mean = mu
        self._factor = factor
        self._names = list(final) if final is not None else None

    # ---------------------------------------------------------------- basics
    @property
    def mean(self) -> np.ndarray:
        return self._mean

    @property
    def factor(self) -> Factor:
        return self._factor

    @property
    def cov(self) -> np.ndarray:
        """The covariance represented (``a + jitter I`` when jitter was added)."""
        return self._factor.matrix()

    @property
    def dim(self) -> int:
        return self._mean.shape[0]

    @property
    def columns(self) -> list[str] | None:
        return None if self._names is None else list(self._names)

    @property
    def health(self):
        return self._factor.health

    def __repr__(self) -> str:
        return f"Gaussian(dim={self.dim}, columns={self._names}, {self._factor!r})"

    # ------------------------------------------------------------- densities
    def _prepare(self, x: Any, missing: str):
        if missing not in _MISSING:
            raise InputError(f"missing: expected one of {_MISSING}, got {missing!r}")
        # with missing="error" the blocked pass itself reveals NaN/inf (they propagate into the
        # row's distance), so the separate scan over the data is skipped; see _check_rows
        rows, one, index = as_rows(x, self.dim, names=self._names, name="x",
                                   allow_nan=(missing == "marginalize"), check_finite=(missing != "error"))
        return rows, one, index

    def _check_rows(self, rows: np.ndarray, d2: np.ndarray, index: Any) -> None:
        """Raise for the first row whose non-finite distance comes from a non-finite entry."""
        if np.isfinite(d2).all():
            return
        for r in np.flatnonzero(~np.isfinite(d2)):
            bad = np.flatnonzero(~np.isfinite(rows[r]))
            if bad.size:  # (a finite row whose distance overflows keeps inf: it is that far out)
                raise nonfinite_error(rows, int(r), int(bad[0]), self._names, index, name="x")

    def evaluate(self, x: Any, *, missing: str = "error") -> RowEvaluation:
        """Squared distance, log-density and number observed, for every row.

        Parameters
        ----------
        x : array_like or DataFrame, shape (p,) or (N, p)
            A DataFrame's columns are matched to the model's names.
        missing : {"error", "marginalize"}
            ``"error"``: a NaN raises :class:`~whiten.errors.InputError` naming
            row and column. ``"marginalize"``: each row is evaluated under the
            marginal of the variables it has; rows are grouped by missingness
            pattern and each sub-covariance is factored once. A row with nothing
            observed gets NaN.

        Returns
        -------
        RowEvaluation

        Notes
        -----
        Complete rows go through the blocked path of :meth:`Factor.quad`: cost
        N p^2 flops, extra memory one row block.
        """
        rows, _, index = self._prepare(x, missing)
        n, p = rows.shape
        d2 = np.empty(n)
        logpdf = np.empty(n)
        nobs = np.full(n, p, dtype=np.int64)
        mask = np.isnan(rows) if missing == "marginalize" else None
        if mask is None or not mask.any():
            d2[:] = self._factor._quad_checked(rows, self._mean) if n else d2
            if missing == "error":
                self._check_rows(rows, d2, index)
            logpdf[:] = -0.5 * (p * _LOG_2PI + self._factor.logdet() + d2)
            return RowEvaluation(d2, logpdf, nobs, index)
        complete = ~mask.any(axis=1)
        if complete.any():
            q = self._factor._quad_checked(rows[complete], self._mean)
            d2[complete] = q
            logpdf[complete] = -0.5 * (p * _LOG_2PI + self._factor.logdet() + q)
        partial = np.flatnonzero(~complete)
        patterns, inverse = np.unique(mask[partial], axis=0, return_inverse=True)
        inverse = np.asarray(inverse).reshape(-1)
        for k, pat in enumerate(patterns):
            which = partial[inverse == k]
            obs = np.flatnonzero(~pat)
            nobs[which] = obs.size
            if obs.size == 0:
                d2[which] = np.nan
                logpdf[which] = np.nan
                continue
            sub = self._sub_factor(obs)
            q = sub._quad_checked(rows[np.ix_(which, obs)], self._mean[obs])
            d2[which] = q
            logpdf[which] = -0.5 * (obs.size * _LOG_2PI + sub.logdet() + q)
        return RowEvaluation(d2, logpdf, nobs, index)

    def _sub_factor(self, obs: np.ndarray) -> Factor:
        if obs.size == self.dim:
            return self._factor
        with warnings.catch_warnings():
            # a principal sub-matrix is no worse conditioned than the whole
            warnings.simplefilter("ignore", ConditioningWarning)
            return self._factor.subset(obs)

    def _wrap(self, values: np.ndarray, one: bool, index: Any, name: str):
        if one:
            return float(values[0])
        if index is not None:
            import pandas as pd

            return pd.Series(values, index=index, name=name)
        return values

    def logpdf(self, x: Any, *, missing: str = "error"):
        """Log-density of each row.

        Returns a float for one vector, an ndarray for rows, a pandas Series
        (same index) for a DataFrame. See :meth:`evaluate` for ``missing``.
        """
        ev = self.evaluate(x, missing=missing)
        one = np.ndim(x) == 1 and not hasattr(x, "columns")
        return self._wrap(ev.logpdf, one, ev.index, "logpdf")

    def mahalanobis(self, x: Any, *, squared: bool = False, missing: str = "error"):
        """Mahalanobis distance of each row from the mean (squared with ``squared=True``)."""
        ev = self.evaluate(x, missing=missing)
        vals = ev.d2 if squared else np.sqrt(ev.d2)
        one = np.ndim(x) == 1 and not hasattr(x, "columns")
        return self._wrap(vals, one, ev.index, "d2" if squared else "distance")

    # -------------------------------------------------------------- structure
    def _indices(self, idx: Any, what: str) -> np.ndarray:
        if isinstance(idx, (str, int, np.integer)):
            idx = [idx]
        out = []
        for item in idx:
            if isinstance(item, str):
                if self._names is None or item not in self._names:
                    raise InputError(f"{what}: unknown variable {item!r}; known: {self._names}")
                out.append(self._names.index(item))
            else:
                k = int(item)
                if not -self.dim <= k < self.dim:
                    raise InputError(f"{what}: index {k} out of range for dimension {self.dim}")
                out.append(k % self.dim)
        if len(set(out)) != len(out):
            raise InputError(f"{what}: repeated variables in {list(idx)}")
        if not out:
            raise InputError(f"{what}: no variables given")
        return np.asarray(out, dtype=np.intp)

    def marginal(self, idx: Any) -> Gaussian:
        """Marginal distribution of the variables ``idx`` (names or positions, in that order)."""
        ii = self._indices(idx, "idx")
        names = None if self._names is None else [self._names[i] for i in ii]
        return Gaussian(self._mean[ii], self._sub_factor(ii) if ii.size != self.dim or
                        not np.array_equal(ii, np.arange(self.dim)) else self._factor, columns=names)

    def conditional(self, idx: Any, values: Any) -> Gaussian:
        """Distribution of the other variables given ``x[idx] = values``.

        Notes
        -----
        The covariance is permuted so that the given variables come first and
        factored once: with ``L = [[L11, 0], [L21, L22]]`` the conditional
        covariance is ``L22 L22^T`` (the Schur complement, already factored) and
        the conditional mean is ``mu_b + L21 L11^{-1} (values - mu_a)``, one
        triangular solve. No inverse is formed.
        """
        ia = self._indices(idx, "idx")
        vals, _, _ = as_float_array(values, name="values", ndim=(1,))
        if vals.shape[0] != ia.size:
            raise InputError(f"values: expected {ia.size} values for {ia.size} variables, got {vals.shape[0]}")
        ib = np.asarray([k for k in range(self.dim) if k not in set(ia.tolist())], dtype=np.intp)
        if ib.size == 0:
            raise InputError("conditional: every variable is given; nothing left to describe")
        order = np.concatenate([ia, ib])
        m = self._factor.matrix()[np.ix_(order, order)]
        lower, _, info, _, _ = factor_scaled(m)
        if info != 0:  # pragma: no cover - permutation of a factored matrix
            raise InputError("conditional: permuted covariance failed to factor")
        k = ia.size
        l11, l21, l22 = lower[:k, :k], lower[k:, :k], lower[k:, k:]
        f11 = Factor(l11, self._factor.health)
        z = f11.solve_lower(vals - self._mean[ia])
        mu = self._mean[ib] + l21 @ z
        msub = l22 @ l22.T
        h = health_of(l22, self._factor.jitter, self._factor.health.jitter_relative, "schur")
        names = None if self._names is None else [self._names[i] for i in ib]
        return Gaussian(mu, Factor(l22, h, names, matrix=msub), columns=names)

    # ------------------------------------------------------------- the rest
    def sample(self, n: int, rng: Any = None) -> np.ndarray:
        """``n`` draws as an (n, p) array: ``mean + z L^T`` with standard normal z.

        ``rng`` is a ``numpy.random.Generator``, a seed, or None.
        """
        if not isinstance(n, (int, np.integer)) or n < 0:
            raise InputError(f"n: expected a non-negative integer, got {n!r}")
        gen = np.random.default_rng(rng)
        z = gen.standard_normal((int(n), self.dim))
        return self._mean + z @ self._factor.lower.T

    def entropy(self) -> float:
        """Differential entropy in nats, ``(p (1 + log 2 pi) + log det cov) / 2``."""
        return 0.5 * (self.dim * (1.0 + _LOG_2PI) + self._factor.logdet())

    def kl_divergence(self, other: Gaussian) -> float:
        """KL(self || other) in nats.

        ``tr(S2^{-1} S1)`` is ``||L2^{-1} L1||_F^2`` (one triangular solve with
        a matrix right-hand side), the mean term is ``other.factor.quad``.
        """
        if not isinstance(other, Gaussian):
            raise InputError("other: expected a whiten.Gaussian")
        if other.dim != self.dim:
            raise InputError(f"other: dimension {other.dim} differs from {self.dim}")
        w = other.factor.solve_lower(self._factor.lower)
        tr = float(np.sum(w * w))
        dq = float(other.factor.quad(self._mean - other.mean))  # one row in, so already a float
        return 0.5 * (tr + dq - self.dim + other.factor.logdet() - self._factor.logdet())

