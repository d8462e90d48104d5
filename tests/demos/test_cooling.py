"""The cooling-loop demo: bundled data reproducible from the seed; run() finds the planted faults."""

from __future__ import annotations

import io
from importlib import resources

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.demos import cooling


def test_bundled_data_regenerates_from_seed():
    h, t = cooling.make_data()
    for name, df in zip(cooling.DATA_FILES, (h, t)):
        text = resources.files("whiten.demos").joinpath("data", name).read_text(encoding="utf-8")
        assert text == cooling._csv_text(df), name
    assert h.shape == (cooling.HEALTHY_ROWS, 9) and t.shape == (cooling.TEST_ROWS, 9)
    assert not h[cooling.SENSORS].isna().any().any()
    assert t.iloc[cooling.OUTAGE_ROWS[0]:cooling.OUTAGE_ROWS[1]][cooling.SENSORS].isna().all().all()
    # the planted correlation break keeps flow inside its healthy range on average:
    # the mean shift is under 2 healthy standard deviations (numpy mean/std)
    a, b = cooling.FAULT_ROWS
    shift = (t["flow"].iloc[a:b].mean() - h["flow"].mean()) / h["flow"].std()
    assert -2.0 < shift < -1.0


@pytest.mark.skipif(not hasattr(whiten, "fit_baseline"), reason="needs whiten.fit_baseline")
def test_run_writes_files_and_explains(tmp_path):
    lines = cooling.run(tmp_path)
    names = sorted(p.name for p in tmp_path.iterdir())
    assert names == sorted(["cooling_healthy.csv", "cooling_test.csv", "cooling_baseline.json",
                            "cooling_scores.csv", "cooling_distance.png", "cooling_ewma.png", "cooling_qq.png",
                            "cooling_contributions.png"])
    for png in ("cooling_distance.png", "cooling_ewma.png", "cooling_qq.png", "cooling_contributions.png"):
        assert (tmp_path / png).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature
        assert mpimg.imread(tmp_path / png).ndim == 3
    s = pd.read_csv(tmp_path / "cooling_scores.csv", index_col="time", keep_default_na=False, na_values=[""])
    assert len(s) == cooling.TEST_ROWS
    a, b = cooling.FAULT_ROWS
    fault = s.iloc[a:b]
    assert fault["alarm"].mean() > 0.8
    assert (fault.loc[fault["alarm"], "top_contributor"] == "flow").mean() > 0.9
    a, b = cooling.DRIFT_ROWS
    assert (s.iloc[a:b].query("alarm")["top_contributor"] == "dp_strainer").mean() > 0.9
    # the drift: at the same in-control rate (EWMA limit for an ARL of 1 / alpha rows) the EWMA alarms
    # earlier than the per-row distance, and names the drifting sensor
    drift = s.iloc[a:b]
    first_t2 = int(np.flatnonzero(drift["alarm"].to_numpy())[0])
    first_ew = int(np.flatnonzero(drift["ewma_alarm"].to_numpy())[0])
    assert first_ew < first_t2 - 10
    assert (drift.loc[drift["ewma_alarm"], "ewma_top"] == "dp_strainer").mean() > 0.9
    assert f"{first_ew} rows into the drift against {first_t2} for the per-row distance" in "\n".join(lines)
    assert "= 1/alpha" in "\n".join(lines)
    # no EWMA alarm on the healthy stretch before the first episode (250 rows at ARL 1000)
    assert not s["ewma_alarm"].iloc[:cooling.FAULT_ROWS[0]].any()
    text = "\n".join(lines)
    assert "'flow'" in text and "'dp_strainer'" in text
    assert lines[-1].startswith("Caution: this is a statistical screen, not a protective function")
    with pytest.raises(whiten.InputError, match="already exists"):
        cooling.run(tmp_path)
    assert cooling.run(tmp_path, force=True) == lines  # fixed seed: the same account again
