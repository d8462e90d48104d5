"""The numerical health record of a fitted baseline."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np

from .._numerics import digits_trusted, json_ready
from ..linalg.factor import Factor
from ..linalg.pivoted import RankReport, pivoted_cholesky

__all__ = ["BaselineHealth", "health_from_factor", "redundancy"]


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
    method : str
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
    method: str
    gram_digits_lost: float | None
    n_rows_read: int
    n_dropped: int
    n_chunks: int
    passes: int

    @property
    def digits_trusted(self) -> float:
        """About how many significant decimal digits a distance keeps."""
        return digits_trusted(self.digits_lost)

    @property
    def condition(self) -> float:
        """Condition estimate of the correlation matrix, ``1 / rcond_scaled``."""
        return math.inf if self.rcond_scaled <= 0 else 1.0 / self.rcond_scaled

    def to_dict(self) -> dict:
        return json_ready(dataclasses.asdict(self) | {"digits_trusted": self.digits_trusted})

    def to_frame(self):
        import pandas as pd

        d = self.to_dict()
        return pd.DataFrame({"value": list(d.values())}, index=pd.Index(list(d), name="quantity"))


def health_from_factor(f: Factor, **kw) -> BaselineHealth:
    """The factor's condition and jitter figures plus the fit's own (``kw``) as one record."""
    h = f.health
    return BaselineHealth(rcond=h.rcond, rcond_scaled=h.rcond_scaled, digits_lost=h.digits_lost,
                          jitter=h.jitter, jitter_relative=h.jitter_relative, **kw)


def redundancy(factor: Factor, tol: float, columns: Sequence[str] | None = None) -> RankReport:
    """Which columns of a covariance are (nearly) linear combinations of the others.

    The pivoted Cholesky factorization (LAPACK ``dpstrf``) of the covariance as
    estimated -- any diagonal jitter taken off again, so the estimate is judged
    rather than its repair -- with relative tolerance ``tol`` on the share of a
    column's variance left unexplained by the columns before it.
    """
    m = factor.matrix()
    m[np.diag_indices_from(m)] -= float(factor.jitter)
    names = list(columns) if columns is not None else factor.columns
    return pivoted_cholesky(m, tol=tol, columns=list(names) if names is not None else None)
