"""QR kernels and triangular solves (whiten.linalg.qr, whiten.linalg.triangular) against numpy/scipy.

Householder QR is backward stable: ``Q R = A + E`` with ``||E|| <= c m n eps ||A||``
and Q orthonormal to ``c m n eps`` (Higham, *Accuracy and Stability of
Numerical Algorithms*, 2002, ch. 19); triangular solves have forward errors of
order ``kappa * eps``. The constants c are generous. References: numpy.linalg
(qr, cond, solve, svd) and scipy.linalg (qr with pivoting, solve_triangular),
named beside each check.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg

from whiten.linalg.qr import (CHOLQR2_MIN_RCOND, cholqr2_r, gram, greedy_rank_drop, householder_thin, pivoted_qr_r,
                              pow2_column_scale, qr_r, r_of, sequential_dependence, tsqr_r, upper_r)
from whiten.linalg.triangular import condition_2, stack_solve_lower, tri_rcond, tri_solve
from whiten.regression.inference import scaled_condition

from ..helpers.matrices import EPS, random_orthogonal


def _tall(m: int, n: int, cond: float, seed: int, *, scales: float = 0.0) -> np.ndarray:
    """m x n matrix with 2-norm condition ``cond`` (U diag V^T), columns then scaled over ``scales`` decades."""
    rng = np.random.default_rng(seed)
    u, _ = np.linalg.qr(rng.standard_normal((m, n)))
    v = random_orthogonal(n, rng)
    a = (u * np.geomspace(1.0, 1.0 / cond, n)) @ v.T
    return a * np.logspace(0, scales, n)[None, :]


def _positive_diag(r: np.ndarray) -> np.ndarray:
    """R with its rows' signs chosen so that diag(R) >= 0 (the unique R of a full-rank A)."""
    return r * np.where(np.diag(r) < 0, -1.0, 1.0)[:, None]


# ------------------------------------------------------------------ scaling
def test_pow2_column_scale_is_exact_and_equilibrates():
    norms = np.array([3e-7, 1.0, 1.4142, 5e12, 0.0, np.inf])
    s = pow2_column_scale(norms)
    assert np.all(np.log2(s) == np.round(np.log2(s)))  # powers of two
    scaled = (s * norms)[:4]
    assert np.all((scaled >= 2 ** -0.5) & (scaled <= 2 ** 0.5))
    assert s[4] == 1.0 and s[5] == 1.0  # a zero (or unusable) column is left alone
    a = np.random.default_rng(0).standard_normal((5, 6)) * norms.clip(max=1e12)[None, :]
    assert np.array_equal((a * s) / s, a)  # multiplying by a power of two loses nothing


# ------------------------------------------------------------------ Householder
@pytest.mark.parametrize("m, n, cond", [(40, 5, 1e2), (300, 12, 1e8), (7, 7, 1e3)])
def test_householder_thin_against_numpy_qr(m, n, cond):
    a = _tall(m, n, cond, seed=m, scales=3.0)
    a0 = a.copy()
    q, r = householder_thin(a)
    assert np.array_equal(a, a0)  # not modified
    assert q.shape == (m, n) and r.shape == (n, n) and np.array_equal(r, np.triu(r))
    np.testing.assert_allclose(q.T @ q, np.eye(n), rtol=0, atol=20 * m * n * EPS)
    np.testing.assert_allclose(q @ r, a, rtol=0, atol=20 * m * n * EPS * np.linalg.norm(a, 2))
    _, r_ref = np.linalg.qr(a)  # reference: numpy.linalg.qr (LAPACK dgeqrf as well)
    np.testing.assert_allclose(_positive_diag(r), _positive_diag(r_ref), rtol=0,
                               atol=20 * m * n * cond * EPS * np.abs(r_ref).max())


@pytest.mark.parametrize("kernel", ["r_of", "qr_r", "upper_r"])
def test_each_r_kernel_is_the_r_of_numpy(kernel):
    # r_of: optimal workspace, overwrites a Fortran block; qr_r: a copy; upper_r: LAPACK's default
    # workspace (the streaming states' choice, so stored states merge bit for bit)
    a = _tall(500, 150, 1e4, seed=3)  # wide enough for LAPACK's blocked code
    block = np.asfortranarray(a)
    r = {"r_of": r_of, "qr_r": qr_r, "upper_r": upper_r}[kernel](block if kernel != "qr_r" else a)
    if kernel == "qr_r":
        assert np.array_equal(block, a)  # qr_r leaves its input alone
    assert r.shape == (150, 150) and np.array_equal(r, np.triu(r))
    _, r_ref = np.linalg.qr(a)  # reference: numpy.linalg.qr
    np.testing.assert_allclose(_positive_diag(r), _positive_diag(r_ref), rtol=0,
                               atol=20 * 500 * 150 * 1e4 * EPS * np.abs(r_ref).max())
    wide = r_of(np.ones((2, 4), order="F"))
    assert wide.shape == (2, 4)  # fewer rows than columns: a trapezoid


@pytest.mark.parametrize("sizes", [[1000], [13, 0, 200, 7, 780], [3, 2, 1, 4]])
def test_tsqr_r_equals_the_r_of_the_whole_matrix(sizes):
    m, n = sum(sizes), 6
    a = _tall(m, n, 1e5, seed=len(sizes), scales=2.0)
    cuts = np.cumsum([0] + sizes)
    blocks = (a[cuts[i]:cuts[i + 1]].copy() for i in range(len(sizes)))
    r = tsqr_r(blocks, n, fan_in=2)  # a small fan-in exercises the repeated reduction
    assert r.shape == (n, n) and np.all(np.diag(r) >= 0)
    # R^T R = A^T A (reference: numpy's product of the data itself)
    np.testing.assert_allclose(r.T @ r, a.T @ a, rtol=0, atol=50 * m * n * EPS * np.linalg.norm(a, 2) ** 2)
    _, r_ref = np.linalg.qr(a)  # reference: numpy.linalg.qr
    np.testing.assert_allclose(r, _positive_diag(r_ref), rtol=0, atol=50 * m * n * 1e5 * EPS * np.abs(r_ref).max())
    # fewer rows than columns overall: the missing rows of R are zero
    short = tsqr_r(iter([a[:2].copy(), a[2:4].copy()]), n)
    assert short.shape == (n, n) and np.array_equal(short[4:], np.zeros((n - 4, n)))
    assert np.array_equal(tsqr_r(iter([]), 3), np.zeros((3, 3)))


def test_cholqr2_r_matches_householder_when_well_conditioned():
    a = np.ascontiguousarray(_tall(2000, 8, 1e3, seed=4, scales=4.0))
    blocks = lambda: (a[i:i + 300] for i in range(0, 2000, 300))  # noqa: E731 - two passes need a fresh iterator
    r = cholqr2_r(blocks, 8)
    assert r is not None and np.array_equal(r, np.triu(r))
    _, r_ref = np.linalg.qr(a)  # reference: numpy.linalg.qr
    # Yamamoto et al. (2015): CholeskyQR2 is as accurate as Householder below cond ~ eps^-1/2
    np.testing.assert_allclose(_positive_diag(r), _positive_diag(r_ref), rtol=0,
                               atol=50 * 2000 * 8 * 1e3 * EPS * np.abs(r_ref).max())


def test_cholqr2_r_declines_ill_conditioned_and_singular_data():
    bad = np.ascontiguousarray(_tall(500, 5, 1e9, seed=5))  # equilibrated Gram rcond ~ 1e-18
    assert 1e-9 ** 2 < CHOLQR2_MIN_RCOND
    assert cholqr2_r(lambda: iter([bad]), 5) is None
    singular = np.ascontiguousarray(np.column_stack([bad[:, :4], bad[:, 0]]))
    assert cholqr2_r(lambda: iter([singular]), 5) is None
    assert cholqr2_r(lambda: iter([np.zeros((10, 3))]), 3) is None


def test_pivoted_qr_r_against_scipy_qr_with_pivoting():
    a = _tall(60, 6, 1e6, seed=6, scales=3.0)
    a0 = a.copy()
    r, perm = pivoted_qr_r(a)
    assert np.array_equal(a, a0)
    _, r_ref, p_ref = scipy.linalg.qr(a, mode="economic", pivoting=True)  # reference: scipy.linalg.qr
    assert np.array_equal(perm, p_ref) and np.array_equal(r, r_ref)
    assert np.all(np.diff(np.abs(np.diag(r))) <= 0)  # |r_00| >= |r_11| >= ...


def test_gram_against_numpy_product():
    a = np.ascontiguousarray(np.random.default_rng(7).standard_normal((400, 9)))
    g = gram(a)
    assert np.array_equal(g, g.T)  # exactly symmetric
    np.testing.assert_allclose(g, a.T @ a, rtol=0, atol=10 * 400 * EPS * np.linalg.norm(a, 2) ** 2)  # numpy reference


# ------------------------------------------------------------------ rank and condition
def test_sequential_dependence_sets_aside_the_later_column():
    rng = np.random.default_rng(8)
    x = rng.standard_normal((30, 3))
    a = np.column_stack([x[:, 0], x[:, 1], x[:, 0] + 2 * x[:, 1], x[:, 2], 3 * x[:, 2]])
    _, r = np.linalg.qr(a)  # reference R: numpy.linalg.qr
    assert sequential_dependence(r, 1e-10) == [2, 4]
    assert sequential_dependence(np.zeros((3, 3)), 1e-10) == [0, 1, 2]


def test_greedy_rank_drop_finds_a_spread_out_dependence():
    # columns 0..3 independent; column 4 = sum of them plus 1e-9 noise, spread over all columns, so
    # no single |r_jj| is small enough for the sequential test at tol 1e-6 (numpy svd decides here)
    rng = np.random.default_rng(9)
    x = rng.standard_normal((50, 4))
    a = np.column_stack([x, x.sum(axis=1) + 1e-9 * rng.standard_normal(50)])
    _, r = np.linalg.qr(a)
    sv = np.linalg.svd(a / np.linalg.norm(a, axis=0), compute_uv=False)  # numpy.linalg.svd
    assert sv[-1] / sv[0] < 1e-6
    assert greedy_rank_drop(r, [0, 1, 2, 3, 4], 1e-6) == [4]


def test_condition_numbers_against_numpy_cond():
    a = _tall(80, 5, 1e7, seed=10, scales=5.0)
    _, r = np.linalg.qr(a)
    assert condition_2(r) == pytest.approx(np.linalg.cond(a), rel=1e-6)  # numpy.linalg.cond (SVD)
    unit = a / np.linalg.norm(a, axis=0)
    assert scaled_condition(r) == pytest.approx(np.linalg.cond(unit), rel=1e-6)
    assert condition_2(np.zeros((0, 0))) == 1.0
    assert condition_2(np.diag([1.0, 0.0])) == np.inf


# ------------------------------------------------------------------ triangular
def test_tri_solve_against_scipy_solve_triangular():
    _, r = np.linalg.qr(_tall(40, 6, 1e6, seed=11))
    b = np.random.default_rng(12).standard_normal((6, 3))
    kappa = np.linalg.cond(r)
    for trans in (False, True):
        ref = scipy.linalg.solve_triangular(r, b, lower=False, trans=int(trans))  # reference: scipy.linalg
        np.testing.assert_allclose(tri_solve(r, b, trans=trans), ref, rtol=0,
                                   atol=20 * 6 * kappa * EPS * np.abs(ref).max())
        ref_np = np.linalg.solve(r.T if trans else r, b)  # and numpy.linalg.solve (LU)
        np.testing.assert_allclose(tri_solve(r, b, trans=trans), ref_np, rtol=0,
                                   atol=20 * 6 * kappa * EPS * np.abs(ref_np).max())


def test_tri_rcond_against_numpy_cond():
    _, r = np.linalg.qr(_tall(40, 6, 1e6, seed=13))
    true = 1.0 / np.linalg.cond(r, 1)  # reference: numpy.linalg.cond in the 1-norm
    assert true / 60 <= tri_rcond(r) <= true * 60
    assert tri_rcond(np.diag([1.0, 0.0])) == 0.0
    assert tri_rcond(np.array([[1.0, np.nan], [0.0, 1.0]])) == 0.0
    assert tri_rcond(np.zeros((0, 0))) == 1.0


def test_stack_solve_lower_broadcasts_like_numpy_solve():
    rng = np.random.default_rng(14)
    lower = np.stack([np.linalg.cholesky(spd) for spd in
                      (m @ m.T + 4 * np.eye(4) for m in rng.standard_normal((3, 4, 4)))])  # (3, 4, 4)
    r = rng.standard_normal((2, 1, 4))  # broadcasts against the stack of 3
    got = stack_solve_lower(lower, r)
    assert got.shape == (2, 3, 4)
    for i in range(2):
        for k in range(3):
            ref = np.linalg.solve(lower[k], r[i, 0])  # reference: numpy.linalg.solve, one matrix at a time
            np.testing.assert_allclose(got[i, k], ref, rtol=0, atol=1e-13 * np.abs(ref).max())
