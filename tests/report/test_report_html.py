"""The report framework without a browser: self-contained HTML, escaping, provenance, parse-back."""

from __future__ import annotations

import gzip
import hashlib
import math

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.errors import InputError
from whiten.report import Provenance, Report, count_rows, file_record, format_number, monitoring_report

from .page import ReportPage, check_self_contained, decode_png


# ---------------------------------------------------------------------------- the checker itself
def test_the_nesting_check_can_fail():
    page = ReportPage("<!DOCTYPE html><html><body><table><tr><td>x</tr></table><p>open</body></html>")
    assert page.unbalanced


@pytest.mark.parametrize("bad", [
    '<img src="http://cdn.example/x.png" alt="x">',
    '<link rel="stylesheet" href="https://fonts.example/f.css">',
    '<div style="background: url(//tracker.example/p.gif)">x</div>',
    '<style>@import "other.css";</style>',
    '<a href="report2.html">next</a>',
    '<iframe srcdoc="x"></iframe>',
])
def test_the_static_checker_catches_outside_references(bad):
    # negative controls: the check below must be able to fail
    page = ReportPage(f"<html><head></head><body>{bad}</body></html>")
    assert page.external or page.fetching_tags


# ---------------------------------------------------------------------------- the framework
def _small_report(tmp_path) -> Report:
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    data = tmp_path / "line3.csv"
    data.write_text("a,b\n1,2\n3,4\n5,6\n", encoding="utf-8")
    prov = Provenance.collect(inputs=[data], command=["whiten", "score", str(data), "--alpha", "0.01"])
    rep = Report("Line 3 <filler> & capper", job="monitoring", lede="A <b>test</b> report", provenance=prov)
    rep.key_figure("Alarms", 3, note="of <240> rows", tone="alert")
    rep.key_figure("Share", 0.0123456789, digits=3)
    rep.health("Condition", "fine & dandy <ok>")
    fig = Figure(figsize=(3, 2))
    fig.add_subplot(1, 1, 1).plot([0, 1, 2], [1, 0, 2])
    sec = rep.section("Details & more")
    sec.paragraph("x < y and y > z")
    sec.table(pd.DataFrame({"sensor <name>": ["<b>torque</b>"], "d2": [12.3456789]}), "A <caption>", key="t")
    sec.figure(fig, alt="a line that dips & rises", caption="cap <1>")
    return rep


def test_user_text_is_escaped_everywhere(tmp_path):
    html = _small_report(tmp_path).to_html()
    page = check_self_contained(html)
    assert "<filler>" not in html and "&lt;filler&gt;" in html
    assert "<b>" not in html and "<name>" not in html and "<ok>" not in html
    for escaped in ("A &lt;b&gt;test&lt;/b&gt; report", "<caption>A &lt;caption&gt;</caption>",
                    "&lt;b&gt;torque&lt;/b&gt;", "fine &amp; dandy &lt;ok&gt;", "cap &lt;1&gt;", "x &lt; y"):
        assert escaped in html, escaped
    assert page.title == "Line 3 <filler> & capper"       # escaped, then read back by the parser as text
    assert page.tables["t"]["head"] == ["", "sensor <name>", "d2"]
    assert page.tables["t"]["rows"][0][0] == ("<b>torque</b>", None)
    assert page.tiles["alarms"]["text"] == "3" and page.tiles["alarms"]["value"] == "3"
    assert page.tiles["share"]["text"] == "0.0123" and float(page.tiles["share"]["value"]) == 0.0123456789


def test_images_are_embedded_pngs_that_decode(tmp_path):
    page = check_self_contained(_small_report(tmp_path).to_html())
    pngs = page.png_images()
    assert len(pngs) == 1
    pixels = decode_png(pngs[0])                  # matplotlib's PNG reader, independent of how we wrote it
    assert pixels.shape[0] > 0 and pixels.shape[1] > 0
    assert float(np.ptp(pixels[..., :3])) > 0     # not a blank picture


def test_provenance_block_shows_command_files_and_digests(tmp_path):
    rep = _small_report(tmp_path)
    html = rep.to_html()
    page = ReportPage(html)
    data = tmp_path / "line3.csv"
    files = page.tables["files"]
    assert files["row_heads"] == ["input"]
    digest = files["rows"][0][3][0]
    assert digest == hashlib.sha256(data.read_bytes()).hexdigest()     # standard-library reference digest
    assert files["rows"][0][1] == ("3", "3")                             # 3 data rows under the header
    assert "whiten score" in html and "--alpha 0.01" in html
    assert rep.provenance.created_utc.endswith("Z")
    assert f"whiten {whiten.__version__}" in html


def test_write_is_atomic_and_refuses_to_overwrite(tmp_path):
    rep = _small_report(tmp_path)
    out = tmp_path / "r.html"
    rep.write(out)
    first = out.read_text(encoding="utf-8")
    with pytest.raises(InputError, match="already exists"):
        rep.write(out)
    assert out.read_text(encoding="utf-8") == first
    rep.write(out, force=True)
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".r.html")) == []  # no temp left
    with pytest.raises(InputError, match="does not exist"):
        rep.write(tmp_path / "no-such-folder" / "r.html")


def test_builder_refuses_bad_blocks(tmp_path):
    rep = Report("x")
    sec = rep.section("s")
    with pytest.raises(InputError, match="alt text is required"):
        sec.figure(b"\x89PNG\r\n\x1a\n", alt="  ")
    with pytest.raises(InputError, match="not a PNG"):
        sec.figure(b"GIF89a....", alt="a picture")
    with pytest.raises(InputError, match="expected a pandas DataFrame"):
        sec.table([[1, 2]], "caption")
    with pytest.raises(InputError, match="caption"):
        sec.table(pd.DataFrame({"a": [1]}), " ")
    with pytest.raises(InputError, match="tone"):
        rep.key_figure("x", 1, tone="loud")
    with pytest.raises(InputError, match="not found"):
        Provenance.collect(inputs=[tmp_path / "missing.csv"])


def test_format_number_against_python_formatting():
    # reference: Python's own format mini-language ("g" = significant digits)
    assert format_number(1234.5678, 3) == format(1234.5678, ".3g") == "1.23e+03"
    assert format_number(np.int64(7)) == "7" and format_number(True) == "yes"
    assert format_number(math.inf) == "inf" and format_number(None) == "n/a"


# ---------------------------------------------------------------------------- provenance helpers
def test_row_counts_match_pandas(tmp_path):
    # reference: pandas.read_csv's row count (records after the header), quoted newlines included
    text = 'id,comment,v\n1,"two\nlines",0.5\n2,plain,1.5\n\n3,"x, y",2.5\n'
    plain = tmp_path / "c.csv"
    plain.write_text(text, encoding="utf-8")
    packed = tmp_path / "c.csv.gz"
    packed.write_bytes(gzip.compress(text.encode()))
    tsv = tmp_path / "c.tsv"
    tsv.write_text("a\tb\n1\t2\n3\t4\n", encoding="utf-8")
    assert count_rows(plain) == len(pd.read_csv(plain)) == 3
    assert count_rows(packed) == len(pd.read_csv(packed)) == 3
    assert count_rows(tsv) == len(pd.read_csv(tsv, sep="\t")) == 2
    other = tmp_path / "notes.md"
    other.write_text("# x\n", encoding="utf-8")
    assert count_rows(other) is None


def test_parquet_row_count_from_footer(tmp_path):
    pytest.importorskip("pyarrow")
    p = tmp_path / "t.parquet"
    pd.DataFrame({"a": np.arange(17.0)}).to_parquet(p)
    assert count_rows(p) == len(pd.read_parquet(p)) == 17       # reference: pandas/pyarrow reader


def test_model_file_record_names_format_and_payload_checksum(tmp_path):
    from whiten.io.modelfile import write_model

    path = write_model(tmp_path / "m.json", "whiten.baseline/1", {"mean": [1.0, 2.0]})
    rec = file_record(path, "model")
    assert rec.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()     # standard-library digest
    assert rec.rows is None and "whiten.baseline/1" in rec.detail
    import json

    assert json.loads(path.read_text())["sha256"] in rec.detail


# ---------------------------------------------------------------------------- monitoring report
def test_monitoring_report_numbers_equal_the_csv_output(filler_scores, filler_model, tmp_path):
    # the CSV is what `whiten score -o` writes; the page must agree with it
    csv = tmp_path / "scores.csv"
    filler_scores.to_csv(csv)
    back = pd.read_csv(csv, index_col=0)
    rep = monitoring_report(filler_scores, filler_model)
    page = check_self_contained(rep.to_html())

    n_alarm = int(back["alarm"].sum())
    assert n_alarm >= 1                                          # the injected faults are found
    assert page.tiles["alarms"]["value"] == str(n_alarm) and page.tiles["alarms"]["text"] == str(n_alarm)
    assert int(page.tiles["fdr-flags"]["value"]) == int(back["alarm_fdr"].sum())
    scored = int(back["d2"].notna().sum())
    assert math.isclose(float(page.tiles["expected"]["value"]), 0.001 * scored, rel_tol=1e-15)
    assert page.tiles["partial"]["value"] == "2"                  # one partial row, one with nothing

    worst = back[back["p_value"].notna()].sort_values(["p_value", "d2"], ascending=[True, False]).head(5)
    table = page.tables["worst-rows"]
    assert table["row_heads"] == list(worst.index)
    d2_cells = page.column("worst-rows", "d2")
    for (text, value), want in zip(d2_cells, worst["d2"]):
        assert float(value) == want                               # full precision, exact round trip
        assert math.isclose(float(text), want, rel_tol=5e-5)      # 5 significant digits shown
    top = page.column("worst-rows", "top sensors")
    assert top[0][0].split(" (")[0] == worst["top_contributor"].iloc[0]
    assert math.isclose(float(page.tiles["worst-d2"]["value"]), worst["d2"].iloc[0], rel_tol=0)
    # both charts are there and decode
    assert len(page.images) == 2
    for png in page.png_images():
        assert decode_png(png).shape[1] > 100


def test_monitoring_report_trust_and_cautions(filler_scores, filler_model):
    html = monitoring_report(filler_scores, filler_model, charts=False).to_html()
    assert "chi-square(4)" in html
    assert "not a protective function" in html
    assert "local codes and accredited practice" in html
    assert "dpocon" in html and "digits can be trusted" in html
    cond = 1.0 / filler_model.factor.health.rcond_scaled
    assert format_number(cond, 3) in html


def test_monitoring_report_refuses_other_frames():
    with pytest.raises(InputError, match="whiten.monitor.score"):
        monitoring_report(pd.DataFrame({"d2": [1.0]}))
    with pytest.raises(InputError, match="whiten.monitor.score"):
        monitoring_report([1, 2, 3])


def test_monitoring_report_with_a_fitted_baseline(filler_batch):
    if not hasattr(whiten, "fit_baseline"):
        pytest.skip("whiten.fit_baseline is not in this tree yet")
    rng = np.random.default_rng(7)
    from .conftest import filler_covariance

    ref = pd.DataFrame(rng.multivariate_normal(np.zeros(4), filler_covariance(), size=400),
                       columns=filler_batch.columns)
    b = whiten.fit_baseline(ref)
    s = whiten.monitor.score(b, ref.iloc[:50] + 0.1)
    html = monitoring_report(s, b, charts=False).to_html()
    check_self_contained(html)
    assert "400 reference rows" in html and "F(4, 396)" in html


def test_monitoring_report_names_a_redundant_sensor():
    # reference: the construction itself -- 'line_total' is the sum of two other sensors plus
    # a tiny independent noise, so it keeps about 1e-10 of its variance beyond the others
    rng = np.random.default_rng(12)
    x = rng.normal(size=(600, 3))
    x = np.column_stack([x, x[:, 0] + x[:, 1] + 1e-5 * rng.normal(size=600)])
    names = ["feed_a", "feed_b", "return_temp", "line_total"]
    with pytest.warns(whiten.ConditioningWarning, match="digits"):
        g = whiten.Gaussian(x.mean(axis=0), np.cov(x.T), columns=names)
    s = whiten.monitor.score(g, x[:20], phase="known")
    html = monitoring_report(s, g, charts=False).to_html()
    page = check_self_contained(html)
    assert "Nearly redundant sensors" in html and "linear combination of" in html
    assert page.tiles["alarms"]["value"] == str(int(s.alarm.sum()))
    clean = whiten.Gaussian(np.zeros(3), np.eye(3), columns=names[:3])
    html = monitoring_report(whiten.monitor.score(clean, x[:5, :3], phase="known"), clean, charts=False).to_html()
    assert "No sensor is a linear combination" in html
    assert page.images == []


def test_monitoring_report_edge_cases(filler_model, filler_batch):
    empty = whiten.monitor.score(filler_model, filler_batch.iloc[:3], phase="known").iloc[:0]
    with pytest.raises(InputError, match="no rows"):
        monitoring_report(empty)
    # a quiet batch: no alarm, so no "which sensors lead" section, and the alarms tile is not alarming
    quiet = whiten.monitor.score(filler_model, filler_batch.iloc[:30].fillna(filler_model.mean[1]),
                                 phase="known", alpha=1e-9)
    assert not quiet.alarm.any()
    page = check_self_contained(monitoring_report(quiet, filler_model, charts=False).to_html())
    assert page.tiles["alarms"]["value"] == "0" and "leaders" not in page.tables
    # nothing scored at all: figures still come out, nothing is invented
    blank = whiten.monitor.score(filler_model, filler_batch.iloc[[200, 200]], phase="known")
    assert blank.d2.isna().all()
    page = check_self_contained(monitoring_report(blank, filler_model).to_html())
    assert page.tiles["alarms"]["value"] == "0" and page.tiles["partial"]["value"] == "2"
    assert page.images == [] and "worst-rows" not in page.tables


def test_monitoring_report_ewma_panel(filler_model, tmp_path):
    """Scores made with ``ewma=`` get a drift panel: the count equals the score table's ``ewma_alarm`` column (and a
    streamed run's digest), the chart decodes, and the caution that EWMA limits assume independent rows and known
    parameters is on the page; scores without ``ewma=`` get no panel."""
    rng = np.random.default_rng(44)
    x = rng.multivariate_normal(filler_model.mean, filler_model.cov, size=300)
    x[120:, 2] += np.linspace(0.0, 2.0, 180) * math.sqrt(filler_model.cov[2, 2])  # a slow drift of the torque
    frame = pd.DataFrame(x, columns=filler_model.columns)
    s = whiten.monitor.score(filler_model, frame, phase="known", alpha=0.005, ewma=0.1, ewma_arl=200)
    n_ewma = int(s["ewma_alarm"].sum())
    assert n_ewma >= 1
    page = check_self_contained(monitoring_report(s, filler_model).to_html())
    assert page.tiles["ewma-alarms"]["value"] == str(n_ewma)
    html = monitoring_report(s, filler_model, charts=False).to_html()
    assert "independent rows" in html and "known" in html and "Lowry" in html
    assert len(page.images) == 3                                  # distance chart, contributions, EWMA chart
    for png in page.png_images():
        assert decode_png(png).shape[1] > 100
    # a streamed run: the digest's counts, no chart
    data = tmp_path / "drift.csv"
    frame.to_csv(data, index=False)
    dig = whiten.monitor.score_file(filler_model, data, tmp_path / "out.csv", phase="known", alpha=0.005,
                                    ewma=0.1, ewma_arl=200)
    page = check_self_contained(monitoring_report(dig, filler_model, charts=False).to_html())
    assert page.tiles["ewma-alarms"]["value"] == str(n_ewma)
    plain = whiten.monitor.score(filler_model, frame, phase="known", alpha=0.005)
    page = check_self_contained(monitoring_report(plain, filler_model, charts=False).to_html())
    assert "ewma-alarms" not in page.tiles and "EWMA" not in monitoring_report(plain, filler_model).to_html()
