"""Shared fixtures: a small invented monitoring run (a bottling line's filler station)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
import whiten.monitor

SENSORS = ["fill_pressure", "product_temp", "capper_torque", "conveyor_speed"]


def filler_covariance() -> np.ndarray:
    sd = np.array([0.8, 0.3, 1.5, 0.05])
    corr = np.array([[1.0, 0.55, 0.2, 0.0],
                     [0.55, 1.0, 0.1, 0.0],
                     [0.2, 0.1, 1.0, 0.35],
                     [0.0, 0.0, 0.35, 1.0]])
    return corr * np.outer(sd, sd)


@pytest.fixture(scope="session")
def filler_model() -> whiten.Gaussian:
    mean = np.array([4.2, 6.5, 12.0, 1.1])
    return whiten.Gaussian(mean, filler_covariance(), columns=SENSORS)


@pytest.fixture(scope="session")
def filler_batch(filler_model) -> pd.DataFrame:
    rng = np.random.default_rng(20261201)
    x = rng.multivariate_normal(filler_model.mean, filler_model.cov, size=240)
    x[37] += np.array([2.4, -0.9, 0.0, 0.0])        # pressure up while temperature drops: a broken relation
    x[150, 2] += 9.0                                 # a torque spike
    x[90, 1] = np.nan                                # a missing reading
    x[200, :] = np.nan                               # a row with nothing
    idx = pd.Index([f"t{k:04d}" for k in range(x.shape[0])], name="stamp")
    return pd.DataFrame(x, columns=SENSORS, index=idx)


@pytest.fixture(scope="session")
def filler_scores(filler_model, filler_batch) -> pd.DataFrame:
    return whiten.monitor.score(filler_model, filler_batch, phase="known", alpha=0.001, fdr=0.05)


#: every kind of report the browser tests open
REPORT_KINDS = ["monitoring", "regression", "likelihood", "calibration"]


def build_reports(scores, model) -> dict:
    """HTML text of one report of each kind in :data:`REPORT_KINDS`."""
    from whiten.report import monitoring_report

    from .test_report_jobs import job_reports

    return {"monitoring": monitoring_report(scores, model).to_html(), **job_reports()}
