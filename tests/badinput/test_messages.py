"""Issue 14 part B: warnings once per call site, recomputed health in inspect, row counts of model files."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

import whiten
from whiten.cli import main
from whiten.errors import ModelFileError, RankDeficiencyWarning
from whiten.io.modelfile import checksum

from .conftest import snapshot


def _rank_deficient_fits(k: int):
    rng = np.random.default_rng(7)
    out = []
    for _ in range(k):
        x = rng.normal(size=(20, 2))
        out.append(whiten.fit_linear(np.c_[x, x[:, 0] + x[:, 1]], rng.normal(size=20)))  # one call site
    return out


def test_loop_warns_once_and_keeps_health():
    """1000 rank-deficient fits from one line: one warning under the default filter, full health on each."""
    with warnings.catch_warnings(record=True) as got:
        warnings.simplefilter("default")
        fits = _rank_deficient_fits(1000)
    rank = [w for w in got if issubclass(w.category, RankDeficiencyWarning)]
    assert len(rank) == 1, [str(w.message) for w in got[:5]]
    assert "repeats from this line are not printed" in str(rank[0].message)
    assert rank[0].filename == __file__  # attributed to the user's line
    assert all(f.rank == 3 for f in fits)
    assert all(f.health.rank == 3 and f.health.n_columns == 4 and f.health.set_aside and f.health.dependencies
               for f in fits)  # every result keeps its own record of what the silenced warnings said


def test_always_filter_sees_every_warning():
    """Users who ask for "always" (pytest.warns does) get every warning, numbers and all."""
    with warnings.catch_warnings(record=True) as got:
        warnings.simplefilter("always")
        _rank_deficient_fits(5)
    assert len([w for w in got if issubclass(w.category, RankDeficiencyWarning)]) == 5
    with pytest.warns(RankDeficiencyWarning):
        _rank_deficient_fits(1)


def test_new_catch_block_starts_afresh():
    for _ in range(2):
        with warnings.catch_warnings(record=True) as got:
            warnings.simplefilter("default")
            _rank_deficient_fits(3)
        assert len([w for w in got if issubclass(w.category, RankDeficiencyWarning)]) == 1


def test_error_filter_still_raises():
    with warnings.catch_warnings():
        warnings.simplefilter("error", RankDeficiencyWarning)
        for _ in range(2):
            with pytest.raises(RankDeficiencyWarning):
                _rank_deficient_fits(1)


def _edited(tmp_path, model_bytes, name, edit):
    doc = json.loads(model_bytes)
    edit(doc["payload"])
    doc["sha256"] = checksum(doc["payload"])
    p = tmp_path / name
    p.write_text(json.dumps(doc), encoding="utf-8")
    return p


@pytest.mark.parametrize("n, words", [(10**30, ["31-digit", "n (the number of reference rows)"]),
                                      (-3, ["-3", "outside"]), (0, ["outside"]), (2.5, ["whole number"]),
                                      ("x", ["whole number"]), (True, ["whole number"])])
def test_model_file_row_count(tmp_path, model_bytes, capsys, n, words):
    """An edited n is a one-line ModelFileError from the API and from `whiten inspect` / `score`."""
    p = _edited(tmp_path, model_bytes, "x.json", lambda pl: pl.update(n=n))
    with pytest.raises(ModelFileError) as info:
        whiten.load_baseline(p)
    for w in words:
        assert w in str(info.value)
    (tmp_path / "d.csv").write_text("a,b,c\n0.1,0.2,0.3\n", encoding="utf-8")
    before = snapshot(tmp_path)
    for argv in (["inspect", str(p)], ["score", str(tmp_path / "d.csv"), "--baseline", str(p), "-o",
                                       str(tmp_path / "s.csv")]):
        assert main(argv) == 1
        err = capsys.readouterr().err
        assert "Traceback" not in err and len(err.strip().splitlines()) == 1 and words[0] in err
    assert snapshot(tmp_path) == before


def test_model_file_n_1e400(tmp_path, model_bytes, capsys):
    text = model_bytes.decode("utf-8")
    doc = json.loads(text)
    n = doc["payload"]["n"]
    p = tmp_path / "x.json"
    p.write_text(text.replace(f'"n": {n}', '"n": 1e400', 1), encoding="utf-8")
    assert '"n": 1e400' in p.read_text(encoding="utf-8")
    with pytest.raises(ModelFileError):
        whiten.load_baseline(p)
    assert main(["inspect", str(p)]) == 1
    err = capsys.readouterr().err
    assert "Traceback" not in err and "x.json" in err


def test_inspect_shows_recomputed_health(tmp_path, model_bytes, capsys):
    """`whiten inspect` reports the factor's condition, and says when the stored block disagrees."""
    good = tmp_path / "m.json"
    good.write_bytes(model_bytes)
    b = whiten.load_baseline(good)
    true_digits = b.factor.health.digits_lost

    def lie(pl):
        pl["health"]["digits_lost"] = 9.0
        pl["health"]["rcond_scaled"] = 1e-9

    p = _edited(tmp_path, model_bytes, "x.json", lie)
    assert main(["inspect", str(p)]) == 0
    out = capsys.readouterr().out
    assert f"about {true_digits:.1f} digits lost" in out
    assert "stored health block disagrees" in out and "9.0" in out
    assert main(["inspect", str(good)]) == 0
    assert "disagrees" not in capsys.readouterr().out
