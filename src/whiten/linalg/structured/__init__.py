"""Covariances with structure, answering the same questions as a :class:`Factor`.

Calibration loops often know the shape of their error covariance: independent
noise (:func:`diagonal`), independent noise plus a few shared error sources
(:func:`low_rank_plus_diagonal`), groups of instruments that do not talk to
each other (:func:`block_diagonal`), or a sensor grid times a time axis
(:func:`kronecker`). Each constructor factors only the small pieces and
returns an object with the operations of a :class:`~whiten.Factor` under the
same names and keywords: ``dim``, ``logdet()``, ``solve(b)``,
``whiten(x, shift=...)``, ``quad(x, shift=...)`` and ``health``, plus
``dense()`` (and its alias ``matrix()``) for small cases.

None of them ever forms an n x n matrix unless ``dense()`` is asked for, and
none forms an inverse: every ``S^{-1} b`` is a solve with factors of the pieces.
"""

from __future__ import annotations

from .base import StructuredCovariance
from .blockdiag import BlockDiagonalCovariance, block_diagonal
from .diagonal import DiagonalCovariance, diagonal
from .kronecker import KroneckerCovariance, kronecker
from .lowrank import LowRankPlusDiagonal, low_rank_plus_diagonal

__all__ = [
    "StructuredCovariance",
    "DiagonalCovariance",
    "LowRankPlusDiagonal",
    "BlockDiagonalCovariance",
    "KroneckerCovariance",
    "diagonal",
    "low_rank_plus_diagonal",
    "block_diagonal",
    "kronecker",
]
