"""Monitoring: score sensor rows against a baseline, explain alarms, chart them.

:func:`score` is the entry point and :func:`score_file` its streaming twin
for files; :mod:`~whiten.monitor.limits` holds the exact laws of the squared distance,
:mod:`~whiten.monitor.fdr` batch control, :mod:`~whiten.monitor.episodes` runs of alarms,
:mod:`~whiten.monitor.ewma` and :mod:`~whiten.monitor.persistence` drift rules,
:mod:`~whiten.monitor.charts` the pictures (matplotlib, imported lazily).
"""

from .contributions import chain_terms, drop_terms
from .digest import ScoreDigest
from .episodes import EPISODE_COLUMNS, episodes
from .ewma import EwmaLimit, mewma_arl, mewma_limit
from .fdr import bh_adjust, bh_threshold
from .limits import PHASES, t2_law, t2_limit, t2_pvalue
from .persistence import persist_rate, persist_row_level
from .score import KINDS, Scorer, column_name, score
from .stream import score_file

__all__ = [
    "score", "score_file", "Scorer", "ScoreDigest", "KINDS", "column_name", "episodes", "EPISODE_COLUMNS",
    "PHASES", "t2_law", "t2_limit", "t2_pvalue",
    "bh_adjust", "bh_threshold",
    "chain_terms", "drop_terms",
    "mewma_arl", "mewma_limit", "EwmaLimit", "persist_rate", "persist_row_level",
]
