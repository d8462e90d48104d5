"""Independent errors: ``diag(d)``."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from ...errors import InputError
from ..factor import FactorHealth
from .base import StructuredCovariance, _positive_vector

__all__ = ['DiagonalCovariance', 'diagonal']


class DiagonalCovariance(StructuredCovariance):
    """``diag(d)``: independent errors. Build with :func:`diagonal`."""

    def __init__(self, d: Any, columns: Sequence[str] | None = None):
        self._d = _positive_vector(d, "d")
        self._sd = np.sqrt(self._d)
        self._names = None if columns is None else [str(n) for n in columns]
        if self._names is not None and len(self._names) != self._d.size:
            raise InputError(f"columns: expected {self._d.size} names, got {len(self._names)}")
        # A diagonal matrix scaled to unit diagonal is the identity: no digits lost.
        rc = float(self._d.min() / self._d.max())
        self._health = FactorHealth(rc, 1.0, 0.0, 0.0, 0.0, "diagonal")

    @property
    def dim(self) -> int:
        return self._d.size

    @property
    def variances(self) -> np.ndarray:
        return self._d

    @property
    def health(self) -> FactorHealth:
        return self._health

    def logdet(self) -> float:
        """``sum(log d)``; never overflows."""
        return float(np.sum(np.log(self._d)))

    def _solve_cols(self, b: np.ndarray) -> np.ndarray:
        return b / self._d[:, None]

    def _whiten_rows(self, rows: np.ndarray) -> np.ndarray:
        return rows / self._sd

    def _dense(self) -> np.ndarray:
        return np.diag(self._d)


def diagonal(d: Any, *, columns: Sequence[str] | None = None) -> DiagonalCovariance:
    """Covariance of independent errors with variances ``d``.

    Parameters
    ----------
    d : array_like, shape (n,)
        Positive, finite variances.
    columns : sequence of str, optional
        Column (variable) labels.

    Returns
    -------
    DiagonalCovariance

    Raises
    ------
    InputError
        Not 1-D, empty or not finite.
    NotPositiveDefiniteError
        A variance is zero or negative (names its position).

    Notes
    -----
    Every operation costs O(n) per row. ``health.digits_lost`` is 0: solves
    with a diagonal are exact to rounding whatever the spread of ``d``.

    Examples
    --------
    >>> import numpy as np, whiten
    >>> s = whiten.diagonal([4.0, 1e-20])
    >>> bool(np.isclose(s.quad([2.0, 1e-10]), 2.0))
    True
    """
    return DiagonalCovariance(d, columns)
