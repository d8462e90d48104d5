"""Fixtures for the monitoring tests.

``fit_reference`` builds a baseline from data. While whiten.fit_baseline is
being written it falls back to a small stand-in holding the same fields
(mean, factor, n, columns, gaussian, estimator) built from numpy's sample
mean and numpy.cov (the reference estimate the issue names).
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pytest

import whiten


@dataclasses.dataclass
class StandInBaseline:
    mean: np.ndarray
    factor: Any
    n: int
    columns: list
    gaussian: Any
    estimator: str = "sample"


def standin(x: np.ndarray, columns) -> StandInBaseline:
    mean = x.mean(axis=0)
    cov = np.cov(x, rowvar=False)  # numpy: unbiased sample covariance
    f = whiten.cholesky(cov, columns=list(columns))
    return StandInBaseline(mean, f, x.shape[0], list(columns), whiten.Gaussian(mean, f))


def fit(x: np.ndarray, columns):
    fb = getattr(whiten, "fit_baseline", None)
    if fb is None:
        return standin(x, columns)
    import pandas as pd

    return fb(pd.DataFrame(x, columns=list(columns)))


@pytest.fixture
def fit_reference():
    return fit


def correlated_cov(p: int, rng: np.random.Generator) -> np.ndarray:
    """An invented covariance with strong correlations and mixed scales."""
    a = rng.standard_normal((p, p)) + 2.0 * np.ones((p, p)) / np.sqrt(p)
    c = a @ a.T / p + 0.1 * np.eye(p)
    s = np.logspace(-1, 2, p)
    return c * np.outer(s, s)


@pytest.fixture
def make_cov():
    return correlated_cov
