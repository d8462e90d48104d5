"""Baselines: the Gaussian reference model of healthy operation, fitted from data.

:func:`fit_baseline` reads rows (an array, a DataFrame, a CSV or Parquet file
read in chunks, or an iterable of DataFrame chunks), estimates a mean and a
covariance factor with one of three estimators, and returns a
:class:`Baseline`, which carries its numerical health and saves to a checked
JSON model file (:func:`load_baseline` reads it back).

Rooms: ``inputs`` (rows from every kind of input), ``cleaning`` (weights,
infinities, the missing-value policy; shared with the dask engine), ``fit``
(the entry point and the estimators' drivers), ``model`` (the Baseline),
``window`` (rank-one updates), ``health`` (the health record), ``modelfile``
(the file format).
"""

from .cleaning import check_frequency_weights, clean_block
from .fit import fit_baseline
from .health import BaselineHealth, health_from_factor
from .inputs import array_column_names
from .model import Baseline, load_baseline
from .modelfile import MODEL_FORMAT

__all__ = ["Baseline", "BaselineHealth", "fit_baseline", "load_baseline", "MODEL_FORMAT",
           "array_column_names", "check_frequency_weights", "clean_block", "health_from_factor"]
