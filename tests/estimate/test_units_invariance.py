"""Distances do not depend on the units: a positive rescaling and a shift of any sensor leave every d2
unchanged, for each estimator and each reading path (issue 19, item 1).

Reference: the Mahalanobis distance is invariant under x -> a x + b with a diagonal and positive for
any estimator equivariant under that map (textbook, from memory); the sample and MCD estimators are
affinely equivariant, and the shrinkage estimator shrinks the correlation (Schafer & Strimmer 2005,
target D), which such a map leaves unchanged. Tolerance: the d2 of well-conditioned data (kappa of
the correlation below ~30) moves by c p kappa eps under rounding of the scaled inputs; 1e-10 leaves
room for c up to ~1e3 at p = 6 and fails on any real dependence on the units (which moves d2 by O(1)).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten

# small reference sets on purpose: the weak-screen notice is tested in tests/estimate/test_weak_screen_law.py
pytestmark = pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")

P = 6


def _problem(seed, m=40):
    rng = np.random.default_rng(seed)
    a = np.eye(P) + 0.4 * rng.normal(size=(P, P))
    x = rng.normal(size=(m, P)) @ a
    y = rng.normal(size=(50, P)) @ a * 1.5
    scale = 10.0 ** rng.uniform(-6, 6, size=P)
    scale[0], scale[-1] = 1e-6, 1e6  # both ends of the range every time
    shift = scale * rng.normal(scale=100.0, size=P)  # a level far from zero, in the column's own units
    return x, y, scale, shift


CASES = [
    ("sample", {"method": "gram"}),
    ("sample", {"method": "tsqr"}),
    ("sample", {"method": "auto"}),
    ("shrinkage", {"shrinkage": "ledoit-wolf"}),
    ("shrinkage", {"shrinkage": "oas"}),
]


def _d2(b, rows):
    return b.score(rows, phase="known").d2.to_numpy()


@pytest.mark.parametrize("estimator,kw", CASES)
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_array_input_units_do_not_matter(estimator, kw, seed):
    x, y, a, b = _problem(seed)
    ref = _d2(whiten.fit_baseline(x, estimator=estimator, **kw), y)
    got = _d2(whiten.fit_baseline(x * a + b, estimator=estimator, **kw), y * a + b)
    np.testing.assert_allclose(got, ref, rtol=1e-10)


@pytest.mark.parametrize("estimator,kw", CASES)
def test_few_rows_shrinkage_and_chunks_units_do_not_matter(estimator, kw, tmp_path):
    m = 4 if estimator == "shrinkage" else 40  # shrinkage with fewer rows than sensors too
    x, y, a, b = _problem(11, m=m)
    cols = [f"s{j}" for j in range(P)]
    ref = _d2(whiten.fit_baseline(x, estimator=estimator, **kw), y)
    xs = pd.DataFrame(x * a + b, columns=cols)
    chunks = [xs.iloc[:3], xs.iloc[3:]]  # a one-shot iterator of DataFrames
    got = _d2(whiten.fit_baseline(iter(chunks), estimator=estimator, **kw), pd.DataFrame(y * a + b, columns=cols))
    np.testing.assert_allclose(got, ref, rtol=1e-10)
    path = tmp_path / "ref.csv"
    xs.to_csv(path, index=False)  # pandas writes the shortest repr, which reads back exactly
    got = _d2(whiten.fit_baseline(str(path), estimator=estimator, chunksize=3, **kw),
              pd.DataFrame(y * a + b, columns=cols))
    np.testing.assert_allclose(got, ref, rtol=1e-10)


def test_weighted_sample_units_do_not_matter():
    x, y, a, b = _problem(5)
    w = np.random.default_rng(5).integers(1, 5, size=x.shape[0]).astype(float)
    ref = _d2(whiten.fit_baseline(x, weights=w), y)
    got = _d2(whiten.fit_baseline(x * a + b, weights=w), y * a + b)
    np.testing.assert_allclose(got, ref, rtol=1e-10)


@pytest.mark.parametrize("seed", [1, 2])
def test_robust_units_do_not_matter(seed):
    """FastMCD standardizes by median and MAD first; its random subsets are drawn by position."""
    x, y, a, b = _problem(seed, m=40)
    x[:3] += 8.0  # a few gross outliers, so the reweighting has something to flag
    r1 = whiten.fit_baseline(x, estimator="robust")
    r2 = whiten.fit_baseline(x * a + b, estimator="robust")
    assert r1.params["flagged_rows"] == r2.params["flagged_rows"]
    np.testing.assert_allclose(_d2(r2, y * a + b), _d2(r1, y), rtol=1e-10)


def test_shrinkage_was_not_invariant_before_in_the_way_the_issue_shows():
    """The issue's symptom: one sensor x100 must change no distance (a target m I would change all)."""
    x, y, _, _ = _problem(7, m=30)
    k = np.ones(P)
    k[2] = 100.0
    ref = _d2(whiten.fit_baseline(x, estimator="shrinkage"), y)
    got = _d2(whiten.fit_baseline(x * k, estimator="shrinkage"), y * k)
    np.testing.assert_allclose(got, ref, rtol=1e-10)
