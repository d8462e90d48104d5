"""Factorizations and solves. Imports only ``errors``, ``_validate`` and ``_settings``."""

from .cholesky import cholesky
from .factor import Factor, FactorHealth
from .pivoted import RankReport, pivoted_cholesky
from .structured import (
                         BlockDiagonalCovariance,
                         DiagonalCovariance,
                         KroneckerCovariance,
                         LowRankPlusDiagonal,
                         StructuredCovariance,
                         block_diagonal,
                         diagonal,
                         kronecker,
                         low_rank_plus_diagonal,
)

__all__ = ["Factor", "FactorHealth", "cholesky", "RankReport", "pivoted_cholesky",
           "StructuredCovariance", "DiagonalCovariance", "LowRankPlusDiagonal", "BlockDiagonalCovariance",
           "KroneckerCovariance", "diagonal", "low_rank_plus_diagonal", "block_diagonal", "kronecker"]
