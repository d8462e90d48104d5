"""ScoreDigest: a streamed run's record equals what pandas computes on the whole score table.

The reference for every check is the full in-memory score table
(``whiten.monitor.score``) summarised with plain pandas operations (sorting,
groupby), not with the digest's own code.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.errors import InputError
from whiten.monitor import ScoreDigest, Scorer, score

from .conftest import correlated_cov

COLS = ["inlet", "outlet", "bearing", "casing"]


@pytest.fixture(scope="module")
def run():
    rng = np.random.default_rng(404)
    cov = correlated_cov(len(COLS), rng)
    mu = np.array([20.0, 35.0, 60.0, 41.0])
    ref = pd.DataFrame(rng.multivariate_normal(mu, cov, size=300), columns=COLS)
    b = whiten.fit_baseline(ref)
    new = rng.multivariate_normal(mu, cov, size=2000)
    new[[150, 151, 1333]] += 7 * np.sqrt(np.diag(cov))  # three clear excursions
    new[40] = np.nan  # nothing observed
    new[41, [0, 2]] = np.nan  # two sensors missing
    new[1500:1502, 1] -= 9 * np.sqrt(cov[1, 1])
    return b, new


def _digest_in_chunks(b, x, sizes, **kw):
    sc = Scorer(b, alpha=0.001)
    dig = ScoreDigest(sc.columns, attrs=sc.attrs(), **kw)
    start = 0
    for k in sizes:
        part = x[start:start + k]
        dig.add(sc.score_array(part), index=pd.RangeIndex(start, start + len(part)))
        start += len(part)
    assert start == x.shape[0]
    return dig


def test_counts_worst_rows_and_leaders_equal_the_whole_table(run):
    b, x = run
    full = score(b, x, alpha=0.001)  # the whole table, in memory
    dig = _digest_in_chunks(b, x, [333, 1, 700, 966], worst=5)
    assert dig.n_rows == len(full)
    assert dig.n_alarm == int(full["alarm"].sum())
    assert dig.n_scored == int(full["d2"].notna().sum())
    assert dig.n_none == int((full["n_observed"] == 0).sum()) == 1
    assert dig.n_partial == int(((full["n_observed"] > 0) & (full["n_observed"] < len(COLS))).sum()) == 1
    assert dig.d2_max == pytest.approx(float(full["d2"].max()), rel=0, abs=0)
    # the five smallest p-values, larger d2 first on ties, by a pandas sort of the whole table
    ref = full.dropna(subset=["p_value"]).sort_values(["p_value", "d2"], ascending=[True, False], kind="stable")
    assert list(dig.worst_by_p().index) == list(ref.index[:5])
    ref_d2 = full.dropna(subset=["d2"]).sort_values("d2", ascending=False, kind="stable")
    assert list(dig.worst_by_d2().index) == list(ref_d2.index[:5])
    # the kept rows are whole: every column equal to the table's
    kept = dig.worst_by_p()
    pd.testing.assert_frame_equal(kept[full.columns], full.loc[kept.index], check_names=False)
    lead = full.loc[full["alarm"], "top_contributor"].value_counts()
    assert dict(dig.leaders) == {str(k): int(v) for k, v in lead.items()}


def test_trace_is_every_row_until_the_cap_then_pooled_maxima(run):
    b, x = run
    full = score(b, x, alpha=0.001)
    exact = _digest_in_chunks(b, x, [2000], chart_points=5000).trace()
    assert exact.attrs["rows_per_point"] == 1
    np.testing.assert_array_equal(exact["d2"].to_numpy(), full["d2"].to_numpy())

    dig = _digest_in_chunks(b, x, [7, 500, 493, 1000], chart_points=100)
    tr = dig.trace()
    w = dig.rows_per_point
    assert w == 32 and len(tr) <= 100  # 2000 rows need bins of 32 (2000/32 = 62.5 points)
    groups = full.assign(bin=np.arange(len(full)) // w).groupby("bin")
    np.testing.assert_array_equal(tr["d2"].to_numpy(), groups["d2"].max().to_numpy())
    np.testing.assert_array_equal(tr["limit"].to_numpy(), groups["limit"].min().to_numpy())
    np.testing.assert_array_equal(tr["alarm"].to_numpy(), groups["alarm"].any().to_numpy())
    assert tr.attrs["n_alarm"] == int(full["alarm"].sum())  # the exact count, not the number of points
    # every alarm row sits in a bin drawn as an alarm
    for r in np.flatnonzero(full["alarm"].to_numpy()):
        assert bool(tr["alarm"].iloc[r // w])


def test_from_frame_and_bad_input(run):
    b, x = run
    full = score(b, x[:50], alpha=0.001)
    dig = ScoreDigest.from_frame(full)
    assert dig.n_rows == 50 and dig.rows_per_point == 1
    with pytest.raises(InputError, match="missing columns"):
        ScoreDigest.from_frame(full.drop(columns=["p_value"]))
    with pytest.raises(InputError, match="positive"):
        ScoreDigest(COLS, worst=0)


def test_cli_report_is_built_without_reading_the_scores_back(run, tmp_path, monkeypatch, capsys):
    b, x = run
    b.save(tmp_path / "m.json")
    pd.DataFrame(x, columns=COLS).to_csv(tmp_path / "new.csv", index=False)

    out_csv = tmp_path / "s.csv"
    real_read_csv = pd.read_csv

    def no_read_back(path, *a, **k):  # the scores file must not be read again to build the report
        assert str(path) != str(out_csv), "the score table was read back"
        return real_read_csv(path, *a, **k)

    monkeypatch.setattr(pd, "read_csv", no_read_back)
    rc = main(["score", str(tmp_path / "new.csv"), "--baseline", str(tmp_path / "m.json"),
               "-o", str(tmp_path / "s.csv"), "--alpha", "0.001", "--report", str(tmp_path / "r.html"),
               "--chart", str(tmp_path / "c.png"), "--chart-points", "64", "--chunksize", "300"])
    monkeypatch.undo()
    out = capsys.readouterr().out
    assert rc == 0
    written = pd.read_csv(tmp_path / "s.csv", index_col=0)
    n_alarm = int(written["alarm"].sum())
    assert f"alarms at alpha=0.001: {n_alarm} " in out
    assert "each point: the largest d2 of 32 consecutive rows" in out
    from tests.report.page import check_self_contained

    html = (tmp_path / "r.html").read_text(encoding="utf-8")
    page = check_self_contained(html)
    assert int(page.tiles["alarms"]["value"]) == n_alarm >= 3
    worst = written[written["p_value"].notna()].sort_values(["p_value", "d2"], ascending=[True, False]).head(5)
    assert page.tables["worst-rows"]["row_heads"] == [str(i) for i in worst.index]
    assert "each point is the largest of 32 consecutive rows" in html

