"""The regression demo: its bundled data are what the scenario's generator writes, and the story holds."""

from __future__ import annotations

import json
import warnings

import numpy as np

import whiten
from whiten.cli import main
from whiten.demos import kiln_energy


def test_bundled_data_is_the_generators_output():
    assert kiln_energy._bundled() == kiln_energy.csv_text()


def test_the_thermocouples_are_near_collinear_and_named():
    df = kiln_energy.table()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", whiten.ConditioningWarning)
        fit = whiten.fit_linear(df[kiln_energy.PREDICTORS], df[kiln_energy.RESPONSE], weights=df.meter_weight)
    vif = dict(zip(fit.columns, fit.vif))
    assert vif["zone_c_upper"] > 100 and vif["zone_c_lower"] > 100
    assert any("'zone_c_upper' and 'zone_c_lower'" in s for s in fit.collinearity.sentences)
    both = fit.coef[fit.names.index("zone_c_upper")] + fit.coef[fit.names.index("zone_c_lower")]
    assert abs(both - 3.1) < 0.05          # the invented zone effect, recovered as a sum


def test_demo_writes_its_files(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path), "--only", "kiln_energy"]) == 0
    out = capsys.readouterr().out
    assert "nearly linearly dependent" in out and "a regression describes the rows" in out
    folder = tmp_path / "kiln_energy"
    doc = whiten.load_fit(folder / "kiln_fit.json")
    assert doc["fit"]["names"][1:] == kiln_energy.PREDICTORS
    assert json.loads((folder / "kiln_fit.json").read_text())["schema"] == "whiten.regress/3"
    assert (folder / "kiln_fit.html").stat().st_size > 10_000
    assert np.isfinite(doc["fit"]["condition"])
