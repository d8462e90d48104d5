"""Awkward reference data: every message names the columns (or rows) and the fix."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten

# small reference sets on purpose: the weak-screen notice is tested in tests/estimate/test_weak_screen_law.py
pytestmark = pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")


def _frame(n=80, seed=41):
    rng = np.random.default_rng(seed)
    z = rng.normal(size=(n, 3))
    return pd.DataFrame({"s1": z[:, 0], "s2": z[:, 1], "s3": 5 + z[:, 2]})


def test_too_few_rows_suggests_shrinkage():
    df = _frame(4).assign(s4=lambda d: d.s1 * 2 - 1)
    with pytest.raises(whiten.InputError, match=r"4 complete row\(s\) for 4 columns.*estimator='shrinkage'"):
        whiten.fit_baseline(df)
    b = whiten.fit_baseline(df, estimator="shrinkage")  # defined for n <= p
    assert b.params["intensity"] > 0 and np.all(np.linalg.eigvalsh(b.cov) > 0)


def test_constant_column_is_named():
    df = _frame().assign(valve=4.2)
    with pytest.raises(whiten.InputError, match=r"constant column\(s\) 'valve' \(every row holds 4.2\)"):
        whiten.fit_baseline(df)
    big = _frame().assign(level=1e8 + 0.5)  # a level far from zero still centres to exact zeros
    with pytest.raises(whiten.InputError, match="'level'"):
        whiten.fit_baseline(big, method="tsqr")


def test_dependent_columns_are_named():
    df = _frame()
    df["s4"] = 0.3 * df.s1 + 0.3 * df.s2  # an invented "sum" channel
    with pytest.raises(whiten.InputError, match=r"s4 is a linear combination of s1, s2\. Leave out 's4'"):
        whiten.fit_baseline(df)
    dup = _frame().assign(s1_copy=lambda d: d.s1)
    with pytest.raises(whiten.InputError, match="linearly dependent"):
        whiten.fit_baseline(dup)


def test_non_numeric_column_names_column_and_row():
    df = _frame()
    df["mode"] = "run"
    df.loc[3, "mode"] = "stop"
    with pytest.raises(whiten.InputError, match=r"column 'mode' is not numeric: row 0"):
        whiten.fit_baseline(df)
    ok = whiten.fit_baseline(df, columns=["s1", "s2", "s3"])
    assert ok.columns == ["s1", "s2", "s3"]


def test_incomplete_rows_dropped_with_report_or_refused():
    df = _frame()
    df.loc[[5, 9, 60], "s2"] = np.nan
    with pytest.warns(UserWarning, match=r"left out 3 incomplete row\(s\) of 80 \(first: row 5, column 's2'"):
        b = whiten.fit_baseline(df)
    assert b.health.n_dropped == 3 and b.n == 77
    np.testing.assert_allclose(b.cov, np.cov(df.dropna().to_numpy(), rowvar=False), rtol=1e-12)  # numpy.cov
    with pytest.raises(whiten.InputError, match=r"row 5, column 's2' is missing"):
        whiten.fit_baseline(df, missing="error")
    empty = df.assign(s2=np.nan)
    with pytest.raises(whiten.InputError, match=r"every one of the 80 rows .* \['s2'\] are missing in every row"):
        whiten.fit_baseline(empty)


def test_infinite_value_is_refused():
    df = _frame()
    df.loc[7, "s3"] = np.inf
    with pytest.raises(whiten.InputError, match=r"row 7, column 's3' is inf"):
        whiten.fit_baseline(df)


def test_options_are_checked():
    x = _frame().to_numpy()
    with pytest.raises(whiten.InputError, match="estimator: expected one of"):
        whiten.fit_baseline(x, estimator="mle")
    with pytest.raises(whiten.InputError, match="missing: expected one of"):
        whiten.fit_baseline(x, missing="ignore")
    with pytest.raises(whiten.InputError, match="method: expected one of"):
        whiten.fit_baseline(x, method="svd")
    with pytest.raises(whiten.InputError, match="2 name"):
        whiten.fit_baseline(x, columns=["a", "b"])
    with pytest.raises(whiten.InputError, match="weights: 79 entries"):
        whiten.fit_baseline(x, weights=np.ones(79))
    with pytest.raises(whiten.InputError, match="row 0: the weight is -1"):
        whiten.fit_baseline(x, weights=-np.ones(80))
    with pytest.raises(whiten.InputError, match="chunksize"):
        whiten.fit_baseline(x, chunksize=0)
    with pytest.raises(whiten.InputError, match="index_column: works with DataFrame or file input"):
        whiten.fit_baseline(x, index_column="t")
    with pytest.raises(whiten.InputError, match="cannot read rows"):
        whiten.fit_baseline(3.5)


def test_ill_conditioned_warns_with_numbers():
    rng = np.random.default_rng(2)
    t = rng.normal(size=300)
    x = np.column_stack([t, t + 1e-6 * rng.normal(size=300), rng.normal(size=300)])
    with pytest.warns(whiten.ConditioningWarning, match=r"about 1\d\.\d of ~16 significant digits"):
        b = whiten.fit_baseline(x)
    assert b.health.method == "tsqr" and b.health.digits_lost > whiten.current_settings().digits_warn
