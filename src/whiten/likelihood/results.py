"""Results of the likelihood tools: :class:`CalibrationFit`, :class:`JacobianHealth`, :class:`ProfileInterval`."""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np

from .._numerics import json_ready
from .._records import fields_to_dict
from ..linalg.factor import FactorHealth

__all__ = ["CalibrationFit", "JacobianHealth", "ProfileInterval"]


@dataclasses.dataclass(frozen=True)
class JacobianHealth:
    """Numerical health of a calibration.

    Attributes
    ----------
    cond : float
        2-norm condition number of the whitened Jacobian at the solution
        (ratio of the extreme singular values of its R factor).
    digits_lost_2norm : float
        ``log10(cond)`` of the 2-norm condition number above: decimal digits the
        parameter covariance may lose. (Named apart from ``digits_lost``, which in
        whiten always comes from a LAPACK 1-norm estimate ``rcond``.)
    rank : int
        Numerical rank of the whitened Jacobian (pivoted QR, tolerance
        ``max(n, K) * eps * |R_00|``).
    unidentified : tuple of str
        Parameters the pivoted QR put beyond the rank (not determined by the data).
    covariance : FactorHealth
        Health of the error covariance factor.
    jacobian : str
        ``"analytic"`` or ``"finite-difference"`` (central differences at the
        solution for ``theta_cov``).
    digits_std_error : float
        Estimated correct significant digits of ``std_error`` (the smallest over
        parameters) for the Jacobian as evaluated at ``theta`` and the covariance as
        given: the accuracy of the computation, checked against mpmath in
        ``tests/accuracy/test_calibrate_digits.py``. The diagonal of ``theta_cov``
        keeps about ``log10(2)`` = 0.3 digits fewer. It does not include the error
        of the Jacobian itself (a user's ``jac``, or the truncation of finite
        differences). NaN when rank deficient or ``rescaled``.
    """

    cond: float
    digits_lost_2norm: float
    rank: int
    unidentified: tuple
    covariance: FactorHealth
    jacobian: str
    digits_std_error: float = float("nan")

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["covariance"] = self.covariance.to_dict()
        d["unidentified"] = list(self.unidentified)
        return json_ready(d)


@dataclasses.dataclass(frozen=True)
class CalibrationFit:
    """Result of :func:`calibrate`.

    Attributes
    ----------
    theta : ndarray, shape (K,)
    theta_cov : ndarray, shape (K, K)
        ``(J_w^T J_w)^{-1}`` for the stated error covariance (times
        ``reduced_chi2`` when ``rescaled``), built as ``R^{-1} R^{-T}`` from the
        QR of the whitened Jacobian ``J_w``. A reported quantity.
    std_error : ndarray, shape (K,)
        Square roots of the diagonal of ``theta_cov``.
    chi2 : float
        Whitened sum of squares ``||W (y - model(theta))||^2`` at the solution.
    dof : int
        n - K.
    p_value : float
        ``P(X >= chi2)``, X chi-square with ``dof`` degrees of freedom.
    reduced_chi2 : float
        chi2 / dof (NaN when dof = 0). Near 1 when the stated covariance fits.
    loglik : float
        Gaussian log-likelihood at the solution.
    rescaled : bool
        Whether ``theta_cov`` was multiplied by ``reduced_chi2``.
    names : list of str
    residuals : ndarray, shape (n,)
        ``y - model(theta)`` (not whitened).
    converged : bool
    message : str
    n_evals : int
        Model evaluations by the optimizer.
    health : JacobianHealth
    """

    theta: np.ndarray
    theta_cov: np.ndarray
    std_error: np.ndarray
    chi2: float
    dof: int
    p_value: float
    reduced_chi2: float
    loglik: float
    rescaled: bool
    names: list
    residuals: np.ndarray
    converged: bool
    message: str
    n_evals: int
    health: JacobianHealth
    _problem: Any = dataclasses.field(default=None, repr=False, compare=False)

    def to_dict(self) -> dict:
        return fields_to_dict(self)

    def to_frame(self):
        """One row per parameter: estimate, std_error, rel_std_error."""
        import pandas as pd

        with np.errstate(divide="ignore", invalid="ignore"):
            rel = self.std_error / np.abs(self.theta)
        return pd.DataFrame({"estimate": self.theta, "std_error": self.std_error, "rel_std_error": rel},
                            index=pd.Index(self.names, name="parameter"))


@dataclasses.dataclass(frozen=True)
class ProfileInterval:
    """Profile-likelihood interval for one parameter (see :func:`profile_interval`).

    Attributes
    ----------
    name : str
    estimate : float
    lower, upper : float
        Ends of the interval; ``-inf``/``inf`` when the profile did not rise
        above the threshold within the search (or a bound was reached first).
    coverage : float
    threshold : float
        Rise of the profile chi-square that defines the interval.
    n_fits : int
        Constrained fits run.
    """

    name: str
    estimate: float
    lower: float
    upper: float
    coverage: float
    threshold: float
    n_fits: int

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)
