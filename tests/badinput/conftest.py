"""Shared set-up of the bad-input catalogue: a small reference model and a snapshot of a folder."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import whiten

COLS = ["a", "b", "c"]


@pytest.fixture(scope="session")
def model_bytes(tmp_path_factory) -> bytes:
    d = tmp_path_factory.mktemp("catalogue_model")
    rng = np.random.default_rng(14)
    ref = pd.DataFrame(rng.normal(size=(60, 3)) @ np.array([[1, 0.3, 0], [0, 1, 0.2], [0, 0, 1]]), columns=COLS)
    whiten.fit_baseline(ref).save(d / "m.json")
    return (d / "m.json").read_bytes()


def snapshot(folder) -> dict:
    """Every file under ``folder`` (hidden ones included) with its bytes."""
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}
