"""Numerical defaults, kept in one place.

Every threshold the library applies on the user's behalf lives here, so it
can be read, documented and changed in one spot::

    import whiten
    with whiten.settings(jitter_ceiling=1e-6):
        f = whiten.cholesky(a)

``whiten.current_settings()`` returns the current values.
"""

from __future__ import annotations

import contextlib
import dataclasses
from collections.abc import Iterator

from .errors import InputError

__all__ = ["Settings", "current_settings", "change_settings", "settings"]


@dataclasses.dataclass
class Settings:
    """Numerical defaults.

    Attributes
    ----------
    jitter_start : float
        First rung of the jitter ladder, relative to the mean diagonal.
    jitter_factor : float
        Ratio between consecutive rungs.
    jitter_ceiling : float
        Largest relative jitter ``"auto"`` will add before giving up.
    indefinite_tol : float
        A pivot of the unit-diagonal matrix below ``-indefinite_tol`` marks the
        matrix as clearly indefinite: an error, never hidden by jitter.
    symmetry_rtol : float
        Largest accepted ``|a - a.T| / max|a|``.
    digits_warn : float
        A :class:`~whiten.errors.ConditioningWarning` is issued when the
        estimated number of decimal digits lost, ``log10(1/rcond)``, exceeds
        this. With float64 (about 16 digits) the default of 10 leaves about 6
        trustworthy digits.
    block_rows : int
        Rows per block in the blocked many-row paths (cache-sized).
    gram_digits_max : float
        The sample covariance is first factored from the (shifted) Gram
        matrix; when that factor's estimated digits lost exceed this, the
        factor is recomputed from a tall-skinny QR of the centred data (one
        more pass). The Gram route's error grows with cond(X)^2, the QR
        route's with cond(X); the default of 6 keeps about 10 digits on the
        Gram route. ``inf`` never re-reads; ``fit_baseline(method="tsqr")`` always
        takes the QR route.
    """

    jitter_start: float = 1e-10
    jitter_factor: float = 10.0
    jitter_ceiling: float = 1e-4
    indefinite_tol: float = 1e-8
    symmetry_rtol: float = 1e-10
    digits_warn: float = 10.0
    block_rows: int = 4096
    gram_digits_max: float = 6.0

    def validate(self) -> None:
        if not (0 < self.jitter_start <= self.jitter_ceiling):
            raise InputError(
                f"jitter_start ({self.jitter_start:g}) must be positive and not above "
                f"jitter_ceiling ({self.jitter_ceiling:g})"
            )
        if self.jitter_factor <= 1:
            raise InputError(f"jitter_factor must exceed 1, got {self.jitter_factor:g}")
        if not self.gram_digits_max >= 0:
            raise InputError(f"gram_digits_max must be non-negative, got {self.gram_digits_max:g}")
        if self.block_rows < 1:
            raise InputError(f"block_rows must be a positive integer, got {self.block_rows}")


_current = Settings()


def current_settings() -> Settings:
    """Return the current numerical defaults (a copy)."""
    return dataclasses.replace(_current)


def change_settings(**values) -> None:
    """Change numerical defaults for the rest of the process.

    Raises
    ------
    InputError
        On an unknown name or an invalid value.
    """
    global _current
    known = {f.name for f in dataclasses.fields(Settings)}
    unknown = sorted(set(values) - known)
    if unknown:
        raise InputError(f"unknown setting(s) {unknown}; choose from {sorted(known)}")
    new = dataclasses.replace(_current, **values)
    new.validate()
    _current = new


@contextlib.contextmanager
def settings(**values) -> Iterator[Settings]:
    """Context manager that changes numerical defaults inside a ``with`` block."""
    global _current
    saved = _current
    change_settings(**values)
    try:
        yield current_settings()
    finally:
        _current = saved


def current() -> Settings:
    """The live settings object (internal; do not mutate)."""
    return _current
