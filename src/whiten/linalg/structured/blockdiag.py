"""Independent groups of measurements: a block-diagonal covariance."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from ...errors import InputError, NotPositiveDefiniteError
from ..cholesky import cholesky
from ..factor import Factor, FactorHealth
from .base import StructuredCovariance

__all__ = ['BlockDiagonalCovariance', 'block_diagonal']


class BlockDiagonalCovariance(StructuredCovariance):
    """Independent blocks, each a Factor or a structured covariance. Build with :func:`block_diagonal`."""

    def __init__(self, blocks: Sequence[Any]):
        if isinstance(blocks, np.ndarray) or not isinstance(blocks, (list, tuple)) or len(blocks) == 0:
            raise InputError("blocks: expected a non-empty list of matrices, Factors or structured covariances")
        parts = []
        for i, blk in enumerate(blocks):
            if isinstance(blk, (Factor, StructuredCovariance)):
                parts.append(blk)
            else:
                arr = np.asarray(blk, dtype=np.float64) if not hasattr(blk, "columns") else blk
                if np.ndim(arr) == 0:
                    raise InputError(f"blocks[{i}]: a scalar; pass [[v]] for a 1 x 1 block")
                try:
                    parts.append(cholesky(arr))
                except (InputError, NotPositiveDefiniteError) as exc:
                    raise type(exc)(f"blocks[{i}]: {exc}") from None
        self._parts = parts
        sizes = [p.dim for p in parts]
        self._offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
        names = [p.columns for p in parts]
        labelled = [n for n in names if n is not None]
        self._names = [c for n in labelled for c in n] if len(labelled) == len(names) else None
        hs = [p.health for p in parts]
        self._health = FactorHealth(
            min(h.rcond for h in hs), min(h.rcond_scaled for h in hs), max(h.digits_lost for h in hs),
            max(h.jitter for h in hs), max(h.jitter_relative for h in hs),
            f"block-diagonal({len(parts)} blocks)")

    @property
    def dim(self) -> int:
        return int(self._offsets[-1])

    @property
    def blocks(self) -> list:
        return list(self._parts)

    @property
    def health(self) -> FactorHealth:
        """Worst of the blocks' health (smallest rcond, most digits lost, largest jitter)."""
        return self._health

    def _slices(self):
        for p, a, b in zip(self._parts, self._offsets[:-1], self._offsets[1:]):
            yield p, int(a), int(b)

    def logdet(self) -> float:
        return float(sum(p.logdet() for p in self._parts))

    def _solve_cols(self, b: np.ndarray) -> np.ndarray:
        out = np.empty_like(b)
        for p, a, e in self._slices():
            out[a:e] = p.solve(b[a:e])
        return out

    def _whiten_rows(self, rows: np.ndarray) -> np.ndarray:
        out = np.empty_like(rows)
        for p, a, e in self._slices():
            out[:, a:e] = p.whiten(rows[:, a:e])
        return out

    def _quad_rows(self, rows: np.ndarray) -> np.ndarray:
        out = np.zeros(rows.shape[0])
        for p, a, e in self._slices():
            out += p.quad(rows[:, a:e])
        return out

    def _dense(self) -> np.ndarray:
        m = np.zeros((self.dim, self.dim))
        for p, a, e in self._slices():
            m[a:e, a:e] = p.matrix()
        return m


def block_diagonal(blocks: Sequence[Any]) -> BlockDiagonalCovariance:
    """Covariance of independent groups of measurements (one block per group).

    Parameters
    ----------
    blocks : list of array_like, Factor or structured covariance
        Matrices are factored with :func:`whiten.cholesky` (jitter disclosed as
        usual); Factors and structured covariances are used as they are.

    Returns
    -------
    BlockDiagonalCovariance

    Raises
    ------
    InputError, NotPositiveDefiniteError
        From the block that fails, named by its position.

    Notes
    -----
    Each operation runs block by block: cost is the sum of the blocks' costs.
    ``health`` reports the worst block; the condition of the whole can be worse
    than the worst block when the blocks' scales differ (it is at least as
    large as each block's).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> s = whiten.block_diagonal([np.eye(2) * 4.0, [[1.0]]])
    >>> bool(np.isclose(s.quad([2.0, 2.0, 1.0]), 3.0))
    True
    """
    return BlockDiagonalCovariance(blocks)
