"""pivoted_cholesky(): numerical rank and which variables depend on which.

Reference: the data the Gram matrix was made from (numpy products), and
numpy.linalg.matrix_rank, named beside each check.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten import InputError, NotPositiveDefiniteError

from .test_cholesky import GRAM_RANK2


def test_rank_two_gram_is_found_by_pivoted_factorization():
    # [[1,2,3],[4,5,6],[7,8,9]] has rank 2 (second column is the mean of the others), so its Gram does
    rep = whiten.pivoted_cholesky(GRAM_RANK2, columns=["c1", "c2", "c3"])
    assert rep.rank == 2 and not rep.full_rank
    (dep,) = rep.dependent
    assert set(rep.dependencies[dep]) == {"c1", "c2", "c3"} - {dep}
    assert "is a linear combination of" in rep.describe()[0]
    # coefficients reproduce the dependent column of the data (numpy check on the data itself)
    a = np.array([[1.0, 2, 3], [4, 5, 6], [7, 8, 9]])
    cols = {"c1": 0, "c2": 1, "c3": 2}
    recon = sum(c * a[:, cols[n]] for n, c in rep.coefficients[dep].items())
    assert np.allclose(recon, a[:, cols[dep]], rtol=1e-8)


def test_rank_agrees_with_numpy_matrix_rank_and_labels_default():
    rng = np.random.default_rng(1)
    x = rng.standard_normal((40, 4))
    x = np.column_stack([x, x[:, 0] - 2 * x[:, 3]])
    rep = whiten.pivoted_cholesky(x.T @ x)
    assert rep.rank == np.linalg.matrix_rank(x) == 4  # reference: numpy.linalg.matrix_rank (SVD of the data)
    assert set(rep.independent) | set(rep.dependent) == {"x0", "x1", "x2", "x3", "x4"}
    assert rep.dim == 5 and len(rep.order) == 5


def test_columns_come_from_a_dataframe_or_the_keyword():
    g = GRAM_RANK2
    frame = pd.DataFrame(g, index=["p", "q", "r"], columns=["p", "q", "r"])
    from_frame = whiten.pivoted_cholesky(frame)
    given = whiten.pivoted_cholesky(g, columns=["p", "q", "r"])
    assert from_frame.dependencies == given.dependencies
    assert set(given.independent) | set(given.dependent) == {"p", "q", "r"}
    with pytest.raises(InputError, match="columns: expected 3 names, got 2"):
        whiten.pivoted_cholesky(g, columns=["p", "q"])


def test_negative_variance_is_named():
    with pytest.raises(NotPositiveDefiniteError, match="variance of 'b' is negative"):
        whiten.pivoted_cholesky(np.diag([1.0, -2.0]), columns=["a", "b"])
    with pytest.raises(InputError, match="tol: must be non-negative"):
        whiten.pivoted_cholesky(np.eye(2), tol=-1.0)
