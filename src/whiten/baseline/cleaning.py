"""The one cleaner of reference rows: weights checked, infinities refused, the missing-value policy applied.

:func:`clean_block` is the per-block kernel; the in-memory fit runs it through
:class:`Cleaner` (which also counts and reports), the dask engine runs it on the
workers. Both engines therefore name a bad cell, refuse an infinity and drop
an incomplete row by the same code.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np

from .._warn import warn
from ..errors import InputError
from ..estimate.streaming import Block
from .inputs import Source

__all__ = ["MISSING_POLICIES", "check_frequency_weights", "clean_block", "CleanBlock", "Cleaner", "Equilibrated"]

#: what to do with an incomplete reference row
MISSING_POLICIES = ("drop", "error")


def check_frequency_weights(w: np.ndarray, where: Callable[[int], str], what: str = "the weight") -> None:
    """Frequency weights must be finite and non-negative; the first bad one is named by ``where(k)``.

    ``what`` names the weight in the message (``"weight column 'n_seen'"`` for a weight column).
    """
    bad = ~np.isfinite(w) | (w < 0)
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        shown = "missing" if np.isnan(w[k]) else f"{w[k]:g}"
        raise InputError(f"{where(k)}: {what} is {shown}; frequency weights must be finite and "
                         "non-negative (a weight of 0 leaves the row out)")


@dataclass
class CleanBlock:
    """One block after :func:`clean_block`.

    ``keep`` is None when every row was kept; ``first_dropped`` is
    ``(where, column)`` of the first incomplete row left out; ``nan_per_column``
    counts missing cells per column (None when there were none).
    """

    values: np.ndarray
    weights: np.ndarray | None
    keep: np.ndarray | None
    first_dropped: tuple[str, str] | None
    nan_per_column: np.ndarray | None


def clean_block(values: np.ndarray, weights: np.ndarray | None, names: list[str], missing: str,
                where: Callable[[int], str], weights_name: str = "the weight", *,
                name_first: bool = True) -> CleanBlock:
    """Apply the weights check and the missing-value policy to one raw block.

    Parameters
    ----------
    values : ndarray, shape (m, p)
        Raw rows (NaN marks a missing reading).
    weights : ndarray (m,) or None
    names : list of str
        Column names, for messages.
    missing : {"drop", "error"}
    where : callable
        ``where(r)`` names row ``r`` of the block for a message, with its source (e.g.
        ``"data: row 1207 (index '2026-03-01 04:00')"`` or
        ``"data file 'week.csv': line 1209, row 1207 (0-based data row)"``).
    weights_name : str
        How messages name a row's weight (``"weight column 'n'"``, or ``"the weight"``).
    name_first : bool
        Name the first incomplete row left out (``first_dropped``); a caller
        that already has one passes False, which spares a file-line lookup.

    Raises
    ------
    InputError
        A bad weight, an infinite value, or a missing value with ``missing="error"``;
        the row and column are named.

    Notes
    -----
    The screen is one sum: it is finite unless some value is NaN or infinite (or
    the sum overflows, a harmless false alarm), and only then is the block
    looked at cell by cell. No N x p mask for a clean block.
    """
    if weights is not None:
        check_frequency_weights(weights, where, weights_name)
    if not values.size or np.isfinite(values.sum()):
        return CleanBlock(values, weights, None, None, None)
    inf = np.isinf(values)
    if inf.any():
        r, c = (int(v) for v in np.argwhere(inf)[0])
        raise InputError(f"{where(r)}, column {names[c]!r} is {values[r, c]}; every value must be "
                         "a finite number (a missing value may be NaN)")
    nan = np.isnan(values)
    per_col = nan.sum(axis=0)
    bad = nan.any(axis=1)
    if not bad.any():
        return CleanBlock(values, weights, None, None, per_col)
    k = int(np.flatnonzero(bad)[0])
    j = int(np.flatnonzero(nan[k])[0])
    if missing == "error":
        raise InputError(f"{where(k)}, column {names[j]!r} is missing; pass --missing drop "
                         "(missing='drop' in Python) to leave incomplete rows out (they are counted and reported)")
    keep = ~bad
    first = (where(k), names[j]) if name_first else None
    return CleanBlock(values[keep], None if weights is None else weights[keep], keep, first, per_col)


def dropped_rows_warning(n_dropped: int, n_read: int, first: tuple[str, str]) -> None:
    """The one warning for incomplete reference rows left out (both engines)."""
    w, c = first
    warn(UserWarning,
         f"left out {n_dropped} incomplete row(s) of {n_read} (first: {w.removeprefix('data: ')}, column {c!r} "
         f"missing); the baseline "
         f"uses the other {n_read - n_dropped} row(s). Pass --missing error (missing='error' in Python) "
         "to stop at the first one instead")


class Cleaner:
    """Runs :func:`clean_block` over a :class:`Source`; counts what it reads and drops.

    Calling it yields :class:`whiten.estimate.streaming.Block` objects (clean
    rows, weights, 0-based positions, labels); it can be called again when the
    source can be read again.
    """

    def __init__(self, source: Source, missing: str, weights: np.ndarray | None):
        self.source = source
        self.missing = missing
        self.weights = weights
        self.n_read = 0
        self.n_dropped = 0
        self.first_dropped: tuple[str, str] | None = None
        self.n_blocks = 0

    def __call__(self) -> Iterator[Block]:
        self.n_read = 0
        self.n_dropped = 0
        self.first_dropped = None
        self.n_blocks = 0
        names = self.source.names
        col_missing = np.zeros(len(names), dtype=np.int64)
        positive, weighted = 0, False  # complete rows with a positive weight, when there are weights
        for vals, wcol, pos, lab in self.source.raw_blocks():
            self.n_blocks += 1
            self.n_read += vals.shape[0]
            w = wcol
            if self.weights is not None:
                if pos.size and pos[-1] >= self.weights.shape[0]:
                    raise InputError(f"weights: {self.weights.shape[0]} entries, but the data has more rows")
                w = self.weights[pos]

            def where(r: int, pos=pos, lab=lab) -> str:
                return self.source.row_place(int(pos[r]), None if lab is None else lab[r])

            out = clean_block(vals, w, names, self.missing, where, self.source.weights_name,
                              name_first=self.first_dropped is None)
            if out.nan_per_column is not None:
                col_missing += out.nan_per_column
            if out.keep is not None:
                self.n_dropped += int((~out.keep).sum())
                if self.first_dropped is None:
                    self.first_dropped = out.first_dropped
                pos = pos[out.keep]
                lab = None if lab is None else lab[out.keep]
            if out.weights is not None:
                weighted = True
                positive += int(np.count_nonzero(out.weights))
            yield Block(out.values, out.weights, pos, lab)
        if self.weights is not None and self.n_read != self.weights.shape[0]:
            raise InputError(f"weights: {self.weights.shape[0]} entries for {self.n_read} rows of data")
        kept = self.n_read - self.n_dropped
        if kept and weighted and positive == 0:
            place = self.source.label if self.source.weight_column else "data"
            raise InputError(f"{place}: {self.source.weights_name} is 0 in every one of the {kept} "
                             "complete row(s), so no row counts in the fit; give at least two rows a positive weight")
        if self.n_read and self.n_dropped == self.n_read:
            empty = [names[j] for j in range(len(names)) if col_missing[j] == self.n_read]
            worst = ", ".join(f"{names[j]!r} ({int(col_missing[j])})"
                              for j in np.argsort(-col_missing)[:3] if col_missing[j])
            raise InputError(
                f"every one of the {self.n_read} rows has a missing value, so no complete row is left"
                + (f"; column(s) {empty} are missing in every row" if empty else f"; most missing: {worst}")
                + ". Leave such columns out with --columns (columns=[...] in Python)")

    def report(self) -> None:
        """Warn once if incomplete rows were left out."""
        if self.n_dropped and self.first_dropped is not None:
            dropped_rows_warning(self.n_dropped, self.n_read, self.first_dropped)


class Equilibrated:
    """The clean blocks with every column at an extreme scale multiplied by a power of two (exact).

    The powers ``scale`` are read from the first block that has rows (each
    column's largest magnitude, :func:`whiten._numerics.pow2_level_scale`) and
    then kept for every block and every pass, so the estimators see columns of
    order one: a column of 1e-160s or 1e+160s is fitted like a column of ones,
    and :meth:`mean_back` / :meth:`factor_back` map the results back without
    rounding. Columns within ``2**+-EXTREME_EXPONENT`` keep the factor 1, and when
    every column does, the blocks pass through untouched.
    """

    def __init__(self, clean: Callable[[], Iterator[Block]]):
        self._clean = clean
        self.scale: np.ndarray | None = None

    @property
    def active(self) -> bool:
        return self.scale is not None and bool(np.any(self.scale != 1.0))

    def __call__(self) -> Iterator[Block]:
        from .._numerics import pow2_level_scale

        for blk in self._clean():
            if self.scale is None:
                if blk.values.shape[0] == 0:
                    yield blk
                    continue
                self.scale = pow2_level_scale(np.max(np.abs(blk.values), axis=0))
            if not self.active:
                yield blk
                continue
            yield Block(blk.values * self.scale[None, :], blk.weights, blk.positions, blk.labels)

    def mean_back(self, mean: np.ndarray) -> np.ndarray:
        return mean if self.scale is None or not self.active else mean / self.scale

    def factor_back(self, factor):
        return factor if self.scale is None or not self.active else factor.rescaled(1.0 / self.scale)
