"""Benjamini–Hochberg batch control against statsmodels."""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from whiten.errors import InputError
from whiten.monitor import bh_adjust, bh_threshold, score

from .conftest import fit


def test_bh_against_statsmodels():
    rng = np.random.default_rng(3)
    p = np.concatenate([rng.uniform(size=400), rng.uniform(0, 1e-3, size=25)])
    rng.shuffle(p)
    for q in (0.01, 0.05, 0.2):
        # statsmodels.stats.multitest.multipletests(method="fdr_bh") is the reference
        reject, adj, _, _ = multipletests(p, alpha=q, method="fdr_bh")
        ours = bh_adjust(p)
        assert np.allclose(ours, adj, rtol=1e-13)
        assert np.array_equal(ours <= q, reject)
        thr = bh_threshold(p, q)
        assert np.array_equal(p <= thr, reject)


def test_bh_skips_nan_and_score_columns():
    rng = np.random.default_rng(4)
    p = rng.uniform(size=50) ** 3
    with_nan = np.insert(p, [3, 10], np.nan)
    adj = bh_adjust(with_nan)
    assert np.isnan(adj[[3, 11]]).all()
    _, ref, _, _ = multipletests(p, method="fdr_bh")  # statsmodels, NaNs left out of the count
    assert np.allclose(adj[~np.isnan(adj)], ref, rtol=1e-13)
    assert bh_threshold([0.5, 0.9], 0.05) == -np.inf

    x = rng.standard_normal((200, 3))
    b = fit(x, ["a", "b", "c"])
    new = rng.standard_normal((60, 3))
    new[:5] += 6.0
    new[7] = np.nan
    s = score(b, new, fdr=0.05)
    cols = list(s.columns)
    assert cols[cols.index("alarm") + 1: cols.index("alarm") + 3] == ["p_bh", "alarm_fdr"]
    ok = ~np.isnan(s["p_value"].to_numpy())
    rej, ref, _, _ = multipletests(s["p_value"].to_numpy()[ok], alpha=0.05, method="fdr_bh")
    assert np.allclose(s["p_bh"].to_numpy()[ok], ref, rtol=1e-13)
    assert np.array_equal(s["alarm_fdr"].to_numpy()[ok], rej)
    assert not s["alarm_fdr"].iloc[7]
    with pytest.raises(InputError, match="fdr: expected a probability"):
        score(b, new, fdr=2)
