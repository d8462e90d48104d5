"""Contributions on random covariances with a prescribed condition number (hypothesis)."""

from __future__ import annotations

import numpy as np
from hypothesis import given, strategies as st

import whiten
from whiten.monitor import score

from ..helpers.matrices import EPS, covariance_with_scales


@given(p=st.integers(2, 7), log_kappa=st.floats(0.0, 8.0), seed=st.integers(0, 2**31 - 1))
def test_drop_and_chain_against_numpy_solve(p, log_kappa, seed):
    rng = np.random.default_rng(seed)
    cov = covariance_with_scales(p, 10.0 ** log_kappa, rng, decades=3.0)
    names = [f"v{j}" for j in range(p)]
    g = whiten.Gaussian(np.zeros(p), cov, columns=names)
    x = rng.multivariate_normal(np.zeros(p), cov, size=4)
    s = score(g, x, phase="known")
    # tolerance c * kappa * eps with kappa of the unit-diagonal matrix (what the solves depend on)
    sd = np.sqrt(np.diag(cov))
    kappa = np.linalg.cond(cov / np.outer(sd, sd))
    tol = 100 * p * kappa * EPS
    for i in range(x.shape[0]):
        d = x[i]
        full = d @ np.linalg.solve(cov, d)  # numpy.linalg.solve: independent reference
        assert np.isclose(s["d2"].iloc[i], full, rtol=tol, atol=tol)
        chain = s[[f"chain:{c}" for c in names]].iloc[i].to_numpy(dtype=float)
        assert np.isclose(chain.sum(), full, rtol=tol, atol=tol)
        for j in range(p):
            keep = [k for k in range(p) if k != j]
            sub = cov[np.ix_(keep, keep)]
            without = d[keep] @ np.linalg.solve(sub, d[keep])
            # the difference of two O(full) numbers: absolute error ~ tol * full
            assert abs(s[f"drop:{names[j]}"].iloc[i] - (full - without)) <= tol * max(full, 1.0)
