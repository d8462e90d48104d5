"""Linear regression on nearly collinear features: QR least squares, ridge, diagnostics.

Public entry points: :func:`fit_linear` -> :class:`LinearFit`, :func:`influence`
-> :class:`InfluenceReport`. See :mod:`whiten.regression.linear` for the numerics.
"""

from .diagnostics import CollinearityReport
from .influence import InfluenceReport, influence
from .linear import FitHealth, LinearFit, RidgeInfo, fit_linear

__all__ = ["fit_linear", "LinearFit", "FitHealth", "RidgeInfo", "CollinearityReport", "influence", "InfluenceReport"]
