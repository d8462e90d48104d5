"""Alarm episodes (issue 20, item 2): the gap rule and every field, against a hand-built alarm sequence and
against a plain re-reading of the scores themselves."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.errors import InputError
from whiten.monitor.episodes import EPISODE_COLUMNS, EpisodeTracker, episodes


def _cols(alarm, d2, drops):
    out = {"d2": np.asarray(d2, float), "p_value": 1.0 / (1.0 + np.asarray(d2, float)),
           "alarm": np.asarray(alarm, bool)}
    for name, v in drops.items():
        out[f"drop:{name}"] = np.asarray(v, float)
    return out


# rows:      0  1  2  3  4  5  6  7  8  9 10 11 12 13
ALARM = [0, 1, 1, 0, 0, 1, 0, 0, 0, 1, 0, 0, 0, 0]
D2 = [1, 30, 50, 2, 3, 40, 1, 1, 1, 60, 1, 1, 1, 1]


@pytest.mark.parametrize("gap, expected", [
    # (first_row, last_row, rows, alarm_rows, peak_row) worked out by hand from ALARM and D2
    (0, [(1, 2, 2, 2, 2), (5, 5, 1, 1, 5), (9, 9, 1, 1, 9)]),
    (1, [(1, 2, 2, 2, 2), (5, 5, 1, 1, 5), (9, 9, 1, 1, 9)]),
    (2, [(1, 5, 5, 3, 2), (9, 9, 1, 1, 9)]),   # rows 3-4: two quiet rows join
    (3, [(1, 9, 9, 4, 9)]),                     # rows 6-8: three quiet rows join
])
def test_gap_rule_on_a_hand_built_sequence(gap, expected):
    drops = {"a": np.array(D2) * 0.7, "b": np.array(D2) * 0.2, "c": np.full(14, np.nan)}
    t = EpisodeTracker(["a", "b", "c"], gap=gap)
    t.add(_cols(ALARM, D2, drops))
    got = [(e["first_row"], e["last_row"], e["rows"], e["alarm_rows"], e["peak_row"]) for e in t.records()]
    assert got == expected
    for e in t.records():
        assert (e["lead_1"], e["lead_2"], e["lead_3"]) == ("a", "b", "")  # an unobserved sensor never leads
        assert e["share_1"] == pytest.approx(0.7) and e["share_2"] == pytest.approx(0.2)
        assert np.isnan(e["share_3"])


@pytest.mark.parametrize("cut", [1, 2, 3, 5, 6, 9, 10, 13])
def test_chunk_boundaries_do_not_change_episodes(cut):
    drops = {"a": np.array(D2) * 0.5, "b": np.array(D2) * 0.1}
    whole = EpisodeTracker(["a", "b"], gap=2)
    whole.add(_cols(ALARM, D2, drops))
    parts = EpisodeTracker(["a", "b"], gap=2)
    labels = pd.Index([f"t{i}" for i in range(14)])
    for sl in (slice(0, cut), slice(cut, 14)):
        parts.add({k: v[sl] for k, v in _cols(ALARM, D2, drops).items()}, index=labels[sl])
    a, b = whole.records(), parts.records()
    assert [(e["first_row"], e["last_row"], e["peak_row"], e["alarm_rows"]) for e in a] == \
        [(e["first_row"], e["last_row"], e["peak_row"], e["alarm_rows"]) for e in b]
    assert [e["start"] for e in b] == [f"t{e['first_row']}" for e in b]
    assert [e["peak"] for e in b] == [f"t{e['peak_row']}" for e in b]


def test_no_alarm_gives_an_empty_table_with_the_columns():
    t = EpisodeTracker(["a"], gap=2)
    t.add(_cols([0, 0], [1, 2], {"a": [1, 2]}))
    df = t.frame()
    assert len(df) == 0 and ["episode", *df.columns] == EPISODE_COLUMNS


@pytest.mark.parametrize("bad", [-1, 1.5, "2", True])
def test_gap_must_be_a_whole_number(bad):
    with pytest.raises(InputError, match="whole number"):
        EpisodeTracker(["a"], gap=bad)


def _plain_episodes(scores: pd.DataFrame, gap: int, sensors):
    """The episodes by a plain loop over the score table (an independent reading of the rule)."""
    out, cur, quiet = [], None, 0
    for pos, (_, r) in enumerate(scores.iterrows()):
        if r["alarm"]:
            if cur is not None and quiet <= gap:
                cur["last"] = pos
                cur["n"] += 1
                if r["d2"] > cur["peak_d2"]:
                    cur.update(peak=pos, peak_d2=r["d2"])
            else:
                if cur is not None:
                    out.append(cur)
                cur = {"first": pos, "last": pos, "n": 1, "peak": pos, "peak_d2": r["d2"]}
            quiet = 0
        else:
            quiet += 1
    if cur is not None:
        out.append(cur)
    for e in out:
        row = scores.iloc[e["peak"]]
        drops = {s: row[f"drop:{s}"] for s in sensors}
        e["lead"] = max(drops, key=lambda s: drops[s])
        e["share"] = drops[e["lead"]] / row["d2"]
    return out


@pytest.fixture(scope="module")
def station(tmp_path_factory):
    d = tmp_path_factory.mktemp("station")
    rng = np.random.default_rng(2026)
    cols = ["suction_bar", "discharge_bar", "bearing_mm_s"]
    cov = [[1.0, 0.6, 0.1], [0.6, 1.0, 0.2], [0.1, 0.2, 1.0]]
    stamps = pd.date_range("2026-05-04", periods=400, freq="15min").astype(str)
    ref = pd.DataFrame(rng.multivariate_normal(np.zeros(3), cov, 400), columns=cols)
    ref.insert(0, "stamp", stamps)
    ref.to_csv(d / "healthy.csv", index=False)
    test = pd.DataFrame(rng.multivariate_normal(np.zeros(3), cov, 600), columns=cols)
    test.loc[120:131, "bearing_mm_s"] += 7.0            # a sudden fault
    test.loc[140, "suction_bar"] -= 9.0                 # one spike
    test.loc[400:, "discharge_bar"] += np.linspace(0, 9, 200)   # a slow drift
    test.insert(0, "stamp", pd.date_range("2026-05-12", periods=600, freq="15min").astype(str))
    test.to_csv(d / "test.csv", index=False)
    assert main(["baseline", str(d / "healthy.csv"), "-o", str(d / "m.json"), "--index-column", "stamp",
                 "--quiet"]) == 0
    return d, cols


@pytest.mark.parametrize("gap", [0, 2, 5])
def test_episodes_agree_with_the_scores_themselves(station, gap, capsys):
    d, cols = station
    assert main(["score", str(d / "test.csv"), "--baseline", str(d / "m.json"), "-o", str(d / f"s{gap}.csv"),
                 "--index-column", "stamp", "--episodes", str(d / f"e{gap}.csv"), "--episode-gap", str(gap),
                 "--chunksize", "77", "--force", "--quiet"]) == 0
    printed = capsys.readouterr().out
    scores = pd.read_csv(d / f"s{gap}.csv", index_col=0)
    eps = pd.read_csv(d / f"e{gap}.csv")
    want = _plain_episodes(scores, gap, cols)
    assert len(eps) == len(want) > 0
    assert f"alarm episodes (runs of alarms, joined across gaps of up to {gap} quiet row(s)): {len(want)}" in printed
    for (_, e), w in zip(eps.iterrows(), want):
        assert (e["first_row"], e["last_row"], e["alarm_rows"], e["peak_row"]) == (w["first"], w["last"], w["n"],
                                                                                  w["peak"])
        assert e["rows"] == w["last"] - w["first"] + 1
        assert e["start"] == scores.index[w["first"]] and e["end"] == scores.index[w["last"]]
        assert e["peak"] == scores.index[w["peak"]]
        assert e["peak_d2"] == scores["d2"].iloc[w["peak"]]
        assert e["lead_1"] == w["lead"] and e["share_1"] == pytest.approx(w["share"], rel=1e-12)
    # the in-memory API gives the same table as the file
    b = whiten.load_baseline(d / "m.json")
    frame = pd.read_csv(d / "test.csv").set_index("stamp")
    mem = episodes(whiten.monitor.score(b, frame), gap=gap)
    assert mem["first_row"].tolist() == eps["first_row"].tolist()
    assert mem["lead_1"].tolist() == eps["lead_1"].tolist()


def test_the_sudden_fault_is_the_first_episode_and_drawn_first(station, capsys):
    d, cols = station
    assert main(["score", str(d / "test.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--index-column", "stamp", "--contributions", str(d / "why.png"), "--force", "--quiet"]) == 0
    out = capsys.readouterr().out
    first = [ln for ln in out.splitlines() if ln.startswith("  1  ")][0]
    assert "bearing_mm_s" in first.split("at")[-1].split(",")[0]  # the fault's sensor leads episode 1
    assert "contribution chart written to" in out and "peak row" in out
    assert (d / "why.png").read_bytes()[:4] == b"\x89PNG"


def test_contributions_cap_is_said(station, capsys, monkeypatch):
    import whiten.cli.score as cli_score

    d, _ = station
    monkeypatch.setattr(cli_score, "_PEAKS", 2)
    assert main(["score", str(d / "test.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--index-column", "stamp", "--contributions", str(d / "why2.png"), "--force", "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "the peak rows of the first 2 of" in out and "(at most 2)" in out


def test_report_lists_the_episodes(station):
    from whiten.report import monitoring_report

    d, _ = station
    b = whiten.load_baseline(d / "m.json")
    scores = whiten.monitor.score(b, pd.read_csv(d / "test.csv").set_index("stamp"))
    rep = monitoring_report(scores, b, charts=True)
    n = len(episodes(scores))
    assert [f.value for f in rep.figures if f.key == "episodes"] == [n]
    html = rep.to_html()
    assert "Alarm episodes" in html and "bearing_mm_s" in html
