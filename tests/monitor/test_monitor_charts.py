"""Charts write valid PNG files atomically and refuse to overwrite."""

from __future__ import annotations

import doctest
import importlib

import matplotlib.image as mpimg
import numpy as np
import pytest

from whiten.errors import InputError
from whiten.monitor import charts, score

from .conftest import correlated_cov, fit

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), file signature


def _valid_png(path):
    assert path.read_bytes()[:8] == PNG_SIGNATURE
    img = mpimg.imread(path)  # matplotlib decodes it: a real image, not just a header
    assert img.ndim == 3 and img.shape[0] > 100 and img.shape[1] > 100
    assert np.ptp(img[..., :3]) > 0  # not a blank canvas


@pytest.fixture(scope="module")
def scored():
    rng = np.random.default_rng(9)
    cov = correlated_cov(4, rng)
    ref = rng.multivariate_normal(np.zeros(4), cov, size=200)
    b = fit(ref, list("wxyz"))
    new = rng.multivariate_normal(np.zeros(4), cov, size=120)
    new[50:55] += 4 * np.sqrt(np.diag(cov))
    new[60] = np.nan
    new[61, 1] = np.nan
    return b, ref, score(b, new)


def test_charts_write_pngs(tmp_path, scored):
    b, ref, s = scored
    _valid_png(charts.distance_chart(s, tmp_path / "d.png"))
    _valid_png(charts.distance_chart(s, tmp_path / "t.png", time=np.arange(len(s)) * 0.5))
    r = score(b, ref, phase="reference")
    _valid_png(charts.qq_chart(r["d2"], 4, tmp_path / "q.png"))
    _valid_png(charts.contribution_chart(s, tmp_path / "c.png", rows=3))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.png", "d.png", "q.png", "t.png"]  # no temp files left


def test_chart_errors(tmp_path, scored):
    b, ref, s = scored
    target = tmp_path / "d.png"
    target.write_bytes(b"keep")
    with pytest.raises(InputError, match="already exists"):
        charts.distance_chart(s, target)
    assert target.read_bytes() == b"keep"
    charts.distance_chart(s, target, force=True)
    _valid_png(target)
    with pytest.raises(InputError, match="missing columns"):
        charts.distance_chart(s[["d2"]], tmp_path / "x.png")
    with pytest.raises(InputError, match="at least 3"):
        charts.qq_chart([1.0, 2.0], 4, tmp_path / "x.png")
    with pytest.raises(InputError, match="no row was scored"):
        charts.contribution_chart(s.iloc[[60]], tmp_path / "x.png")
    with pytest.raises(InputError, match="time: expected"):
        charts.distance_chart(s, tmp_path / "x.png", time=[1, 2])


@pytest.mark.parametrize("module", ["whiten.monitor.limits", "whiten.monitor.fdr", "whiten.monitor.score",
                                    "whiten.monitor.contributions", "whiten.monitor.charts"])
def test_docstring_examples(module):
    res = doctest.testmod(importlib.import_module(module), optionflags=doctest.NORMALIZE_WHITESPACE)
    assert res.attempted > 0 and res.failed == 0
