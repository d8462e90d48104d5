"""One contract for every covariance object: the dense Factor and each structure.

A subclass says only how to build its object and, *independently* (with numpy,
from the same ingredients, never through the object's own ``dense()``), the
dense matrix it stands for; every method the objects share is then checked
against that dense form:

``dim``, ``columns``, the ``health`` fields (``rcond``, ``rcond_scaled``,
``digits_lost``, ``jitter``, ``jitter_relative``, ``method``) and their
shortcuts, ``dense()`` / ``matrix()``, ``logdet()``, ``solve``, ``whiten``,
``quad`` with and without a shift, and ``repr``.

Tolerances are ``c * n * kappa * eps`` with ``kappa`` the 2-norm condition
number of the dense matrix (numpy.linalg.cond): the forward-error bound of a
backward-stable factor-and-solve (Higham, *Accuracy and Stability of
Numerical Algorithms*, 2nd ed., 2002, ch. 10; the constant c is generous).
Outside references, named beside each check: numpy.linalg.slogdet,
numpy.linalg.solve, scipy.linalg.cho_factor / cho_solve, numpy.linalg.cholesky
and numpy.linalg.cond.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import scipy.linalg

import whiten
from whiten._numerics import digits_lost_from_rcond
from whiten.errors import InputError

from ..helpers.matrices import EPS, spd_with_condition


def spd(n: int, cond: float, seed: int) -> np.ndarray:
    """Random SPD matrix with 2-norm condition number ``cond`` (see tests.helpers.matrices)."""
    return spd_with_condition(n, cond, np.random.default_rng(seed))


@dataclasses.dataclass
class Case:
    obj: object
    dense: np.ndarray
    tol: float          # c * n * kappa * eps
    x: np.ndarray       # rows to whiten / quad, shape (n_rows, n)
    shift: np.ndarray   # a shift of shape (n,)


class CovarianceContract:
    """Checks a covariance object against its dense matrix; subclasses define :meth:`build`.

    Class attributes a subclass may set: ``method`` (what ``health.method``
    must say), ``columns`` (the labels it was built with, or None), ``jitter``
    (the diagonal amount its health must report).
    """

    n_rows = 5
    c = 20.0
    method: str = ""
    columns: list | None = None
    jitter: float = 0.0

    def build(self):  # pragma: no cover - every subclass defines it
        """Return ``(obj, dense)``; ``dense`` computed with numpy from the same ingredients."""
        raise NotImplementedError

    @pytest.fixture
    def case(self) -> Case:
        obj, dense = self.build()
        n = dense.shape[0]
        kappa = np.linalg.cond(dense)  # numpy.linalg.cond (2-norm, from the SVD)
        rng = np.random.default_rng(99)
        x = rng.standard_normal((self.n_rows, n)) * np.sqrt(np.diag(dense))
        shift = np.linspace(-0.5, 0.5, n) * np.sqrt(np.diag(dense))
        return Case(obj, dense, self.c * n * kappa * EPS, x, shift)

    # ------------------------------------------------------------ shape and labels
    def test_dim(self, case):
        assert case.obj.dim == case.dense.shape[0]

    def test_columns(self, case):
        got = case.obj.columns
        assert got == self.columns
        if got is not None:
            assert len(got) == case.obj.dim
            got.append("not a column")  # a copy: the object's labels do not change
            assert case.obj.columns == self.columns

    # ------------------------------------------------------------ the matrix
    def test_dense_and_matrix(self, case):
        scale = np.abs(case.dense).max()
        np.testing.assert_allclose(case.obj.matrix(), case.dense, rtol=0, atol=case.tol * scale)
        if hasattr(case.obj, "dense"):
            np.testing.assert_array_equal(case.obj.dense(), case.obj.matrix())

    def test_logdet_against_numpy_slogdet(self, case):
        sign, ref = np.linalg.slogdet(case.dense)  # reference: numpy.linalg.slogdet (LU)
        assert sign == 1.0
        n = case.dense.shape[0]
        assert case.obj.logdet() == pytest.approx(ref, rel=case.tol, abs=case.tol * n)

    # ------------------------------------------------------------ solves
    def test_solve_against_numpy_solve(self, case):
        b = case.x.T
        ref = np.linalg.solve(case.dense, b)  # reference: numpy.linalg.solve (LU with pivoting)
        got = case.obj.solve(b)
        assert got.shape == b.shape
        np.testing.assert_allclose(got, ref, rtol=0, atol=case.tol * np.abs(ref).max())
        one = case.obj.solve(case.x[0])
        assert one.shape == (case.dense.shape[0],)
        np.testing.assert_allclose(one, ref[:, 0], rtol=0, atol=case.tol * np.abs(ref).max())

    def test_solve_against_scipy_cho_solve(self, case):
        b = case.x.T
        ref = scipy.linalg.cho_solve(scipy.linalg.cho_factor(case.dense), b)  # reference: scipy.linalg.cho_solve
        np.testing.assert_allclose(case.obj.solve(b), ref, rtol=0, atol=case.tol * np.abs(ref).max())

    # ------------------------------------------------------------ quadratic forms
    def test_quad_without_shift_against_numpy_solve(self, case):
        d = case.x
        ref = np.einsum("ij,ji->i", d, np.linalg.solve(case.dense, d.T))  # reference: numpy.linalg.solve
        got = case.obj.quad(d)
        assert got.shape == (d.shape[0],) and np.all(got >= 0)
        np.testing.assert_allclose(got, ref, rtol=case.tol)
        one = case.obj.quad(d[0])
        assert isinstance(one, float)
        assert one == pytest.approx(ref[0], rel=case.tol)

    def test_quad_with_shift_against_numpy_solve(self, case):
        d = case.x - case.shift
        ref = np.einsum("ij,ji->i", d, np.linalg.solve(case.dense, d.T))  # reference: numpy.linalg.solve
        np.testing.assert_allclose(case.obj.quad(case.x, shift=case.shift), ref, rtol=case.tol)
        assert case.obj.quad(case.x[1], shift=case.shift) == pytest.approx(ref[1], rel=case.tol)

    # ------------------------------------------------------------ whitening
    def test_whiten_gives_identity_covariance(self, case):
        # A whitening W satisfies W S W^T = I: applied to the columns of a Cholesky
        # factor of S (reference: numpy.linalg.cholesky) it yields an orthogonal matrix.
        lo = np.linalg.cholesky(case.dense)
        z = case.obj.whiten(lo.T)  # rows are W l_j
        n = case.dense.shape[0]
        np.testing.assert_allclose(z.T @ z, np.eye(n), rtol=0, atol=case.tol)

    def test_whiten_with_and_without_shift_matches_quad(self, case):
        plain = case.obj.whiten(case.x)
        shifted = case.obj.whiten(case.x, shift=case.shift)
        assert plain.shape == shifted.shape == case.x.shape
        np.testing.assert_allclose(np.sum(plain**2, axis=1), case.obj.quad(case.x), rtol=case.tol)
        np.testing.assert_allclose(np.sum(shifted**2, axis=1), case.obj.quad(case.x, shift=case.shift),
                                   rtol=case.tol)
        # a shift is the same as subtracting it first (W is linear)
        np.testing.assert_allclose(shifted, case.obj.whiten(case.x - case.shift), rtol=0,
                                   atol=case.tol * np.abs(plain).max())
        assert case.obj.whiten(case.x[0]).shape == (case.dense.shape[0],)

    # ------------------------------------------------------------ health
    def test_health_fields(self, case):
        obj, dense = case.obj, case.dense
        n = dense.shape[0]
        h = obj.health
        assert isinstance(h, whiten.FactorHealth)
        assert h.method == self.method
        assert 0 < h.rcond <= 1 and 0 < h.rcond_scaled <= 1
        # rcond estimates 1/cond_1 (reference: numpy.linalg.cond(., 1)); LAPACK's estimator is
        # within a small factor of the truth in practice (Higham 2002, ch. 15)
        true = 1.0 / np.linalg.cond(dense, 1)
        assert true / (10 * n) <= h.rcond <= true * (10 * n)
        # digits_lost means one thing everywhere: digits_lost_from_rcond(rcond_scaled) ...
        assert h.digits_lost == digits_lost_from_rcond(h.rcond_scaled) >= 0
        # ... and that is log10 of the condition of the unit-diagonal matrix (numpy.linalg.cond, 1-norm)
        ds = 1.0 / np.sqrt(np.diag(dense))
        true_scaled = np.linalg.cond(dense * np.outer(ds, ds), 1)
        assert abs(h.digits_lost - np.log10(true_scaled)) <= np.log10(10 * n)
        assert h.jitter == pytest.approx(self.jitter, rel=1e-12, abs=0)
        assert h.jitter_relative >= 0 and (h.jitter_relative > 0) == (self.jitter > 0)
        assert h.digits_trusted == pytest.approx(max(0.0, -np.log10(EPS) - h.digits_lost))
        d = h.to_dict()
        assert set(d) == {"rcond", "rcond_scaled", "digits_lost", "jitter", "jitter_relative", "method",
                          "digits_trusted"}

    def test_health_shortcuts(self, case):
        obj = case.obj
        assert obj.jitter == obj.health.jitter
        assert obj.rcond == obj.health.rcond
        assert obj.digits_lost == obj.health.digits_lost

    def test_repr(self, case):
        text = repr(case.obj)
        h = case.obj.health
        assert text.startswith(type(case.obj).__name__ + "(")
        for part in (f"dim={case.obj.dim}", f"method={h.method!r}", f"rcond={h.rcond:.3g}",
                     f"digits_lost={h.digits_lost:.1f}"):
            assert part in text

    # ------------------------------------------------------------ inputs
    def test_inputs_are_not_modified(self, case):
        x = case.x.copy()
        shift = case.shift.copy()
        case.obj.quad(x, shift=shift)
        case.obj.whiten(x, shift=shift)
        case.obj.solve(x.T)
        np.testing.assert_array_equal(x, case.x)
        np.testing.assert_array_equal(shift, case.shift)

    def test_shape_and_value_errors(self, case):
        obj, n = case.obj, case.dense.shape[0]
        with pytest.raises(InputError, match="expected rows of length"):
            obj.quad(np.ones((2, n + 1)))
        with pytest.raises(InputError, match=r"expected shape"):
            obj.solve(np.ones(n + 1))
        bad = case.x.copy()
        bad[1, 0] = np.nan
        with pytest.raises(InputError, match="row 1, column 0"):
            obj.whiten(bad)
