"""Output tables follow their name's format (issue 20, item 1): .csv, .tsv, .csv.gz, .tsv.gz, .parquet."""

from __future__ import annotations

import gzip
import sys

import numpy as np
import pandas as pd
import pytest

from whiten.cli import main
from whiten.errors import InputError
from whiten.io.writers import open_output, output_format


@pytest.fixture
def files(tmp_path):
    rng = np.random.default_rng(20)
    ref = pd.DataFrame(rng.normal(size=(80, 3)), columns=["a", "b", "c"])
    ref.insert(0, "stamp", pd.date_range("2026-01-01", periods=80, freq="h").astype(str))
    ref.to_csv(tmp_path / "ref.csv", index=False)
    new = ref.copy()
    new.loc[10, "a"] = 9.0
    new.loc[20, "note"] = "x"  # a text column not in the model
    new.to_csv(tmp_path / "new.csv", index=False)
    assert main(["baseline", str(tmp_path / "ref.csv"), "-o", str(tmp_path / "m.json"),
                 "--index-column", "stamp"]) == 0
    return tmp_path


def _score(d, out, *extra):
    return main(["score", str(d / "new.csv"), "--baseline", str(d / "m.json"), "-o", str(out), "--quiet", *extra])


def test_every_format_reads_back_to_the_same_table(files):
    """pandas (an outside reader) opens each format and finds the same values and types."""
    d = files
    assert _score(d, d / "s.csv") == 0
    ref = pd.read_csv(d / "s.csv")
    assert ref["alarm"].dtype == bool
    for name, read in [("s.tsv", lambda f: pd.read_csv(f, sep="\t")),
                       ("s.csv.gz", pd.read_csv),
                       ("s.tsv.gz", lambda f: pd.read_csv(f, sep="\t")),
                       ("s.parquet", pd.read_parquet)]:
        assert _score(d, d / name) == 0
        got = read(d / name)
        assert list(got.columns) == list(ref.columns), name
        # an empty text cell reads back as NaN from text, "" from Parquet: the same empty field
        pd.testing.assert_frame_equal(_texts(got), _texts(ref), check_dtype=False, obj=name)
        assert got["alarm"].dtype == bool, name
    assert gzip.decompress((d / "s.csv.gz").read_bytes()) == (d / "s.csv").read_bytes()


def _texts(frame):
    out = frame.copy()
    for c in out.columns:
        if out[c].dtype.kind not in "biuf" or out[c].isna().all():
            out[c] = out[c].fillna("").astype(str)
    return out


def test_gzip_bytes_do_not_depend_on_the_time(files):
    d = files
    assert _score(d, d / "one.csv.gz") == 0
    assert _score(d, d / "two.csv.gz") == 0
    assert (d / "one.csv.gz").read_bytes() == (d / "two.csv.gz").read_bytes()


@pytest.mark.parametrize("name", ["scores.xlsx", "scores", "scores.json", ".csv"])
def test_unknown_ending_is_refused_before_any_work(files, capsys, name):
    d = files
    assert _score(d, d / name) == 1
    err = capsys.readouterr().err
    assert "cannot tell the output format" in err and ".parquet" in err and len(err.strip().splitlines()) == 1
    assert not (d / name).exists()


def test_parquet_without_pyarrow_is_one_line_before_work(files, capsys, monkeypatch):
    d = files
    monkeypatch.setitem(sys.modules, "pyarrow", None)  # `import pyarrow` now raises ImportError
    monkeypatch.setitem(sys.modules, "pyarrow.parquet", None)
    assert _score(d, d / "s.parquet") == 1
    err = capsys.readouterr().err
    assert "pip install 'whiten[parquet]'" in err and len(err.strip().splitlines()) == 1
    assert not (d / "s.parquet").exists()
    with pytest.raises(InputError, match="needs pyarrow"):
        output_format("x.parquet")


_NO_PYARROW = """
import sys
sys.modules["pyarrow"] = None  # import pyarrow now fails, before pandas is imported
sys.modules["pyarrow.parquet"] = None
from whiten.cli import main
sys.exit(main(sys.argv[1:]))
"""


def test_csv_bytes_do_not_depend_on_pyarrow(files):
    """A fresh interpreter where pyarrow cannot be imported writes the same bytes."""
    import subprocess

    d = files
    assert _score(d, d / "with.csv") == 0
    args = ["score", str(d / "new.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "without.csv"), "--quiet"]
    res = subprocess.run([sys.executable, "-c", _NO_PYARROW, *args], capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    assert (d / "with.csv").read_bytes() == (d / "without.csv").read_bytes()
    text = (d / "with.csv").read_text()
    assert "true" in text or "false" in text
    assert "True" not in text and "False" not in text
    res = subprocess.run([sys.executable, "-c", _NO_PYARROW, *args[:-2], str(d / "w.parquet")],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 1 and "pip install 'whiten[parquet]'" in res.stderr
    assert len(res.stderr.strip().splitlines()) == 1 and not (d / "w.parquet").exists()


def test_loglik_follows_the_name_too(files):
    d = files
    assert main(["loglik", str(d / "new.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "ll.tsv")]) == 0
    got = pd.read_csv(d / "ll.tsv", sep="\t")
    assert list(got.columns) == ["row", "loglik", "d2", "n_observed"] and len(got) == 80
    assert main(["loglik", str(d / "new.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "ll.dat")]) == 1


def test_writer_in_python():
    import io

    buf = io.BytesIO()
    from whiten.io.writers import TableWriter

    w = TableWriter(buf, "csv")
    w.write(pd.DataFrame({"v": [1.0, np.nan], "flag": [True, False], "t": ["a,b", 'q"']},
                         index=pd.Index([0, 1], name="row")))
    w.close()
    assert buf.getvalue().decode() == 'row,v,flag,t\n0,1.0,true,"a,b"\n1,,false,"q"""\n'
    assert open_output  # the context manager is the public entry point


@pytest.mark.parametrize("head, word", [(b"\x89PNG\r\n\x1a\n\x00\x00", "a PNG image"), (b"PAR1\x00\xff", "a Parquet table"),
                                        (b"\x1f\x8b\x08\x00\xff", "gzip-compressed data")])
def test_inspect_names_binary_files(tmp_path, capsys, head, word):
    """A binary file handed to inspect is named by its leading bytes (the formats' published signatures)."""
    (tmp_path / "x.bin").write_bytes(head + b"\xff" * 20)
    assert main(["inspect", str(tmp_path / "x.bin")]) == 1
    err = capsys.readouterr().err
    assert f"it looks like {word}" in err and len(err.strip().splitlines()) == 1
