"""The reader's and the writer's contract of issue 14: separators, decimal marks, one CSV style,
output permissions, and no temporary file after SIGTERM."""

from __future__ import annotations

import io
import os
import signal
import sys

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.io.tables import open_table, write_csv_chunk


def test_european_export_reads_the_values_pandas_reads(tmp_path):
    """sep=';', decimal=',' gives the numbers pandas.read_csv(sep=';', decimal=',') gives (reference: pandas)."""
    p = tmp_path / "eu.csv"
    p.write_text("a;b\n0,5;-1,25\n3;\n1e-3;2,5E2\n", encoding="utf-8")
    got = pd.concat(list(open_table(p, sep=";", decimal=",").chunks(["a", "b"])))
    ref = pd.read_csv(p, sep=";", decimal=",")
    np.testing.assert_array_equal(got.to_numpy(), ref.to_numpy(dtype=float))


def test_plain_file_with_quotes_is_checked_by_the_csv_module(tmp_path):
    """A quoted separator is one field (reference: the csv module's quoting rules, RFC 4180)."""
    p = tmp_path / "q.csv"
    p.write_text('t,a\n"x,y",1\n"z",2\n', encoding="utf-8")
    got = pd.concat(list(open_table(p).chunks(["a"], index_column="t")))
    assert list(got.index) == ["x,y", "z"] and got["a"].tolist() == [1.0, 2.0]


def _frame():
    idx = pd.Index(["r,1", 'q"2', "s3"], name="stamp")
    return pd.DataFrame({"d2": [0.1, np.nan, 1e-7], "alarm": [True, False, True], "n": [3, 2, 1],
                         "note": ["", "two, words", "x"]}, index=idx)


def test_score_csv_style_is_the_same_without_pyarrow(monkeypatch):
    """Byte-identical output with pyarrow importable and with it blocked (sys.modules entry None)."""
    a, b = io.StringIO(), io.StringIO()
    write_csv_chunk(_frame(), a, header=True)
    back = pd.read_csv(io.StringIO(a.getvalue()), index_col=0, keep_default_na=False, na_values=[""])
    assert back["alarm"].tolist() == [True, False, True]  # pandas reads the spelling back as booleans
    monkeypatch.setitem(sys.modules, "pyarrow", None)
    monkeypatch.setitem(sys.modules, "pyarrow.csv", None)
    write_csv_chunk(_frame(), b, header=True)
    assert a.getvalue() == b.getvalue()
    # the documented style: true/false, empty NaN, minimal quoting as the csv module writes it
    assert a.getvalue().splitlines() == ["stamp,d2,alarm,n,note", '"r,1",0.1,true,3,', '"q""2",,false,2,"two, words"',
                                        "s3,1e-07,true,1,x"]


def test_outputs_follow_the_umask(tmp_path):
    """A written file gets 0666 & ~umask (POSIX open(2) convention), not the temporary file's 0600."""
    old = os.umask(0o027)
    try:
        whiten.io.atomic.write_text(tmp_path / "x.txt", "hi")
    finally:
        os.umask(old)
    assert (tmp_path / "x.txt").stat().st_mode & 0o777 == 0o640


@pytest.mark.skipif(not hasattr(signal, "SIGTERM") or os.name != "posix", reason="POSIX signals")
def test_sigterm_leaves_no_temporary_file(tmp_path, monkeypatch, capsys):
    """SIGTERM in the middle of writing: exit 143, no output, no .part file."""
    import whiten.io.tables as tables

    rng = np.random.default_rng(3)
    pd.DataFrame(rng.normal(size=(50, 2)), columns=["a", "b"]).to_csv(tmp_path / "ref.csv", index=False)
    assert main(["baseline", str(tmp_path / "ref.csv"), "-o", str(tmp_path / "m.json")]) == 0
    real = tables.write_csv_chunk

    def write_then_die(frame, fh, *, header, sep=","):
        real(frame, fh, header=header, sep=sep)
        os.kill(os.getpid(), signal.SIGTERM)

    monkeypatch.setattr(tables, "write_csv_chunk", write_then_die)
    code = main(["score", str(tmp_path / "ref.csv"), "--baseline", str(tmp_path / "m.json"),
                 "-o", str(tmp_path / "s.csv"), "--chunksize", "10"])
    assert code == 143 and "terminated" in capsys.readouterr().err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.json", "ref.csv"]
