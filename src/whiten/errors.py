"""Exceptions and warnings raised by whiten.

Failure comes in three tiers:

* misuse or bad data -> :class:`InputError` (a ``ValueError``), whose message
  names the row, column or file and says what to do;
* a numerical failure -> :class:`NotPositiveDefiniteError`, saying at which
  pivot and by how much the matrix failed;
* a loss of accuracy -> a :class:`NumericalWarning` subclass whose message
  carries the numbers (condition estimate, digits lost, jitter added).

The same facts are always available as fields on the result object
(``.health``), so pipelines can check values instead of catching warnings.
"""

from __future__ import annotations

__all__ = [
    "WhitenError",
    "InputError",
    "NotPositiveDefiniteError",
    "ModelFileError",
    "NumericalWarning",
    "JitterWarning",
    "ConditioningWarning",
    "RankDeficiencyWarning",
    "IntegerPrecisionWarning",
]


class WhitenError(Exception):
    """Base class of every exception whiten raises on purpose."""


class InputError(WhitenError, ValueError):
    """The input cannot be used as given (shape, type, missing values, names).

    The message names the offending row, column or file and the fix.
    """


class NotPositiveDefiniteError(WhitenError, ValueError):
    """A matrix that must be symmetric positive definite is not.

    Attributes
    ----------
    pivot : int or None
        0-based index of the first pivot that failed, when known.
    value : float or None
        The failing pivot (or smallest eigenvalue estimate), relative to the
        diagonal scale, when known.
    """

    def __init__(self, message: str, *, pivot: int | None = None, value: float | None = None):
        super().__init__(message)
        self.pivot = pivot
        self.value = value


class ModelFileError(InputError):
    """A model file is missing, truncated, edited, or of an unknown version."""


class NumericalWarning(UserWarning):
    """Base class of whiten's accuracy warnings. The message holds the numbers."""


class JitterWarning(NumericalWarning):
    """Diagonal jitter was added so that a matrix could be factored."""


class ConditioningWarning(NumericalWarning):
    """The condition estimate says many digits of the answer may be lost."""


class RankDeficiencyWarning(NumericalWarning):
    """A matrix or design is (numerically) rank deficient; the message names columns."""


class IntegerPrecisionWarning(NumericalWarning):
    """Integers beyond 2**53 that float64 cannot hold were rounded; the message names the column."""


class WeakScreenWarning(UserWarning):
    """The alarm limit is far above the known-parameter chi-square limit (too few reference rows).

    A statistical weakness, not a loss of digits: the answer is computed accurately, but a screen
    whose limit is inflated by estimation error misses faults. It is therefore a plain
    ``UserWarning`` rather than a :class:`NumericalWarning`, so silencing rounding warnings does not
    silence it. The message holds the limit, the chi-square limit and the reference rows that would
    bring the limit within 10% of it.
    """


__all__.append("WeakScreenWarning")


class LimitAccuracyWarning(UserWarning):
    """The stated false-alarm rate of a simulated limit is approximate at this number of reference rows.

    Raised for shrinkage and robust baselines with fewer than ``10 p`` reference rows: their simulated law is
    a parametric bootstrap drawn from the *fitted* correlation, and for these estimators the law of a new
    row's d2 depends on the true correlation, so the bootstrap world's law differs from the truth's. The
    message states the measured range of the actual rate (see the monitoring guide).
    """


__all__.append("LimitAccuracyWarning")
