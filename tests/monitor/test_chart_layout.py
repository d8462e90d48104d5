"""Charts of long runs (issue 20, item 7): the limit written, dates and years on a time axis, no text that
overlaps at any row count (2 million rows, fed cheaply through the digest), episodes shaded; every constant and
duplicated sensor named in one run."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.monitor import ScoreDigest
from whiten.monitor.charts import distance_figure


def _texts(fig):
    """Every text drawn on the figure with its box in pixels (matplotlib's own layout): titles, labels, the
    legend, annotations and the tick labels actually drawn (those inside the view)."""
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    items = list(fig.texts)
    for ax in fig.axes:
        items += [ax.title, ax._left_title, ax.xaxis.label, ax.yaxis.label, ax.xaxis.get_offset_text(),
                  *ax.texts]
        leg = ax.get_legend()
        if leg is not None:
            items += leg.get_texts()
        for axis in (ax.xaxis, ax.yaxis):
            items += [t.label1 for t in axis._update_ticks()]  # the ticks drawn, not the spares kept hidden
    out, seen = [], set()
    for t in items:
        if id(t) in seen or not t.get_visible() or not t.get_text().strip():
            continue
        seen.add(id(t))
        box = t.get_window_extent(r)
        if box.width > 0 and box.height > 0:
            out.append((t.get_text(), box))
    return out


def _overlaps(texts):
    bad = []
    for (a, ba), (b, bb) in itertools.combinations(texts, 2):
        if ba.overlaps(bb) and not (ba.x1 <= bb.x0 + 0.5 or bb.x1 <= ba.x0 + 0.5 or ba.y1 <= bb.y0 + 0.5
                                    or bb.y1 <= ba.y0 + 0.5):
            bad.append((a, b))
    return bad


def _digest(n_rows: int, *, start: str, freq: str, chunk: int = 500_000):
    """A digest fed with synthetic score columns (no scoring needed): chi-square-like d2, two fault spans."""
    rng = np.random.default_rng(7)
    dig = ScoreDigest(["a", "b"], attrs={"alpha": 0.001, "phase": "new"}, chart_points=20_000)
    stamps = pd.Index(pd.date_range(start, periods=n_rows, freq=freq).astype(str).to_numpy(dtype=object),
                      name="stamp")  # as the reader gives them: text
    for a in range(0, n_rows, chunk):
        m = min(chunk, n_rows - a)
        d2 = rng.chisquare(2, m)
        pos = np.arange(a, a + m)
        d2[(pos > n_rows // 5) & (pos < n_rows // 5 + 40)] = 80.0
        d2[pos > n_rows - n_rows // 10] += 30.0
        lim = np.full(m, 13.8)
        dig.add({"d2": d2, "p_value": np.exp(-d2 / 2), "limit": lim, "alarm": d2 > lim,
                 "n_observed": np.full(m, 2), "top_contributor": np.full(m, "a", dtype=object),
                 "drop:a": d2 * 0.6, "drop:b": d2 * 0.3}, index=stamps[a:a + m])
    return dig


@pytest.mark.parametrize("n_rows, freq", [(2_000_000, "1min"), (3_000, "1min"), (50, "7D")])
def test_no_text_overlaps_and_the_axis_dates_with_years(n_rows, freq):
    dig = _digest(n_rows, start="2025-11-28", freq=freq)
    trace = dig.trace()
    ep = dig.episodes()
    spans = list(zip(pd.to_datetime(ep["start"]).to_numpy(), pd.to_datetime(ep["end"]).to_numpy()))
    fig = distance_figure(trace, time=pd.to_datetime(pd.Series(trace.index)).to_numpy(), spans=spans,
                          subtitle="model 0123456789ab, trained on 2025-01-01 00:00:00 .. 2025-01-31 23:59:00 "
                                   "(healthy_january_compressor_station_7.csv)")
    texts = _texts(fig)
    assert not _overlaps(texts), _overlaps(texts)
    words = " ".join(t for t, _ in texts)
    assert "limit 13.8" in words                                  # the limit's value on the chart
    assert ("2025" in words or "2026" in words) and ("2026" in words or n_rows < 100_000)  # the year shown
    ax = fig.axes[0]
    assert len([p for p in ax.patches]) >= len(spans) > 0         # episodes shaded (one span each)
    if n_rows == 2_000_000:
        assert dig.rows_per_point > 1 and "largest d2 of" in words


def test_limit_range_is_written_when_rows_have_different_limits():
    s = pd.DataFrame({"d2": [1.0, 2.0, 30.0], "limit": [13.8, 10.8, 13.8], "alarm": [False, False, True]})
    s.attrs.update(alpha=0.001, phase="new")
    words = " ".join(t for t, _ in _texts(distance_figure(s)))
    assert "limit 10.8 to 13.8" in words


def test_every_constant_and_duplicated_sensor_is_named_in_one_run(tmp_path, capsys):
    rng = np.random.default_rng(0)
    df = pd.DataFrame(rng.normal(size=(60, 3)), columns=["p_in", "p_out", "flow"])
    df["spare"] = 1.0
    df["p_in_copy"] = 2.0 * df["p_in"]
    df["dead"] = 3.0
    df.to_csv(tmp_path / "dup.csv", index=False)
    assert main(["baseline", str(tmp_path / "dup.csv"), "-o", str(tmp_path / "m.json"), "--quiet"]) == 1
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1
    assert "'spare'" in err and "'dead'" in err
    assert ("p_in is a linear combination of p_in_copy" in err or "p_in_copy is a linear combination of p_in" in err)
    with pytest.raises(whiten.InputError, match="spare.*dead"):
        whiten.fit_baseline(df)
