"""Linear regression on nearly collinear features: QR least squares, ridge, diagnostics.

Public entry points: :func:`fit_linear` -> :class:`LinearFit`, :func:`influence`
-> :class:`InfluenceReport`. The rooms: :mod:`~whiten.regression.design` (inputs), :mod:`~whiten.regression.solve`
(solvers), :mod:`~whiten.regression.inference` and :mod:`~whiten.regression.diagnostics`,
:mod:`~whiten.regression.results`, :mod:`~whiten.regression.fit` (the entry point) and
:mod:`~whiten.regression.fitfile` (reading back ``whiten regress``'s FIT.json: :func:`load_fit`).
"""

from .diagnostics import CollinearityReport
from .fit import fit_linear
from .fitfile import load_fit
from .influence import InfluenceReport, influence
from .results import FitHealth, LinearFit, RidgeInfo

__all__ = ["fit_linear", "LinearFit", "FitHealth", "RidgeInfo", "CollinearityReport", "influence", "InfluenceReport",
           "load_fit"]
