"""whiten.monitor.score_file: the streamed file gives the rows whiten.monitor.score gives in memory."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.errors import InputError
from whiten.monitor import score, score_file

from .conftest import correlated_cov, fit

COLS = ["inlet", "outlet", "flow", "dp"]


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    d = tmp_path_factory.mktemp("stream")
    rng = np.random.default_rng(2024)
    cov = correlated_cov(len(COLS), rng)
    mu = np.array([20.0, 35.0, 3.0, 0.4])
    b = fit(rng.multivariate_normal(mu, cov, size=300), COLS)
    new = pd.DataFrame(rng.multivariate_normal(mu, cov, size=1234), columns=COLS)
    new.iloc[50:55, 2] += 8 * np.sqrt(cov[2, 2])
    new.iloc[9] = np.nan
    new.iloc[10, [0, 3]] = np.nan
    new.insert(0, "stamp", [f"k{j:05d}" for j in range(len(new))])
    new["operator"] = "ann"  # a text column the model does not use
    path = d / "rows.csv"
    new.to_csv(path, index=False)
    # the in-memory reference scores the numbers exactly as the CSV holds them
    back = pd.read_csv(path, index_col="stamp")
    return b, path, back


def _read_scores(path, index_col):
    return pd.read_csv(path, index_col=index_col, keep_default_na=False, na_values=[""])


@pytest.mark.parametrize("fdr", [None, 0.05])
def test_equals_in_memory_score_row_for_row(case, tmp_path, fdr):
    b, path, back = case
    out = tmp_path / "s.csv"
    dig = score_file(b, path, out, fdr=fdr, chunksize=97, index_column="stamp")
    got = _read_scores(out, "stamp")
    # reference: whiten.monitor.score on the whole table in memory
    ref = score(b, back[COLS], fdr=fdr)
    assert list(got.columns) == list(ref.columns) and list(got.index) == list(ref.index)
    for c in ref.columns:
        if ref[c].dtype.kind == "f":
            # floats are written shortest-round-trip, so equality is exact
            np.testing.assert_array_equal(got[c].to_numpy(), ref[c].to_numpy(), err_msg=c)
        elif c in ("top_contributor", "note"):
            assert list(got[c].fillna("")) == list(ref[c]), c
        else:
            np.testing.assert_array_equal(got[c].to_numpy(), ref[c].to_numpy(), err_msg=c)
    assert dig.n_rows == len(ref) and dig.n_alarm == int(ref["alarm"].sum())
    assert dig.n_fdr == (None if fdr is None else int(ref["alarm_fdr"].sum()))
    assert dig.ignored_columns == ["operator"] and dig.source == str(path)
    assert dig.attrs["fdr"] == fdr and dig.attrs["limit_basis"] == ref.attrs["limit_basis"]


def test_rows_without_an_index_column_are_numbered(case, tmp_path):
    b, path, back = case
    score_file(b, path, tmp_path / "s.csv", chunksize=500)
    got = pd.read_csv(tmp_path / "s.csv", index_col="row")
    assert list(got.index) == list(range(len(back)))  # no row dropped or moved
    ref = score(b, back[COLS].reset_index(drop=True))
    np.testing.assert_array_equal(got["d2"].to_numpy(), ref["d2"].to_numpy())


def test_refuses_to_overwrite_and_writes_atomically(case, tmp_path):
    b, path, _ = case
    out = tmp_path / "s.csv"
    out.write_text("keep\n")
    with pytest.raises(InputError, match="already exists"):
        score_file(b, path, out)
    assert out.read_text() == "keep\n"
    # a failure half-way (a bad cell past the first chunk) leaves neither a partial file nor the old one replaced
    bad = pd.read_csv(path).astype({"flow": object})
    bad.loc[700, "flow"] = "3,1"
    bad.to_csv(tmp_path / "bad.csv", index=False)
    with pytest.raises(InputError, match=r"column 'flow' is not numeric: row 700 \(0-based data row; line 702"):
        score_file(b, tmp_path / "bad.csv", out, chunksize=100, force=True)
    assert out.read_text() == "keep\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.csv", "s.csv"]  # no temporary left
    score_file(b, path, out, force=True)
    assert list(pd.read_csv(out, nrows=0).columns[:3]) == ["row", "d2", "p_value"]


def test_output_naming_the_input_is_refused(case, tmp_path):
    b, path, _ = case
    copy = tmp_path / "rows.csv"
    copy.write_bytes(path.read_bytes())
    before = copy.read_bytes()
    with pytest.raises(InputError, match="names the data file being read"):
        score_file(b, copy, copy, force=True)
    with pytest.raises(InputError, match="names the data file being read"):
        score_file(b, copy, tmp_path / "." / "rows.csv", force=True)
    assert copy.read_bytes() == before


def test_missing_model_columns_and_bad_values(case, tmp_path):
    b, path, back = case
    back.rename(columns={"dp": "dP"}).to_csv(tmp_path / "renamed.csv")
    with pytest.raises(InputError, match=r"does not match the model: missing columns \['dp'\], "
                                         r"extra columns \['stamp', 'dP', 'operator'\]"):
        score_file(b, tmp_path / "renamed.csv", tmp_path / "s.csv")
    with pytest.raises(InputError, match=r"row 9 \(0-based data row, index 'k00009'\), column 'inlet' is nan"):
        score_file(b, path, tmp_path / "s.csv", missing="error", index_column="stamp", chunksize=4)
    inf = back.copy()
    inf.iloc[3, 1] = np.inf
    inf.to_csv(tmp_path / "inf.csv")
    with pytest.raises(InputError, match=r"row 3 .*column 'outlet' is inf"):
        score_file(b, tmp_path / "inf.csv", tmp_path / "s.csv")
    assert not (tmp_path / "s.csv").exists()


def test_parquet_and_gaussian(tmp_path):
    pytest.importorskip("pyarrow")
    g = whiten.Gaussian([0.0, 1.0], [[2.0, 0.6], [0.6, 1.0]], columns=["u", "v"])
    rng = np.random.default_rng(5)
    df = pd.DataFrame(rng.normal(size=(300, 2)), columns=["v", "u"])
    df.to_parquet(tmp_path / "r.parquet", index=False)
    dig = score_file(g, tmp_path / "r.parquet", tmp_path / "s.csv", phase="known", chunksize=64, fdr=0.1,
                     chart_points=16)
    got = pd.read_csv(tmp_path / "s.csv", index_col="row")
    ref = score(g, df, phase="known", fdr=0.1)  # columns matched by name, as in memory
    np.testing.assert_array_equal(got["p_bh"].to_numpy(), ref["p_bh"].to_numpy())
    assert dig.rows_per_point == 32 and len(dig.trace()) <= 16
