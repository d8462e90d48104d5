"""Estimators of a mean and covariance factor from rows: sample (automatic
Gram/TSQR path), shrinkage (Ledoit-Wolf 2004, OAS 2010), robust (FastMCD,
Rousseeuw & Van Driessen 1999), and the streaming accumulators they share."""

from .streaming import (
    Block,
    ScatterState,
    TreeReducer,
    block_state,
    merge,
    reduce_states,
)

__all__ = ["Block", "ScatterState", "TreeReducer", "block_state", "merge", "reduce_states"]
