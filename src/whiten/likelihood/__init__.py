"""Gaussian likelihoods for calibration pipelines: log-likelihood, gradients, calibrate()."""

from .accuracy import LikelihoodDigits
from .calibrate import calibrate
from .gradients import loglik_grad_cov, loglik_grad_mean
from .loglik import LikelihoodSummary, gaussian_loglik
from .profile import profile_interval
from .results import CalibrationFit, JacobianHealth, ProfileInterval

__all__ = ["gaussian_loglik", "LikelihoodSummary", "LikelihoodDigits", "loglik_grad_mean", "loglik_grad_cov",
           "calibrate", "CalibrationFit", "JacobianHealth", "profile_interval", "ProfileInterval"]
