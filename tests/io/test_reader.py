"""The one table reader: open_table, Table.select, Table.chunks and select_columns."""

from __future__ import annotations

import gzip

import numpy as np
import pandas as pd
import pytest

from whiten.errors import InputError
from whiten.io.tables import open_table, select_columns


def test_header_selection_and_chunks(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("stamp, a, b, note\ns0,1,2.5,x\ns1,,4,y\ns2,5,6,z\n")
    t = open_table(f)
    assert t.columns == ["stamp", "a", "b", "note"] and t.format == "csv"  # spaces after commas dropped
    assert t.select(["b", "a"], index_column="stamp") == ["b", "a"]
    chunks = list(t.chunks(["b", "a"], chunksize=2, index_column="stamp"))
    assert [list(c.index) for c in chunks] == [["s0", "s1"], ["s2"]]
    whole = pd.concat(chunks)
    # reference: pandas.read_csv of the same file; NaN stays NaN, no row dropped or moved
    ref = pd.read_csv(f, skipinitialspace=True, index_col="stamp")[["b", "a"]].astype(float)
    pd.testing.assert_frame_equal(whole, ref, check_names=False)
    assert all(c.to_numpy().dtype == np.float64 for c in chunks)
    # one float64 block per chunk: to_numpy() hands back that block, no further copy
    assert np.shares_memory(chunks[0].to_numpy(), chunks[0].to_numpy())
    plain = list(t.chunks(["a"], chunksize=2))
    assert [list(c.index) for c in plain] == [[0, 1], [2]]  # 0-based data-row numbers


def test_one_wording_for_files_and_frames(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("a,b,c\n1,2,3\n")
    t = open_table(f)
    msg = r"does not match the model: missing columns \['d'\], extra columns \['c'\]"
    with pytest.raises(InputError, match=f"data file '{f}' " + msg):
        t.select(["a", "b", "d"], what="the model")
    with pytest.raises(InputError, match="frame " + msg):
        select_columns(pd.DataFrame(columns=["a", "b", "c"]).columns, ["a", "b", "d"], where="frame",
                       what="the model")
    with pytest.raises(InputError, match=r"index column 'when' not found"):
        t.select(index_column="when")
    with pytest.raises(InputError, match=r"\['a'\] asked for more than once"):
        t.select(["a", "a"])
    with pytest.raises(InputError, match="extra columns \\['c'\\]"):
        select_columns(["a", "b", "c"], ["b", "a"], where="x", exact=True)
    assert select_columns(["w", "a", "b"], where="x", also=["w"]) == ["a", "b"]
    with pytest.raises(InputError, match="column 'w' not found"):
        select_columns(["a"], where="x", also=["w"])


def test_bad_cell_names_file_line_row_and_column(tmp_path):
    # a blank line and a quoted field over two lines: the line is counted in the file, not guessed
    f = tmp_path / "t.csv"
    f.write_text('a,b,label\n1,2,"two\nlines"\n\n3,4,ok\n5,six,ok\n')
    t = open_table(f)
    with pytest.raises(InputError, match=r"data file '.*t\.csv': column 'b' is not numeric: row 2 "
                                         r"\(0-based data row; line 6 of the file\) holds 'six'"):
        list(t.chunks(["a", "b"], chunksize=1))
    g = tmp_path / "t.csv.gz"
    with gzip.open(g, "wt") as fh:
        fh.write("a,b\n1,2\n3,x\n")
    with pytest.raises(InputError, match=r"row 1 \(0-based data row; line 3 of the file\) holds 'x'"):
        list(open_table(g).chunks(["a", "b"]))


def test_file_problems(tmp_path):
    with pytest.raises(InputError, match="not found"):
        open_table(tmp_path / "none.csv")
    with pytest.raises(InputError, match="is a folder"):
        open_table(tmp_path)
    (tmp_path / "h.tsv").write_text("a\tb\n")
    t = open_table(tmp_path / "h.tsv")
    assert t.format == "tsv" and t.columns == ["a", "b"]
    with pytest.raises(InputError, match="header but no data rows"):
        list(t.chunks(["a"]))
    with pytest.raises(InputError, match="chunksize"):
        t.chunks(["a"], chunksize=0)
