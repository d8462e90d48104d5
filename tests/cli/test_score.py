"""`whiten score` end to end in temporary folders, and its error cases."""

from __future__ import annotations

import json

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.monitor import score

from ..monitor.conftest import correlated_cov

pytestmark = pytest.mark.skipif(not hasattr(whiten, "load_baseline"), reason="needs whiten.load_baseline")

COLS = ["feed_t", "bed_t", "top_p", "steam", "level"]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("cli")
    rng = np.random.default_rng(77)
    cov = correlated_cov(len(COLS), rng)
    mu = np.array([60.0, 140.0, 1.8, 12.0, 45.0])
    ref = pd.DataFrame(rng.multivariate_normal(mu, cov, size=400), columns=COLS)
    b = whiten.fit_baseline(ref)
    model = b.save(d / "model.json") or d / "model.json"
    new = pd.DataFrame(rng.multivariate_normal(mu, cov, size=1000), columns=COLS)
    new.iloc[100:104, 1] += 6 * np.sqrt(cov[1, 1])
    new.iloc[7] = np.nan
    new.iloc[8, [0, 3]] = np.nan
    new.insert(0, "stamp", [f"s{k:04d}" for k in range(1000)])
    new.to_csv(d / "new.csv", index=False)
    return d, b, new


def _run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_score_end_to_end(files, capsys, tmp_path):
    d, b, new = files
    out = tmp_path / "scores.csv"
    chart = tmp_path / "chart.png"
    code, stdout, err = _run(capsys, "score", str(d / "new.csv"), "--baseline", str(d / "model.json"),
                             "-o", str(out), "--chunksize", "130", "--chart", str(chart),
                             "--index-column", "stamp", "--fdr", "0.05",
                             "--contributions", str(tmp_path / "bars.png"))
    assert code == 0, err
    got = pd.read_csv(out, index_col="stamp", keep_default_na=False, na_values=[""])
    ref = score(b, new.set_index("stamp"), fdr=0.05)
    assert list(got.index) == list(ref.index)  # every row, input order
    # chunked streaming equals the in-memory library call (floats written by repr: exact)
    for c in ["d2", "p_value", "limit", "p_bh", "drop:bed_t", "chain:level", "dev:steam"]:
        assert np.allclose(got[c], ref[c], rtol=1e-14, equal_nan=True), c
    for c in ["alarm", "alarm_fdr", "n_observed"]:
        assert np.array_equal(got[c].to_numpy(), ref[c].to_numpy()), c
    assert got.loc["s0007", "note"] == "no sensor observed: not scored"
    assert chart.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG file signature (PNG specification)
    assert mpimg.imread(chart).ndim == 3
    assert (tmp_path / "bars.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert mpimg.imread(tmp_path / "bars.png").ndim == 3
    assert "scored 1000 rows" in stdout and "alarms at alpha=0.001" in stdout
    assert "significant digits" in stdout
    assert "at s0101" in stdout or "at s0100" in stdout  # an episode peak named by its label
    assert "  bed_t " in stdout  # the leading sensor of an episode
    assert stdout.strip().splitlines()[-1].startswith("Caution: a statistical screen, not a protective function")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bars.png", "chart.png", "scores.csv"]


def test_help_has_examples(capsys):
    with pytest.raises(SystemExit) as ex:
        main(["score", "--help"])
    assert ex.value.code == 0
    assert "examples:" in capsys.readouterr().out


def _one_error_line(code, err, pattern):
    import re

    assert code == 1
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("whiten score: error:"), err
    assert re.search(pattern, lines[0]), lines[0]
    assert "Traceback" not in err


def test_error_cases(files, capsys, tmp_path):
    d, b, new = files
    model = str(d / "model.json")
    o = str(tmp_path / "o.csv")
    code, _, err = _run(capsys, "score", str(tmp_path / "nope.csv"), "--baseline", model, "-o", o)
    _one_error_line(code, err, "not found")
    code, _, err = _run(capsys, "score", str(d / "new.csv"), "--baseline", str(tmp_path / "m.json"), "-o", o)
    _one_error_line(code, err, "model file .* not found")
    new.rename(columns={"level": "lvl"}).to_csv(tmp_path / "renamed.csv", index=False)
    code, _, err = _run(capsys, "score", str(tmp_path / "renamed.csv"), "--baseline", model, "-o", o)
    _one_error_line(code, err, r"missing columns \['level'\], extra columns \['stamp', 'lvl'\]")
    bad = new.drop(columns="stamp").astype(object)
    bad.iloc[503, 2] = "1.8O"
    bad.to_csv(tmp_path / "bad.csv", index=False)
    code, _, err = _run(capsys, "score", str(tmp_path / "bad.csv"), "--baseline", model, "-o", o,
                        "--chunksize", "200")
    _one_error_line(code, err, "'top_p'.*row 503")
    (tmp_path / "empty.csv").write_text("")
    code, _, err = _run(capsys, "score", str(tmp_path / "empty.csv"), "--baseline", model, "-o", o)
    _one_error_line(code, err, "empty")
    (tmp_path / "head.csv").write_text(",".join(COLS) + "\n")
    code, _, err = _run(capsys, "score", str(tmp_path / "head.csv"), "--baseline", model, "-o", o)
    _one_error_line(code, err, "header but no")
    (tmp_path / "exists.csv").write_text("keep")
    code, _, err = _run(capsys, "score", str(d / "new.csv"), "--baseline", model, "-o",
                        str(tmp_path / "exists.csv"))
    _one_error_line(code, err, "already exists.*--force")
    assert (tmp_path / "exists.csv").read_text() == "keep"
    doc = json.loads((d / "model.json").read_text())
    doc["payload"]["mean"][0] += 1.0
    (tmp_path / "tampered.json").write_text(json.dumps(doc))
    code, _, err = _run(capsys, "score", str(d / "new.csv"), "--baseline", str(tmp_path / "tampered.json"), "-o", o)
    _one_error_line(code, err, "(?i)checksum|edited|tamper")
    code, _, err = _run(capsys, "score", str(d / "new.csv"), "--baseline", model, "-o", o, "--alpha", "2")
    _one_error_line(code, err, "alpha")
    assert not (tmp_path / "o.csv").exists()  # nothing half-written by any failure


def test_baseline_score_hook_and_round_trip(files):
    # Baseline.score delegates to whiten.monitor.score; a saved-and-loaded model scores identically
    d, b, new = files
    rows = new.set_index("stamp")
    direct = score(b, rows, alpha=0.01)
    pd.testing.assert_frame_equal(b.score(rows, alpha=0.01), direct)
    loaded = whiten.load_baseline(d / "model.json")
    again = score(loaded, rows, alpha=0.01)
    assert np.allclose(again["d2"], direct["d2"], rtol=1e-13, equal_nan=True)
    assert np.array_equal(again["alarm"], direct["alarm"])


def test_limit_basis_says_which_law_each_limit_uses():
    # the F/Beta laws (Tracy, Young & Mason 1992) assume the unweighted sample estimate; shrinkage and
    # weighted baselines carry a simulated law (whiten.monitor.calibrated)
    rng = np.random.default_rng(8)
    x = rng.standard_normal((120, 3))
    cols = ["a", "b", "c"]
    plain = score(whiten.fit_baseline(x, columns=cols), x[:2]).attrs["limit_basis"]
    assert "F(3, 117)" in plain and "approximate" not in plain
    shr = score(whiten.fit_baseline(x, columns=cols, estimator="shrinkage"), x[:2]).attrs["limit_basis"]
    assert "simulated by parametric bootstrap" in shr and "shrinkage, ledoit-wolf, m=120" in shr
    w = score(whiten.fit_baseline(x, columns=cols, weights=rng.uniform(0.5, 1.5, 120)), x[:2])
    assert "weighted sample covariance" in w.attrs["limit_basis"] and w.attrs["limit_law"] == "simulated"
    known = score(whiten.fit_baseline(x, columns=cols, estimator="shrinkage"), x[:2], phase="known")
    assert "approximate" not in known.attrs["limit_basis"]


def test_chart_time_axis_from_index_column():
    from whiten.cli.score import _time_axis

    t = _time_axis([np.array(["2026-03-02T00:00", "2026-03-02T00:05"], dtype=object)])
    assert t.dtype.kind == "M" and (t[1] - t[0]) == np.timedelta64(5, "m")  # pandas.to_datetime parses ISO 8601
    assert np.array_equal(_time_axis([np.array([3.0, 4.5])]), [3.0, 4.5])
    assert _time_axis([np.array(["s0001", "s0002"], dtype=object)]) is None
    assert _time_axis([]) is None


def test_parquet_input_matches_csv(files, capsys, tmp_path):
    pytest.importorskip("pyarrow")
    d, b, new = files
    new.to_parquet(tmp_path / "new.parquet", index=False)
    code, _, err = _run(capsys, "score", str(tmp_path / "new.parquet"), "--baseline", str(d / "model.json"),
                        "-o", str(tmp_path / "p.csv"), "--chunksize", "333")
    assert code == 0, err
    got = pd.read_csv(tmp_path / "p.csv", index_col="row")
    ref = score(b, new.drop(columns="stamp"))
    assert np.allclose(got["d2"], ref["d2"], rtol=1e-14, equal_nan=True)
