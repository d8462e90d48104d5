"""Model files: round trip, refusal to overwrite, truncated / edited / wrong-version files."""

from __future__ import annotations

import hashlib
import json

import numpy as np
import pytest

import whiten
from whiten.io.modelfile import canonical


@pytest.fixture()
def fitted():
    rng = np.random.default_rng(21)
    x = rng.normal(size=(300, 4)) @ np.array([[2, 0, 0, 0], [1, 1, 0, 0], [0, .5, 1, 0], [.3, 0, .2, .7]]).T
    return whiten.fit_baseline(x + [20.0, 5.0, -3.0, 100.0], columns=["inlet", "outlet", "flow", "power"]), x


def test_round_trip_scores_identically(tmp_path, fitted):
    b, x = fitted
    f = b.save(tmp_path / "m.json")
    back = whiten.load_baseline(f)
    # identical binary64 values after JSON (repr round-trips doubles exactly, Python float spec)
    assert np.array_equal(back.mean, b.mean)
    assert np.array_equal(back.factor.lower, b.factor.lower)
    assert np.array_equal(back.gaussian.mahalanobis(x), b.gaussian.mahalanobis(x))
    assert back.columns == b.columns and back.n == b.n and back.estimator == "sample"
    assert back.health == b.health
    doc = json.loads(f.read_text())
    assert doc["format"] == "whiten.baseline/4"
    # the checksum is SHA-256 (hashlib) of the canonical payload
    assert doc["sha256"] == hashlib.sha256(canonical(doc["payload"]).encode()).hexdigest()
    assert doc["payload"]["library_version"] == whiten.__version__
    assert doc["payload"]["created_utc"].endswith("Z")


def test_refuses_to_overwrite_without_force(tmp_path, fitted):
    b, _ = fitted
    f = tmp_path / "m.json"
    b.save(f)
    before = f.read_bytes()
    with pytest.raises(whiten.InputError, match="already exists"):
        b.save(f)
    assert f.read_bytes() == before
    b.save(f, force=True)
    assert [p.name for p in tmp_path.iterdir()] == ["m.json"]  # no temporary file left


def test_truncated_file_is_rejected(tmp_path, fitted):
    b, _ = fitted
    f = b.save(tmp_path / "m.json")
    text = f.read_text()
    f.write_text(text[: len(text) // 2])
    with pytest.raises(whiten.ModelFileError, match="truncated"):
        whiten.load_baseline(f)
    f.write_text("")
    with pytest.raises(whiten.ModelFileError, match="empty"):
        whiten.load_baseline(f)


def test_edited_file_is_rejected(tmp_path, fitted):
    b, _ = fitted
    f = b.save(tmp_path / "m.json")
    doc = json.loads(f.read_text())
    doc["payload"]["mean"][0] += 1e-9
    f.write_text(json.dumps(doc))
    with pytest.raises(whiten.ModelFileError, match="SHA-256"):
        whiten.load_baseline(f)


def test_wrong_format_or_version_is_rejected(tmp_path, fitted):
    b, _ = fitted
    f = b.save(tmp_path / "m.json")
    doc = json.loads(f.read_text())
    doc["format"] = "whiten.baseline/5"
    f.write_text(json.dumps(doc))
    with pytest.raises(whiten.ModelFileError, match="version '5'"):
        whiten.load_baseline(f)
    doc["format"] = "something.else/1"
    f.write_text(json.dumps(doc))
    with pytest.raises(whiten.ModelFileError, match="expected 'whiten.baseline/4'"):
        whiten.load_baseline(f)
    f.write_text(json.dumps([1, 2, 3]))
    with pytest.raises(whiten.ModelFileError, match="not a whiten model file"):
        whiten.load_baseline(f)
    with pytest.raises(whiten.ModelFileError, match="not found"):
        whiten.load_baseline(tmp_path / "absent.json")


def test_inconsistent_payload_with_valid_checksum_is_rejected(tmp_path, fitted):
    b, _ = fitted
    f = b.save(tmp_path / "m.json")
    doc = json.loads(f.read_text())
    doc["payload"]["factor_lower"][2] = [1.0, 2.0]
    doc["sha256"] = hashlib.sha256(canonical(doc["payload"]).encode()).hexdigest()
    f.write_text(json.dumps(doc))
    with pytest.raises(whiten.ModelFileError, match="factor row 2"):
        whiten.load_baseline(f)
    doc["payload"]["factor_lower"][2] = [1.0, 2.0, -3.0]
    doc["sha256"] = hashlib.sha256(canonical(doc["payload"]).encode()).hexdigest()
    f.write_text(json.dumps(doc))
    with pytest.raises(whiten.ModelFileError, match="not a valid Cholesky factor"):
        whiten.load_baseline(f)


def test_missing_folder(tmp_path, fitted):
    b, _ = fitted
    with pytest.raises(whiten.InputError, match="does not exist"):
        b.save(tmp_path / "nowhere" / "m.json")


@pytest.mark.parametrize("estimator", ["shrinkage", "robust"])
def test_round_trip_other_estimators(tmp_path, fitted, estimator):
    _, x = fitted
    import pandas as pd

    df = pd.DataFrame(x, columns=list("abcd"), index=pd.date_range("2026-01-01", periods=len(x), freq="h"))
    b = whiten.fit_baseline(df, estimator=estimator)
    back = whiten.load_baseline(b.save(tmp_path / "m.json"))
    assert back.estimator == estimator and back.health == b.health
    assert np.array_equal(back.gaussian.mahalanobis(x), b.gaussian.mahalanobis(x))
    if estimator == "robust":
        assert back.params["flagged_rows"] == b.params["flagged_rows"]
        assert back.params["flagged_labels"] == [str(v) for v in b.params["flagged_labels"]]
    else:
        assert back.params["intensity"] == b.params["intensity"]
    # the simulated law travels with the model (format 3): the same limits and p-values after reading
    assert back.limit_law == b.limit_law and b.limit_law is not None
    s1, s2 = b.score(x[:20]), back.score(x[:20])
    assert np.array_equal(s1.p_value, s2.p_value) and s1.attrs["limit_basis"] == s2.attrs["limit_basis"]


def test_infinite_health_figure_survives(tmp_path):
    rng = np.random.default_rng(4)
    t = rng.normal(size=200)
    x = np.column_stack([t, t + 1e-6 * rng.normal(size=200), rng.normal(size=200)])
    with pytest.warns(whiten.ConditioningWarning):
        b = whiten.fit_baseline(x)
    import dataclasses

    b2 = whiten.baseline.Baseline(mean=b.mean, factor=b.factor, n=b.n, columns=b.columns, estimator="sample",
                                  params=b.params, health=dataclasses.replace(b.health, gram_digits_lost=np.inf))
    back = whiten.load_baseline(b2.save(tmp_path / "m.json"))
    assert back.health.gram_digits_lost == np.inf


def test_version_1_files_still_load(tmp_path, fitted):
    # format 1 named the numerical route "path" in the health record; it is read as "method"
    from whiten.io.modelfile import checksum

    b, _ = fitted
    f = b.save(tmp_path / "m.json")
    doc = json.loads(f.read_text())
    doc["format"] = "whiten.baseline/1"
    doc["payload"]["health"]["path"] = doc["payload"]["health"].pop("method")
    doc["sha256"] = checksum(doc["payload"])
    f.write_text(json.dumps(doc))
    old = whiten.load_baseline(f)
    assert old.health.method == b.health.method
    assert np.array_equal(old.mean, b.mean) and np.array_equal(old.factor.lower, b.factor.lower)


def test_version_2_files_still_load_and_say_their_limit_is_approximate(tmp_path, fitted):
    # format 2 had no limit_law: a shrinkage model read from it scores on the sample law, labelled
    from whiten.io.modelfile import checksum

    _, x = fitted
    b = whiten.fit_baseline(x, estimator="shrinkage")
    f = b.save(tmp_path / "m.json")
    doc = json.loads(f.read_text())
    doc["format"] = "whiten.baseline/2"
    del doc["payload"]["limit_law"]
    doc["sha256"] = checksum(doc["payload"])
    f.write_text(json.dumps(doc))
    old = whiten.load_baseline(f)
    assert old.limit_law is None and np.array_equal(old.factor.lower, b.factor.lower)
    at = old.score(x[:3]).attrs
    assert at["limit_law"] == "approximate" and at["limit_basis"].startswith("approximate:")


def test_damaged_limit_law_is_named(tmp_path, fitted):
    from whiten.io.modelfile import checksum

    _, x = fitted
    f = whiten.fit_baseline(x, estimator="shrinkage").save(tmp_path / "m.json")
    doc = json.loads(f.read_text())
    doc["payload"]["limit_law"]["quantiles"][3] = -1.0
    doc["sha256"] = checksum(doc["payload"])
    f.write_text(json.dumps(doc))
    with pytest.raises(whiten.ModelFileError, match="limit_law: the quantile table"):
        whiten.load_baseline(f)
