"""`whiten regress` end to end in a temporary folder (through whiten.cli.main)."""

import json

import numpy as np
import pandas as pd
import pytest

from whiten.cli import main

sm = pytest.importorskip("statsmodels.api")


@pytest.fixture()
def kiln_csv(tmp_path):
    """Invented kiln log: two thermocouples in one zone, a fan, a duplicated fan column."""
    rng = np.random.default_rng(12)
    n = 40
    z = rng.standard_normal(n)
    df = pd.DataFrame({"tc_upper": 800 + 30 * (z + 0.01 * rng.standard_normal(n)),
                       "tc_lower": 790 + 30 * (z + 0.01 * rng.standard_normal(n)),
                       "fan_rpm": 1200 + 100 * rng.standard_normal(n)})
    df["energy_kwh"] = 0.02 * df.tc_upper + 0.01 * df.tc_lower - 0.001 * df.fan_rpm + rng.standard_normal(n)
    df["w"] = rng.uniform(0.5, 2.0, n)
    path = tmp_path / "kiln.csv"
    df.to_csv(path, index=False)
    return path, df


def test_fit_report_json_and_chart(kiln_csv, tmp_path, capsys):
    path, df = kiln_csv
    out = tmp_path / "fit.json"
    chart = tmp_path / "fit.png"
    rc = main(["regress", str(path), "--response", "energy_kwh", "--predictors", "tc_upper,tc_lower,fan_rpm",
               "--weights", "w", "-o", str(out), "--chart", str(chart)])
    assert rc == 0
    text = capsys.readouterr().out
    for heading in ("-- coefficients", "-- numerical health --", "digits you can trust", "-- collinearity --"):
        assert heading in text
    assert "'tc_upper' and 'tc_lower' are nearly linearly dependent" in text
    doc = json.loads(out.read_text())
    ref = sm.WLS(df.energy_kwh, sm.add_constant(df[["tc_upper", "tc_lower", "fan_rpm"]]), weights=df.w).fit()
    np.testing.assert_allclose(doc["fit"]["coef"], ref.params, rtol=1e-9)   # statsmodels WLS params
    assert doc["fit"]["names"] == ["(intercept)", "tc_upper", "tc_lower", "fan_rpm"]
    assert chart.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # refuses to overwrite without --force, then replaces with it
    assert main(["regress", str(path), "--response", "energy_kwh", "-o", str(out)]) == 1
    assert "already exists" in capsys.readouterr().err
    assert main(["regress", str(path), "--response", "energy_kwh", "-o", str(out), "--force"]) == 0


def test_ridge_gcv_with_chart(kiln_csv, tmp_path, capsys):
    path, _ = kiln_csv
    out = tmp_path / "ridge.json"
    rc = main(["regress", str(path), "--response", "energy_kwh", "--predictors", "tc_upper,tc_lower,fan_rpm",
               "--ridge", "gcv", "-o", str(out), "--chart", str(tmp_path / "r.png")])
    assert rc == 0
    doc = json.loads(out.read_text())
    assert doc["fit"]["ridge"]["criterion"] == "gcv" and len(doc["fit"]["ridge"]["grid"]) == 61
    assert "ridge (chosen by gcv" in capsys.readouterr().out


def test_dependent_column_named(kiln_csv, tmp_path, capsys):
    path, df = kiln_csv
    df = df.assign(fan_twice=2 * df.fan_rpm)
    p2 = tmp_path / "dup.csv"
    df.to_csv(p2, index=False)
    rc = main(["regress", str(p2), "--response", "energy_kwh", "--predictors", "tc_upper,fan_rpm,fan_twice",
               "-o", str(tmp_path / "d.json")])
    assert rc == 0
    cap = capsys.readouterr()
    assert "'fan_twice' = 2*'fan_rpm'" in cap.out and "set aside" in cap.out
    assert "'fan_twice' set aside" in cap.err  # the RankDeficiencyWarning, one line


def test_errors_are_one_line(kiln_csv, tmp_path, capsys):
    path, df = kiln_csv
    rc = main(["regress", str(path), "--response", "energy_kwh", "--predictors", "tc_upper,nozzle,damper",
               "-o", str(tmp_path / "x.json")])
    err = capsys.readouterr().err
    assert rc == 1 and "missing columns ['nozzle', 'damper']" in err and len(err.strip().splitlines()) == 1
    bad = df.astype({"fan_rpm": object})
    bad.loc[7, "fan_rpm"] = "n/a?"
    p2 = tmp_path / "bad.csv"
    bad.to_csv(p2, index=False)
    rc = main(["regress", str(p2), "--response", "energy_kwh", "-o", str(tmp_path / "x.json")])
    err = capsys.readouterr().err
    assert rc == 1 and "'fan_rpm'" in err and "row 7" in err and len(err.strip().splitlines()) == 1
    rc = main(["regress", str(tmp_path / "absent.csv"), "--response", "y", "-o", str(tmp_path / "x.json")])
    assert rc == 1 and "not found" in capsys.readouterr().err
    assert not (tmp_path / "x.json").exists()


def test_help_has_example(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["regress", "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert "whiten regress kiln_energy.csv --response energy_kwh" in out and "whiten demo" in out
