"""`whiten baseline` and `whiten inspect` end to end in temporary folders."""

from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main


@pytest.fixture()
def table(tmp_path):
    rng = np.random.default_rng(51)
    t = rng.normal(size=(600, 3))
    df = pd.DataFrame({"stamp": pd.date_range("2026-03-01", periods=600, freq="min").astype(str),
                       "supply": 42 + 2 * t[:, 0], "return": 36 + 1.8 * t[:, 0] + 0.3 * t[:, 1],
                       "flow": 11 + 0.5 * t[:, 2]})
    df["bypass"] = 0.5 * df["supply"] - 0.25 * df["flow"]  # an invented computed channel
    f = tmp_path / "healthy.csv"
    df.to_csv(f, index=False)
    return f, df


def test_baseline_then_inspect(tmp_path, table, capsys):
    f, df = table
    out = tmp_path / "loop.json"
    rc = main(["baseline", str(f), "-o", str(out), "--columns", "supply,return,flow",
               "--index-column", "stamp", "--chunksize", "128"])
    text = capsys.readouterr().out
    assert rc == 0 and out.exists()
    assert "rows: 600 read, 600 used" in text and "route: shifted Gram" in text and "jitter: none" in text
    b = whiten.load_baseline(out)
    # the file holds the same estimate as numpy.cov of the selected columns
    np.testing.assert_allclose(b.cov, np.cov(df[["supply", "return", "flow"]].to_numpy(), rowvar=False),
                               rtol=1e-12)
    assert main(["inspect", str(out)]) == 0
    text = capsys.readouterr().out
    assert "sensors (3): supply, return, flow" in text
    assert "strongest correlations:" in text and "supply ~ return: r = +0.98" in text


def test_inspect_names_near_redundant_sensors(tmp_path, table, capsys):
    f, df = table
    noisy = df.assign(bypass=df["bypass"] + 1e-5 * np.random.default_rng(2).normal(size=len(df)))
    g = tmp_path / "noisy.csv"
    noisy.to_csv(g, index=False)
    out = tmp_path / "m.json"
    assert main(["baseline", str(g), "-o", str(out), "--index-column", "stamp"]) == 0
    capsys.readouterr()
    assert main(["inspect", str(out), "--tol", "1e-6"]) == 0
    text = capsys.readouterr().out
    assert "near-redundant sensors (tolerance 1e-06):" in text
    # the noise lets the fit pick up a tiny 'return' coefficient too; supply and flow must be named
    assert re.search(r"bypass is a linear combination of supply, (return, )?flow \(unexplained variance", text)


def test_cli_errors_are_one_line(tmp_path, table, capsys):
    f, _ = table
    out = tmp_path / "m.json"
    # exactly dependent column: named, exit 1
    assert main(["baseline", str(f), "-o", str(out), "--index-column", "stamp"]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    # which of the three is called dependent depends on the pivot order; all three are named
    assert len(err) == 1 and re.search(r"(supply|flow|bypass) is a linear combination of", err[0])
    assert all(c in err[0] for c in ("supply", "flow", "bypass"))
    assert not out.exists()
    assert main(["baseline", str(tmp_path / "absent.csv"), "-o", str(out)]) == 1
    assert "not found" in capsys.readouterr().err
    assert main(["baseline", str(f), "-o", str(out), "--columns", "supply,nope"]) == 1
    assert "missing columns ['nope']" in capsys.readouterr().err
    assert main(["baseline", str(f), "-o", str(out), "--columns", "supply,return,flow", "--index-column",
                 "stamp"]) == 0
    capsys.readouterr()
    assert main(["baseline", str(f), "-o", str(out), "--columns", "supply,flow"]) == 1
    assert "already exists" in capsys.readouterr().err
    doc = json.loads(out.read_text())
    doc["payload"]["n"] = 599
    out.write_text(json.dumps(doc))
    assert main(["inspect", str(out)]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "SHA-256" in err[0]


def test_robust_and_shrinkage_accounts(tmp_path, table, capsys):
    f, df = table
    bad = df.copy()
    bad.loc[[10, 20, 30], "flow"] += 25.0
    g = tmp_path / "upset.csv"
    bad.to_csv(g, index=False)
    assert main(["baseline", str(g), "-o", str(tmp_path / "r.json"), "--columns", "supply,return,flow",
                 "--index-column", "stamp", "--estimator", "robust"]) == 0
    text = capsys.readouterr().out
    assert "left out as outliers" in text and "2026-03-01 00:10:00" in text
    assert main(["baseline", str(g), "-o", str(tmp_path / "s.json"), "--columns", "supply,return,flow",
                 "--estimator", "shrinkage", "--shrinkage", "oas"]) == 0
    assert "intensity" in capsys.readouterr().out


def test_help_has_examples(capsys):
    for cmd in ("baseline", "inspect"):
        with pytest.raises(SystemExit) as e:
            main([cmd, "--help"])
        assert e.value.code == 0
        assert "examples:" in capsys.readouterr().out


def test_weight_column(tmp_path, table, capsys):
    f, df = table
    w = (np.arange(len(df)) % 3).astype(int)
    g = tmp_path / "weighted.csv"
    df.assign(count=w).to_csv(g, index=False)
    out = tmp_path / "w.json"
    assert main(["baseline", str(g), "-o", str(out), "--columns", "supply,return,flow", "--index-column",
                 "stamp", "--weight-column", "count"]) == 0
    assert "divisor sum(w) - 1" in capsys.readouterr().out
    b = whiten.load_baseline(out)
    # numpy.cov with integer frequency weights
    ref = np.cov(df[["supply", "return", "flow"]].to_numpy(), rowvar=False, fweights=w)
    np.testing.assert_allclose(b.cov, ref, rtol=1e-12)
