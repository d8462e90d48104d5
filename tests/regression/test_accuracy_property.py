"""Property: the reported error bound is honest on designs of prescribed condition number.

Designs are built as U diag(s) V^T (random orthogonal U, V from tests/helpers) with a chosen
condition number, then given badly scaled columns (units from 1e-6 to 1e6). The reference solution
is exact least squares in 50-digit mpmath arithmetic. Claim checked: the relative error of the
coefficients is below the first-order bound eps * (k + k^2 tan(theta)) that fit.health reports
(Wedin, 1973; Higham, 2002, §20.1 for the bound), for k the scaled condition number.
"""

import numpy as np
import pytest

hyp = pytest.importorskip("hypothesis")
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

import whiten  # noqa: E402
from tests.helpers.matrices import random_orthogonal  # noqa: E402

mpmath = pytest.importorskip("mpmath")


def exact_lstsq(a, y):
    with mpmath.workdps(50):
        m = mpmath.matrix(a.tolist())
        b = mpmath.matrix(y.tolist())
        sol = mpmath.lu_solve(m.T * m, m.T * b)   # fine at 50 digits
        return np.array([float(v) for v in sol])


@settings(max_examples=15, deadline=None, derandomize=True)
@given(log_cond=st.floats(1.0, 9.0), seed=st.integers(0, 2 ** 16), noise=st.sampled_from([0.0, 1e-6, 1e-2]))
def test_error_within_reported_bound(log_cond, seed, noise):
    rng = np.random.default_rng(seed)
    n, p = 40, 6
    u = random_orthogonal(n, rng)[:, :p]
    v = random_orthogonal(p, rng)
    s = np.logspace(0, -log_cond, p)
    units = 10.0 ** rng.uniform(-6, 6, p)
    a = (u * s) @ v.T * units
    beta = rng.standard_normal(p) / units
    y = a @ beta + noise * rng.standard_normal(n)
    exact = exact_lstsq(a, y)
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", whiten.ConditioningWarning)
        fit = whiten.fit_linear(a, y, intercept=False)
    err = np.linalg.norm((fit.coef - exact) * units) / np.linalg.norm(exact * units)
    assert err <= 10 * p * fit.health.error_bound + 1e-15
    assert fit.health.digits_trusted <= 15.9
