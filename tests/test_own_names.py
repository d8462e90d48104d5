"""whiten's vocabulary is its own (issue 15): the renamed result names, the fit file and the one palette."""

from __future__ import annotations

import json
import pathlib
import re

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten import _palette

SRC = pathlib.Path(whiten.__file__).resolve().parent

#: names another statistics program uses for the same results; none may be a public name of whiten's
FOREIGN = ("tvalues", "pvalues", "f_pvalue", "nobs", "conf_int", "condition_number", "stderr", "bse",
           "studentized_internal", "studentized_external", "cooks_distance", "dfbetas")


def _fit():
    rng = np.random.default_rng(15)
    x = pd.DataFrame({"a": rng.normal(size=60)})
    x["b"] = x.a + rng.normal(0, 0.01, 60)
    x["c"] = rng.normal(size=60)
    y = 1.0 + x.a + 0.5 * x.c + rng.normal(0, 0.1, 60)
    return whiten.fit_linear(x, y), x, y


def test_results_carry_no_foreign_names():
    fit, x, _ = _fit()
    for obj in (fit, fit.health, fit.influence()):
        public = {n for n in dir(obj) if not n.startswith("_")}
        assert not public & set(FOREIGN), public & set(FOREIGN)
    cal = whiten.calibrate(lambda th: th[0] + th[1] * np.arange(5.0), [0.0, 0.0], np.arange(5.0), np.eye(5))
    assert not {n for n in dir(cal) if not n.startswith("_")} & set(FOREIGN)
    assert not {n for n in dir(cal.health) if not n.startswith("_")} & set(FOREIGN)
    for gone in ("options", "set_options", "get_options", "Options"):
        assert not hasattr(whiten, gone)


def test_table_columns_are_the_attribute_names():
    fit, x, _ = _fit()
    tab = fit.to_frame()
    assert tab.index.name == "name"
    assert list(tab.columns) == ["coef", "std_error", "t_stat", "p_value", "lower", "upper", "vif"]
    for col in ("coef", "std_error", "t_stat", "p_value"):
        assert np.array_equal(tab[col].to_numpy(), getattr(fit, col), equal_nan=True)
    ci = fit.coef_interval(0.9)
    assert np.array_equal(fit.to_frame(coverage=0.9)[["lower", "upper"]].to_numpy(), ci)
    band = fit.predict(x.iloc[:3], band="new_row", coverage=0.8)
    assert list(band.columns) == ["fitted", "lower", "upper", "std_error"]
    mean = fit.predict(x.iloc[:3], band="mean", coverage=0.8)
    assert np.all(mean["std_error"] < band["std_error"])
    frame = fit.influence().to_frame()
    assert {"leverage", "scaled_residual", "deleted_residual", "cook_distance", "coef_shift:b"} <= set(frame)


def test_settings_trio():
    before = whiten.current_settings().block_rows
    with whiten.settings(block_rows=7) as s:
        assert s.block_rows == 7 and whiten.current_settings().block_rows == 7
    assert whiten.current_settings().block_rows == before
    assert isinstance(whiten.current_settings(), whiten.Settings)


def test_fit_file_round_trip_and_the_old_tag(tmp_path):
    fit, _, _ = _fit()
    doc = {"schema": "whiten.regress/3", "coverage": 0.9, "fit": fit.to_dict(0.9)}
    new = tmp_path / "fit3.json"
    new.write_text(json.dumps(doc))
    back = whiten.load_fit(new)
    assert back["fit"]["coef_interval"]["coverage"] == 0.9
    assert back["fit"]["coef_interval"]["lower"] == pytest.approx(list(fit.coef_interval(0.9)[:, 0]))
    # a file written before the renames (tag whiten.regress/2) reads back in the current layout
    d = fit.to_dict(0.95)
    old_fit = {"names": d["names"], "coef": d["coef"], "stderr": d["std_error"], "tvalues": d["t_stat"],
               "pvalues": d["p_value"], "f_pvalue": d["f_p_value"], "nobs": d["n_rows"],
               "conf_int_95": [list(r) for r in zip(d["coef_interval"]["lower"], d["coef_interval"]["upper"])],
               "condition_number": d["condition"],
               "health": {"condition_number": d["health"]["condition"], "digits_stderr": 12.0}}
    old = tmp_path / "fit2.json"
    old.write_text(json.dumps({"schema": "whiten.regress/2", "level": 0.95, "fit": old_fit}))
    got = whiten.load_fit(old)
    assert got["schema"] == "whiten.regress/3" and got["coverage"] == 0.95
    for key in ("std_error", "t_stat", "p_value", "f_p_value", "n_rows", "condition"):
        assert got["fit"][key] == d[key]
    assert got["fit"]["coef_interval"]["upper"] == d["coef_interval"]["upper"]
    assert got["fit"]["health"]["digits_std_error"] == 12.0
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"schema": "someone.else/1"}))
    with pytest.raises(whiten.ModelFileError, match="not a whiten fit file"):
        whiten.load_fit(bad)


def test_one_palette_everywhere():
    """Colours in charts come from whiten._palette only: no hex literals elsewhere, no stock colour cycle."""
    hexes = re.compile(r"#[0-9a-fA-F]{6}\b")
    stock = re.compile(r"""color\s*=\s*["'](C\d|k|0\.\d+|tab:\w+)["']|["']k\+["']""")
    for path in SRC.rglob("*.py"):
        if path.name == "_palette.py" or path.parts[-2:] == ("report", "html.py"):
            continue
        text = path.read_text(encoding="utf-8")
        assert not hexes.search(text), f"{path}: colour literal {hexes.search(text).group()}"
        assert not stock.search(text), f"{path}: stock colour {stock.search(text).group()}"
    css = (SRC / "report" / "html.py").read_text(encoding="utf-8")
    for colour in (_palette.INK, _palette.PLAIN, _palette.ALARM, _palette.GOOD, _palette.NOTE, _palette.MUTED):
        assert colour in css  # the report's style sheet speaks the same palette


def test_reports_carry_the_cautions_of_their_job():
    fit, _, _ = _fit()
    html = whiten.regression_report(fit, charts=False).to_html()
    assert "a coefficient is an association" in html and "protective function" not in html
    cal = whiten.calibrate(lambda th: th[0] + th[1] * np.arange(6.0), [0.0, 0.0], np.arange(6.0) + 0.01,
                           np.eye(6))
    html = whiten.calibration_report(cal, charts=False).to_html()
    assert "accredited practice" in html and "protective function" not in html
