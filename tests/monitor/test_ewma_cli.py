"""``whiten score --ewma/--ewma-arl/--persist`` end to end: the file's columns equal the API's, the summary says it."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main


@pytest.fixture()
def files(tmp_path):
    rng = np.random.default_rng(21)
    cov = [[1.0, 0.6, 0.2], [0.6, 1.0, 0.3], [0.2, 0.3, 1.0]]
    ref = pd.DataFrame(rng.multivariate_normal(np.zeros(3), cov, size=400), columns=["a", "b", "c"])
    new = pd.DataFrame(rng.multivariate_normal(np.zeros(3), cov, size=300), columns=["a", "b", "c"])
    new.loc[150:, "c"] += np.linspace(0, 3, 150)
    new.iloc[20, 1] = np.nan
    ref.to_csv(tmp_path / "ref.csv", index=False)
    new.to_csv(tmp_path / "new.csv", index=False)
    assert main(["baseline", str(tmp_path / "ref.csv"), "-o", str(tmp_path / "m.json")]) == 0
    return tmp_path


def test_cli_drift_columns_and_summary(files, capsys):
    capsys.readouterr()
    out = files / "s.csv"
    assert main(["score", str(files / "new.csv"), "--baseline", str(files / "m.json"), "-o", str(out),
                 "--ewma", "0.1", "--ewma-arl", "500", "--persist", "3/5", "--chunksize", "40"]) == 0
    text = capsys.readouterr().out
    got = pd.read_csv(out, keep_default_na=False, na_values=[""])
    model = whiten.load_baseline(files / "m.json")
    api = whiten.monitor.score(model, pd.read_csv(files / "new.csv"), ewma=0.1, ewma_arl=500, persist=(3, 5))
    np.testing.assert_allclose(got["ewma_t2"], api["ewma_t2"], rtol=1e-12)
    assert (got["persist_alarm"] == api["persist_alarm"]).all()
    assert f"limit {api.attrs['ewma_limit']['h']:.4g}" in text
    assert f"EWMA alarms: {int(api['ewma_alarm'].sum())} (first at data row " \
           f"{int(np.flatnonzero(api['ewma_alarm'])[0])}); 1 rows held" in text
    assert "binomial tail" in text
    assert "autocorrelated readings" in text


@pytest.mark.parametrize("extra, match", [
    (["--ewma", "0"], r"--ewma: expected a smoothing weight"),
    (["--ewma-arl", "300"], r"--ewma-arl: given without --ewma"),
    (["--ewma", "0.1", "--ewma-arl", "0.5"], r"--ewma-arl: expected an in-control average run length"),
    (["--persist", "5/3"], r"--persist: need 1 <= K <= M"),
    (["--persist", "x/y"], r"--persist: expected two integers"),
])
def test_cli_bad_drift_options(files, capsys, extra, match):
    rc = main(["score", str(files / "new.csv"), "--baseline", str(files / "m.json"), "-o",
               str(files / "bad.csv"), *extra])
    assert rc != 0
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1
    import re

    assert re.search(match, err)
    assert not (files / "bad.csv").exists()
