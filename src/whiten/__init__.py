"""whiten: Gaussian-model statistics through factorizations, never a matrix inverse.

The public API is what this module re-exports; everything in underscored
modules is private.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from . import _engines
from ._settings import Settings, change_settings, current_settings, settings
from ._version import __version__
from .errors import (
    ConditioningWarning,
    InputError,
    IntegerPrecisionWarning,
    JitterWarning,
    LimitAccuracyWarning,
    ModelFileError,
    NotPositiveDefiniteError,
    NumericalWarning,
    RankDeficiencyWarning,
    WeakScreenWarning,
    WhitenError,
)

if TYPE_CHECKING:  # type checkers and readers see every re-export; at run time each loads on first use
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
    from .regression import (  # type: ignore[no-redef]  # "influence" is also a submodule of regression
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

# Names load lazily (PEP 562): `import whiten` and `whiten --help` stay light (no scipy, pandas or
# matplotlib); an area is imported the first time one of its names is used. A new re-export goes into
# the TYPE_CHECKING block above, into _LAZY (module, name; None for a subpackage) and into __all__;
# tests/test_lazy_imports.py checks that they agree.
_LAZY: dict[str, tuple[str, str | None]] = {
    'Baseline': ('.baseline', 'Baseline'),
    'BaselineHealth': ('.baseline', 'BaselineHealth'),
    'BlockDiagonalCovariance': ('.linalg.structured', 'BlockDiagonalCovariance'),
    'CalibrationFit': ('.likelihood', 'CalibrationFit'),
    'CollinearityReport': ('.regression', 'CollinearityReport'),
    'DiagonalCovariance': ('.linalg.structured', 'DiagonalCovariance'),
    'Factor': ('.linalg', 'Factor'),
    'FactorHealth': ('.linalg', 'FactorHealth'),
    'FitHealth': ('.regression', 'FitHealth'),
    'Gaussian': ('.gaussian', 'Gaussian'),
    'InfluenceReport': ('.regression', 'InfluenceReport'),
    'JacobianHealth': ('.likelihood', 'JacobianHealth'),
    'KroneckerCovariance': ('.linalg.structured', 'KroneckerCovariance'),
    'LikelihoodSummary': ('.likelihood', 'LikelihoodSummary'),
    'LinearFit': ('.regression', 'LinearFit'),
    'LowRankPlusDiagonal': ('.linalg.structured', 'LowRankPlusDiagonal'),
    'ProfileInterval': ('.likelihood', 'ProfileInterval'),
    'Provenance': ('.report', 'Provenance'),
    'RankReport': ('.linalg', 'RankReport'),
    'Report': ('.report', 'Report'),
    'RidgeInfo': ('.regression', 'RidgeInfo'),
    'RowEvaluation': ('.gaussian', 'RowEvaluation'),
    'StructuredCovariance': ('.linalg.structured', 'StructuredCovariance'),
    'block_diagonal': ('.linalg.structured', 'block_diagonal'),
    'calibrate': ('.likelihood', 'calibrate'),
    'calibration_report': ('.report', 'calibration_report'),
    'cholesky': ('.linalg', 'cholesky'),
    'diagonal': ('.linalg.structured', 'diagonal'),
    'fit_baseline': ('.baseline', 'fit_baseline'),
    'fit_linear': ('.regression', 'fit_linear'),
    'gaussian_loglik': ('.likelihood', 'gaussian_loglik'),
    'influence': ('.regression', 'influence'),
    'kronecker': ('.linalg.structured', 'kronecker'),
    'likelihood_report': ('.report', 'likelihood_report'),
    'load_baseline': ('.baseline', 'load_baseline'),
    'load_fit': ('.regression', 'load_fit'),
    'loglik_grad_cov': ('.likelihood', 'loglik_grad_cov'),
    'loglik_grad_mean': ('.likelihood', 'loglik_grad_mean'),
    'low_rank_plus_diagonal': ('.linalg.structured', 'low_rank_plus_diagonal'),
    'monitor': ('.monitor', None),
    'monitoring_report': ('.report', 'monitoring_report'),
    'pivoted_cholesky': ('.linalg', 'pivoted_cholesky'),
    'profile_interval': ('.likelihood', 'profile_interval'),
    'regression_report': ('.report', 'regression_report'),
    'report': ('.report', None),
}

# a new re-export goes into the one sorted import block above (ruff keeps it ordered; statements between
# imports would break that) and its names into its area's group here
__all__ = [
    "__version__",
    "Settings", "settings", "change_settings", "current_settings",
    "WhitenError", "InputError", "NotPositiveDefiniteError", "ModelFileError",
    "NumericalWarning", "JitterWarning", "ConditioningWarning", "RankDeficiencyWarning", "WeakScreenWarning",
    "IntegerPrecisionWarning", "LimitAccuracyWarning",
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


def _is_dask_collection(data: Any) -> bool:
    """The dask engine's claim test, imported on the first call (it never imports dask itself)."""
    from .parallel.dask.common import is_dask_collection

    return is_dask_collection(data)


_engines.register("dask", claims=_is_dask_collection, load=_load_dask)


def __getattr__(name: str) -> Any:
    spec = _LAZY.get(name)
    if spec is None:
        raise AttributeError(f"module 'whiten' has no attribute {name!r}")
    module, attr = spec
    mod = importlib.import_module(module, __name__)
    value = mod if attr is None else getattr(mod, attr)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
