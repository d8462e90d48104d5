"""Chunked table reading and fits from files equal the in-memory fits."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.io.tables import read_table_chunks


def _frame(n=1200, seed=31):
    rng = np.random.default_rng(seed)
    z = rng.normal(size=(n, 3))
    df = pd.DataFrame({"stamp": [f"t{k:05d}" for k in range(n)],
                       "supply": 40 + 2 * z[:, 0], "ret": 35 + 1.5 * z[:, 0] + z[:, 1],
                       "pump": 7.5 + 0.3 * z[:, 2] + 0.1 * z[:, 1]})
    return df


def test_chunked_csv_fit_equals_in_memory(tmp_path):
    df = _frame()
    f = tmp_path / "loop.csv"
    df.to_csv(f, index=False)
    cols = ["supply", "ret", "pump"]
    mem = whiten.fit_baseline(df, columns=cols)
    # the in-memory fit of the same (CSV round-tripped) numbers is the reference
    back = pd.read_csv(f)
    mem = whiten.fit_baseline(back[cols])
    filed = whiten.fit_baseline(f, columns=cols, chunksize=100, index_column="stamp")
    assert filed.health.n_chunks == 12
    np.testing.assert_allclose(filed.cov, mem.cov, rtol=1e-12, atol=0)
    np.testing.assert_allclose(filed.mean, mem.mean, rtol=1e-14, atol=0)
    # the reference of the reference: numpy.cov on the same numbers
    np.testing.assert_allclose(mem.cov, np.cov(back[cols].to_numpy(), rowvar=False), rtol=1e-13)


def test_parquet_fit_equals_csv_fit(tmp_path):
    pytest.importorskip("pyarrow")
    df = _frame(500)
    df.to_parquet(tmp_path / "loop.parquet", index=False)
    a = whiten.fit_baseline(tmp_path / "loop.parquet", chunksize=64, index_column="stamp")
    b = whiten.fit_baseline(df.set_index("stamp"))
    assert a.columns == ["supply", "ret", "pump"]
    np.testing.assert_allclose(a.cov, b.cov, rtol=1e-12)


def test_reader_chunks_and_index(tmp_path):
    df = _frame(250)
    df.to_csv(tmp_path / "a.csv", index=False)
    chunks = list(read_table_chunks(tmp_path / "a.csv", ["pump", "supply"], chunksize=100, index_column="stamp"))
    assert [len(c) for c in chunks] == [100, 100, 50]
    assert list(chunks[0].columns) == ["pump", "supply"]
    assert chunks[2].index[0] == "t00200"
    plain = list(read_table_chunks(tmp_path / "a.csv", ["pump"], chunksize=100))
    assert plain[1].index[0] == 100 and all(c.dtypes.iloc[0] == np.float64 for c in plain)


def test_reader_errors(tmp_path):
    with pytest.raises(whiten.InputError, match="not found"):
        read_table_chunks(tmp_path / "absent.csv")
    (tmp_path / "empty.csv").write_text("")
    with pytest.raises(whiten.InputError, match="empty"):
        read_table_chunks(tmp_path / "empty.csv")
    (tmp_path / "head.csv").write_text("a,b,c\n")
    with pytest.raises(whiten.InputError, match="header but no data rows"):
        list(read_table_chunks(tmp_path / "head.csv"))
    (tmp_path / "ok.csv").write_text("a,b,c\n1,2,3\n4,5,6\n")
    with pytest.raises(whiten.InputError, match=r"does not match the columns asked for: missing columns \['d'\], extra columns \['c'\]"):
        read_table_chunks(tmp_path / "ok.csv", ["a", "b", "d"])
    (tmp_path / "text.csv").write_text("a,b\n1,2\n3,4\n5,oops\n")
    with pytest.raises(whiten.InputError, match=r"column 'b' is not numeric: row 2 .* 'oops'"):
        list(read_table_chunks(tmp_path / "text.csv", chunksize=2))
    (tmp_path / "x.dat").write_text("a\n1\n")
    with pytest.raises(whiten.InputError, match="cannot tell the format"):
        read_table_chunks(tmp_path / "x.dat")


def test_missing_cells_in_a_file_are_dropped_and_counted(tmp_path):
    df = _frame(300)
    df.loc[[7, 150], "ret"] = np.nan
    df.to_csv(tmp_path / "gaps.csv", index=False)
    with pytest.warns(UserWarning, match=r"left out 2 incomplete row\(s\) of 300 \(first: data file .*gaps.csv': "
                                   r"line 9, row 7 \(0-based data row, index 't00007'\), column 'ret'"):
        b = whiten.fit_baseline(tmp_path / "gaps.csv", index_column="stamp", chunksize=64)
    assert b.health.n_dropped == 2 and b.n == 298 and b.health.n_rows_read == 300
    ref = df.dropna().drop(columns="stamp").to_numpy()
    np.testing.assert_allclose(b.cov, np.cov(ref, rowvar=False), rtol=1e-12)  # numpy.cov on complete rows
    with pytest.raises(whiten.InputError, match=r"line 9, row 7 \(0-based data row, index 't00007'\), column 'ret' is missing"):
        whiten.fit_baseline(tmp_path / "gaps.csv", index_column="stamp", missing="error")


def test_progress_bar_only_when_asked_or_on_a_terminal(tmp_path, capsys):
    df = _frame(300)
    df.to_csv(tmp_path / "p.csv", index=False)
    whiten.fit_baseline(tmp_path / "p.csv", index_column="stamp", chunksize=100)
    assert capsys.readouterr().err == ""  # stderr is not a terminal under pytest
    whiten.fit_baseline(tmp_path / "p.csv", index_column="stamp", chunksize=100, progress=True)
    assert "reading" in capsys.readouterr().err  # tqdm's bar, forced on


def test_to_frame_summary():
    df = _frame(400).drop(columns="stamp")
    b = whiten.fit_baseline(df)
    t = b.to_frame()
    assert list(t.index) == ["supply", "ret", "pump"]
    np.testing.assert_allclose(t["sd"], df.std(ddof=1), rtol=1e-12)  # pandas std, n - 1
    # 1 - R^2 of each column on the others (numpy.linalg.lstsq, textbook definition of 1/VIF)
    for c in df.columns:
        others = np.column_stack([np.ones(len(df)), df.drop(columns=c).to_numpy()])
        res = np.linalg.lstsq(others, df[c].to_numpy(), rcond=None)[1][0]
        own = res / ((df[c] - df[c].mean()) ** 2).sum()
        assert t.loc[c, "own_share"] == pytest.approx(own, rel=1e-10)


def test_parquet_errors(tmp_path):
    pytest.importorskip("pyarrow")
    df = pd.DataFrame({"a": [1.0, 2.0, 3.0], "b": ["4", "5", "x6"]})
    df.to_parquet(tmp_path / "t.parquet", index=False)
    with pytest.raises(whiten.InputError, match=r"column 'b' is not numeric: row 2 .* 'x6'"):
        whiten.fit_baseline(tmp_path / "t.parquet")
    with pytest.raises(whiten.InputError, match=r"missing columns \['c'\]"):
        whiten.fit_baseline(tmp_path / "t.parquet", columns=["a", "c"])
    (tmp_path / "bad.parquet").write_text("not parquet")
    with pytest.raises(whiten.InputError, match="not a readable Parquet file"):
        whiten.fit_baseline(tmp_path / "bad.parquet")
