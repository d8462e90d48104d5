"""``whiten loglik`` end to end with --mean/--cov in temporary folders."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from whiten.cli import main

NAMES = ["inlet", "outlet", "flow"]
MEAN = np.array([20.0, 35.0, 1.2])
COV = np.array([[0.5, 0.3, 0.01], [0.3, 0.8, 0.02], [0.01, 0.02, 0.04]])


def _write_inputs(tmp_path, mean_layout="row"):
    rng = np.random.default_rng(17)
    x = rng.multivariate_normal(MEAN, COV, size=12)
    x[3, 1] = np.nan
    x[7, [0, 2]] = np.nan
    x[9, :] = np.nan
    data = pd.DataFrame(x, columns=NAMES)
    data.insert(0, "batch", [f"b{i}" for i in range(12)])  # extra text column, ignored
    data.to_csv(tmp_path / "data.csv", index=False)
    if mean_layout == "row":
        pd.DataFrame([MEAN[[2, 0, 1]]], columns=[NAMES[i] for i in (2, 0, 1)]).to_csv(tmp_path / "mean.csv",
                                                                                      index=False)
    else:
        pd.DataFrame({"mean": MEAN}).to_csv(tmp_path / "mean.csv", index=False)
    pd.DataFrame(COV, columns=NAMES).to_csv(tmp_path / "cov.csv", index=False)
    return x


@pytest.mark.parametrize("layout", ["row", "column"])
def test_loglik_mean_cov_end_to_end(tmp_path, capsys, layout):
    x = _write_inputs(tmp_path, layout)
    out = tmp_path / "ll.csv"
    code = main(["loglik", str(tmp_path / "data.csv"), "--mean", str(tmp_path / "mean.csv"),
                 "--cov", str(tmp_path / "cov.csv"), "-o", str(out)])
    assert code == 0
    res = pd.read_csv(out)
    assert list(res.columns) == ["row", "loglik", "d2", "n_observed"]
    assert len(res) == 12
    total = 0.0
    for i, row in enumerate(x):
        obs = ~np.isnan(row)
        if not obs.any():
            assert np.isnan(res.loglik[i]) and res.n_observed[i] == 0
            continue
        # the marginal of a Gaussian keeps the sub-vector of the mean and the
        # sub-matrix of the covariance (textbook fact); density from scipy.stats
        ref = stats.multivariate_normal(MEAN[obs], COV[np.ix_(obs, obs)]).logpdf(row[obs])
        assert res.loglik[i] == pytest.approx(ref, rel=1e-12)
        assert res.n_observed[i] == obs.sum()
        total += ref
    printed = capsys.readouterr().out
    assert "over 11 of 12 rows" in printed and "2 with missing values" in printed
    value = float(printed.split("total log-likelihood ")[1].split()[0])
    assert value == pytest.approx(total, rel=1e-9)


def test_loglik_refuses_overwrite_then_force(tmp_path, capsys):
    _write_inputs(tmp_path)
    out = tmp_path / "ll.csv"
    out.write_text("keep me\n")
    args = ["loglik", str(tmp_path / "data.csv"), "--mean", str(tmp_path / "mean.csv"),
            "--cov", str(tmp_path / "cov.csv"), "-o", str(out)]
    assert main(args) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "already exists" in err[0] and "--force" in err[0]
    assert out.read_text() == "keep me\n"
    assert main(args + ["--force"]) == 0
    assert out.read_text().startswith("row,loglik")


@pytest.mark.parametrize("edit, message", [
    (lambda p: pd.DataFrame(COV[:2], columns=NAMES).to_csv(p / "cov.csv", index=False), "square"),
    (lambda p: pd.DataFrame([[1.0, 2.0, 3.0]], columns=["inlet", "outlet", "speed"]).to_csv(
        p / "mean.csv", index=False), r"missing columns \['flow'\], extra columns \['speed'\]"),
    (lambda p: pd.DataFrame(np.diag([1.0, -1.0, 1.0]), columns=NAMES).to_csv(p / "cov.csv", index=False),
     "negative"),
    (lambda p: pd.DataFrame({"inlet": [1.0], "outlet": [2.0]}).to_csv(p / "data.csv", index=False),
     "flow"),
    (lambda p: (p / "cov.csv").write_text("inlet,outlet,flow\n1,0,0\n0,x,0\n0,0,1\n"), "row 1, column 'outlet'"),
    (lambda p: (p / "mean.csv").unlink(), "not found"),
])
def test_loglik_errors_are_one_line_exit_1(tmp_path, capsys, edit, message):
    _write_inputs(tmp_path)
    edit(tmp_path)
    code = main(["loglik", str(tmp_path / "data.csv"), "--mean", str(tmp_path / "mean.csv"),
                 "--cov", str(tmp_path / "cov.csv"), "-o", str(tmp_path / "ll.csv")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 1
    assert len(err) == 1 and err[0].startswith("whiten loglik: error:")
    assert pytest.importorskip("re").search(message, err[0]), err[0]
    assert not (tmp_path / "ll.csv").exists()


def test_loglik_mean_without_cov(tmp_path, capsys):
    _write_inputs(tmp_path)
    code = main(["loglik", str(tmp_path / "data.csv"), "--mean", str(tmp_path / "mean.csv"),
                 "-o", str(tmp_path / "ll.csv")])
    assert code == 1
    assert "--mean needs --cov" in capsys.readouterr().err


def test_loglik_baseline_missing_loader_is_clear(tmp_path, capsys, monkeypatch):
    import whiten

    monkeypatch.delattr(whiten, "load_baseline", raising=False)
    monkeypatch.delitem(whiten._LAZY, "load_baseline", raising=False)  # names load lazily (PEP 562)
    _write_inputs(tmp_path)
    code = main(["loglik", str(tmp_path / "data.csv"), "--baseline", str(tmp_path / "m.json"),
                 "-o", str(tmp_path / "ll.csv")])
    assert code == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "load_baseline is missing" in err[0]


def test_loglik_names_a_bad_data_cell(tmp_path, capsys):
    # the data table goes through whiten.io.tables: file, line, data row and column named
    _write_inputs(tmp_path)
    pd.DataFrame({"inlet": [1.0, 2.0], "outlet": [1.0, "warm"], "flow": [1.0, 1.0]}).to_csv(
        tmp_path / "bad.csv", index=False)
    assert main(["loglik", str(tmp_path / "bad.csv"), "--mean", str(tmp_path / "mean.csv"),
                 "--cov", str(tmp_path / "cov.csv"), "-o", str(tmp_path / "b.csv")]) == 1
    err = capsys.readouterr().err
    assert "column 'outlet' is not numeric: row 1 (0-based data row; line 3 of the file) holds 'warm'" in err
    assert not (tmp_path / "b.csv").exists()


def test_loglik_with_baseline_file(tmp_path, capsys):
    import whiten

    if not (hasattr(whiten, "fit_baseline") and hasattr(whiten, "load_baseline")):
        pytest.skip("baseline model files are not in this build")
    rng = np.random.default_rng(5)
    ref_rows = pd.DataFrame(rng.multivariate_normal(MEAN, COV, size=200), columns=NAMES)
    whiten.fit_baseline(ref_rows).save(tmp_path / "m.json")
    b = whiten.load_baseline(tmp_path / "m.json")
    x = _write_inputs(tmp_path)
    out = tmp_path / "ll.csv"
    assert main(["loglik", str(tmp_path / "data.csv"), "--baseline", str(tmp_path / "m.json"), "-o", str(out)]) == 0
    res = pd.read_csv(out)
    ref = stats.multivariate_normal(b.mean, b.factor.matrix()).logpdf(x[0])  # scipy.stats reference
    assert res.loglik[0] == pytest.approx(ref, rel=1e-10)
