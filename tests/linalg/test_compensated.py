"""Residuals and gradients in more than double precision (whiten.linalg.compensated).

Reference: exact rational arithmetic with Python's ``fractions`` (standard library),
rounded once to double at the end.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

from whiten.linalg import compensated


def _cancelling_problem(seed: int = 0, n: int = 7, p: int = 4):
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((n, p)) * 1e3
    x = rng.standard_normal(p)
    b = a @ x  # nearly cancelling residual: hard for plain double
    return a, x, b


def _exact_residual(a, x, b, r=None):
    n, p = a.shape
    return [float(Fraction(b[i]) - (Fraction(r[i]) if r is not None else 0)
                  - sum(Fraction(a[i, j]) * Fraction(x[j]) for j in range(p))) for i in range(n)]


def _exact_gradient(a, r):
    n, p = a.shape
    return [float(sum(Fraction(a[i, j]) * Fraction(r[i]) for i in range(n))) for j in range(p)]


def test_compensated_and_longdouble_residuals_agree_with_exact_arithmetic():
    a, x, b = _cancelling_problem()
    exact = _exact_residual(a, x, b)  # reference: fractions.Fraction
    comp = compensated.residual(a, x, b, None, "compensated")
    np.testing.assert_allclose(comp, exact, rtol=1e-12, atol=0)
    ld = compensated.residual(a, x, b, None, "longdouble")
    tol = float(np.finfo(np.longdouble).eps) * 4 * np.abs(a).max() * np.abs(x).max() * 4
    np.testing.assert_allclose(ld, exact, rtol=0, atol=tol)
    g = compensated.gradient(a, comp, "compensated")
    np.testing.assert_allclose(g, _exact_gradient(a, comp), rtol=1e-12)  # reference: fractions.Fraction


def test_extended_products_equal_the_one_shot_kernels():
    # the cached splitting of A must not change a single bit of the result
    a, x, b = _cancelling_problem(seed=1, n=9, p=3)
    r0 = 1e-3 * np.arange(9.0)
    for kind in ("compensated", "longdouble"):
        ops = compensated.ExtendedProducts(a, kind)
        np.testing.assert_array_equal(ops.residual(x, b, r0), compensated.residual(a, x, b, r0, kind))
        np.testing.assert_array_equal(ops.gradient(r0), compensated.gradient(a, r0, kind))
    ops = compensated.ExtendedProducts(a, "compensated")
    exact = _exact_residual(a, x, b, r0)  # reference: fractions.Fraction
    np.testing.assert_allclose(ops.residual(x, b, r0), exact, rtol=1e-12, atol=0)


def test_longdouble_falls_back_to_compensated_where_it_is_plain_double(monkeypatch):
    monkeypatch.setattr(compensated, "LONGDOUBLE_IS_WIDER", False)
    assert compensated.extended_kind("longdouble") == "compensated"
    assert compensated.extended_kind("compensated") == "compensated"
    a, x, b = _cancelling_problem(seed=2)
    np.testing.assert_array_equal(compensated.residual(a, x, b, None, "longdouble"),
                                  compensated.residual(a, x, b, None, "compensated"))


@pytest.mark.parametrize("m", [1, 2, 3, 8, 33])
def test_pairwise_sum_handles_every_width(m):
    # odd and even widths of the pairwise TwoSum tree; reference: fractions.Fraction
    rng = np.random.default_rng(m)
    terms = rng.standard_normal((4, m)) * np.logspace(0, 12, m)
    terms[:, -1] = -terms[:, :-1].sum(axis=1) if m > 1 else terms[:, -1]
    got = compensated._sum2_columns(terms, np.zeros_like(terms))
    exact = np.array([float(sum(Fraction(v) for v in row)) for row in terms])
    # Sum2 bound (Ogita, Rump & Oishi, 2005): eps |s| + gamma_{m-1}^2 sum |t_i|, gamma_k ~ k eps
    eps = np.finfo(float).eps
    bound = eps * np.abs(exact) + 4 * (m * eps) ** 2 * np.abs(terms).sum(axis=1)
    assert np.all(np.abs(got - exact) <= bound)
