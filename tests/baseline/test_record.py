"""The model remembers its settings and where it came from (issue 20, items 3 and 6)."""

from __future__ import annotations

import hashlib
import json
import re

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.io.modelfile import checksum


@pytest.fixture
def plant(tmp_path):
    rng = np.random.default_rng(44)
    cols = ["inlet_c", "outlet_c", "flow_m3h"]
    ref = pd.DataFrame(rng.normal(size=(120, 3)), columns=cols)
    ref.insert(0, "stamp", pd.date_range("2026-02-02 06:00", periods=120, freq="30min").astype(str))
    ref.loc[5, "flow_m3h"] = -9999
    ref.to_csv(tmp_path / "healthy.csv", index=False)
    text = (tmp_path / "healthy.csv").read_text().splitlines()
    text[9] = text[9].rsplit(",", 1)[0] + ",ERR"  # data row 8: a text sentinel
    (tmp_path / "healthy.csv").write_text("\n".join(text) + "\n")
    test = pd.DataFrame(rng.normal(size=(30, 3)), columns=cols)
    test.insert(0, "stamp", pd.date_range("2026-02-10", periods=30, freq="30min").astype(str))
    test.loc[3, "inlet_c"] = -9999
    test.to_csv(tmp_path / "test.csv", index=False)
    argv = ["baseline", str(tmp_path / "healthy.csv"), "-o", str(tmp_path / "m.json"), "--index-column", "stamp",
            "--na-values=-9999,ERR", "--quiet"]
    assert main(argv) == 0
    return tmp_path, cols, argv


def test_model_file_holds_settings_and_provenance(plant):
    d, cols, argv = plant
    doc = json.loads((d / "m.json").read_text())
    assert doc["format"] == "whiten.baseline/4"
    st, prov = doc["payload"]["settings"], doc["payload"]["provenance"]
    assert st["index_column"] == "stamp" and st["index_kind"] == "time" and st["columns"] == cols
    assert st["na_values"] == ["-9999", "ERR"] and st["estimator"] == "sample"
    raw = (d / "healthy.csv").read_bytes()
    assert prov["source"] == "healthy.csv" and prov["source_bytes"] == len(raw)
    assert prov["source_sha256"] == hashlib.sha256(raw).hexdigest()        # hashlib is the reference
    assert (prov["rows_read"], prov["rows_used"]) == (120, 118)            # two sentinel rows left out
    assert (prov["first_index"], prov["last_index"]) == ("2026-02-02 06:00:00", "2026-02-04 17:30:00")
    assert prov["whiten_version"] == whiten.__version__
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", prov["created_utc"])
    assert prov["call"].startswith("whiten baseline ") and "--na-values=-9999,ERR" in prov["call"]
    b = whiten.load_baseline(d / "m.json")
    assert b.settings == st and b.provenance == prov and b.checksum == doc["sha256"]


def test_api_call_is_recorded():
    x = np.random.default_rng(1).normal(size=(40, 2))
    b = whiten.fit_baseline(x, columns=["a", "b"], estimator="shrinkage")
    prov = b.provenance
    assert prov["source"] == "ndarray" and prov["source_sha256"] is None
    assert prov["call"].startswith("whiten.fit_baseline(<ndarray 40x2>") and "estimator='shrinkage'" in prov["call"]
    assert (prov["rows_read"], prov["rows_used"], prov["first_index"], prov["last_index"]) == (40, 40, 0, 39)


def test_inspect_prints_the_provenance(plant, capsys):
    d, _, _ = plant
    assert main(["inspect", str(d / "m.json")]) == 0
    out = capsys.readouterr().out
    prov = json.loads((d / "m.json").read_text())["payload"]["provenance"]
    assert prov["source_sha256"] in out and "training period: 2026-02-02 06:00:00 .. 2026-02-04 17:30:00" in out
    assert "call: whiten baseline" in out and "index column: 'stamp'" in out and "-9999, ERR" in out


def test_score_uses_the_models_index_column_and_codes(plant, capsys):
    d, cols, _ = plant
    assert main(["score", str(d / "test.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--quiet"]) == 0
    out = capsys.readouterr().out
    s = pd.read_csv(d / "s.csv")
    assert s.columns[0] == "stamp"
    assert s["stamp"].tolist() == pd.read_csv(d / "test.csv")["stamp"].tolist()
    assert s.loc[3, "n_observed"] == 2 and np.isnan(s.loc[3, "dev:inlet_c"])   # -9999 read as missing
    sha = json.loads((d / "m.json").read_text())["sha256"]
    assert f"model: model {sha[:12]}, trained on 2026-02-02 06:00:00 .. 2026-02-04 17:30:00 (healthy.csv)" in out


def test_score_says_when_the_models_index_column_is_absent(plant, capsys):
    d, cols, _ = plant
    pd.read_csv(d / "test.csv").drop(columns="stamp").to_csv(d / "bare.csv", index=False)
    assert main(["score", str(d / "bare.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--quiet"]) == 0
    assert "the model's index column 'stamp' is not in" in capsys.readouterr().out
    assert pd.read_csv(d / "s.csv").columns[0] == "row"


def test_rename_maps_file_columns_and_mismatch_lists_both(plant, capsys):
    d, cols, _ = plant
    t = pd.read_csv(d / "test.csv").rename(columns={"inlet_c": "T1", "outlet_c": "T2"})
    t.to_csv(d / "renamed.csv", index=False)
    assert main(["score", str(d / "renamed.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "r.csv"),
                 "--rename", "T1=inlet_c,T2=outlet_c", "--quiet"]) == 0
    assert main(["score", str(d / "test.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--quiet"]) == 0
    a, b = pd.read_csv(d / "r.csv"), pd.read_csv(d / "s.csv")
    assert np.array_equal(a["d2"].to_numpy(), b["d2"].to_numpy(), equal_nan=True)
    capsys.readouterr()
    assert main(["score", str(d / "renamed.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "x.csv"),
                 "--rename", "T1=inlet_c", "--quiet"]) == 1
    err = capsys.readouterr().err
    assert "missing columns ['outlet_c']" in err and "extra columns ['T2']" in err and "--rename" in err
    assert len(err.strip().splitlines()) == 1 and not (d / "x.csv").exists()


def test_parquet_reads_codes_and_renames_the_same(plant):
    d, cols, _ = plant
    t = pd.read_csv(d / "test.csv").rename(columns={"inlet_c": "T1"})
    t.to_parquet(d / "t.parquet", index=False)
    assert main(["score", str(d / "t.parquet"), "--baseline", str(d / "m.json"), "-o", str(d / "p.csv"),
                 "--rename", "T1=inlet_c", "--quiet"]) == 0
    assert main(["score", str(d / "test.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--quiet"]) == 0
    assert (d / "p.csv").read_bytes() == (d / "s.csv").read_bytes()


def test_date_column_without_index_column_suggests_it(plant, capsys):
    d, _, _ = plant
    assert main(["baseline", str(d / "healthy.csv"), "-o", str(d / "m2.json"), "--na-values=-9999,ERR"]) == 1
    err = capsys.readouterr().err
    assert "--index-column stamp" in err and "--columns" not in err and "line 2" in err


def test_version_3_files_still_read(plant):
    d, _, _ = plant
    doc = json.loads((d / "m.json").read_text())
    pay = {k: v for k, v in doc["payload"].items() if k not in ("settings", "provenance")}
    old = {"format": "whiten.baseline/3", "payload": pay, "sha256": checksum(pay)}
    (d / "m3.json").write_text(json.dumps(old))
    b = whiten.load_baseline(d / "m3.json")
    assert b.settings == {} and b.provenance == {} and b.model_format == "whiten.baseline/3"
    assert np.array_equal(b.mean, whiten.load_baseline(d / "m.json").mean)
