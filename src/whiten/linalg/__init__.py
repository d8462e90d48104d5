"""Factorizations and solves. Imports only ``errors``, ``_validate`` and ``_settings``."""

from .factor import Factor, FactorHealth, cholesky
from .pivoted import RankReport, pivoted_cholesky

__all__ = ["Factor", "FactorHealth", "cholesky", "RankReport", "pivoted_cholesky"]
