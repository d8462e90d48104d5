"""whiten: Gaussian-model statistics through factorizations, never a matrix inverse.

The public API is what this module re-exports; everything in underscored
modules is private.
"""

from . import _engines, monitor, report
from ._settings import Settings, change_settings, current_settings, settings
from ._version import __version__
from .baseline import Baseline, BaselineHealth, fit_baseline, load_baseline
from .errors import (
    ConditioningWarning,
    InputError,
    JitterWarning,
    ModelFileError,
    NotPositiveDefiniteError,
    NumericalWarning,
    RankDeficiencyWarning,
    WeakScreenWarning,
    WhitenError,
)
from .gaussian import Gaussian, RowEvaluation
from .likelihood import (
    CalibrationFit,
    JacobianHealth,
    LikelihoodSummary,
    ProfileInterval,
    calibrate,
    gaussian_loglik,
    loglik_grad_cov,
    loglik_grad_mean,
    profile_interval,
)
from .linalg import Factor, FactorHealth, RankReport, cholesky, pivoted_cholesky
from .linalg.structured import (
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
from .parallel.dask.common import is_dask_collection as _is_dask_collection
from .regression import (
    CollinearityReport,
    FitHealth,
    InfluenceReport,
    LinearFit,
    RidgeInfo,
    fit_linear,
    influence,
    load_fit,
)
from .report import (
    Provenance,
    Report,
    calibration_report,
    likelihood_report,
    monitoring_report,
    regression_report,
)

# a new re-export goes into the one sorted import block above (ruff keeps it ordered; statements between
# imports would break that) and its names into its area's group here
__all__ = [
    "__version__",
    "Settings", "settings", "change_settings", "current_settings",
    "WhitenError", "InputError", "NotPositiveDefiniteError", "ModelFileError",
    "NumericalWarning", "JitterWarning", "ConditioningWarning", "RankDeficiencyWarning", "WeakScreenWarning",
    "Factor", "FactorHealth", "cholesky", "RankReport", "pivoted_cholesky",
    "Gaussian", "RowEvaluation",
    # regression
    "fit_linear", "LinearFit", "FitHealth", "RidgeInfo", "CollinearityReport", "influence", "InfluenceReport",
    "load_fit",
    # likelihood and structured covariances
    "gaussian_loglik", "LikelihoodSummary", "loglik_grad_mean", "loglik_grad_cov", "calibrate",
    "CalibrationFit", "JacobianHealth", "profile_interval", "ProfileInterval",
    "StructuredCovariance", "DiagonalCovariance", "LowRankPlusDiagonal", "BlockDiagonalCovariance",
    "KroneckerCovariance", "diagonal", "low_rank_plus_diagonal", "block_diagonal", "kronecker",
    # baseline / monitoring
    "Baseline", "BaselineHealth", "fit_baseline", "load_baseline",
    "monitor",
    # report
    "report", "Report", "Provenance", "monitoring_report", "regression_report", "likelihood_report",
    "calibration_report",
]


# --- engines: the dask engine claims dask collections; dask itself is imported only when first needed ---
def _load_dask():
    from .parallel.dask.common import require_dask

    require_dask()
    from .parallel import dask

    return dask


_engines.register("dask", claims=_is_dask_collection, load=_load_dask)
