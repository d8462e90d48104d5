"""The command line names the law of each limit and a weak screen (issue 19, part A, loose ends 2-3).

References: scipy.stats' chi-square law for the quoted chi-square limit; the F law of Tracy, Young &
Mason (1992) via scipy.stats for the quoted limit of a small sample baseline.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import whiten
from whiten.cli import main

P, M = 4, 8


@pytest.fixture
def small(tmp_path):
    rng = np.random.default_rng(3)
    cols = [f"s{j}" for j in range(P)]
    pd.DataFrame(rng.normal(size=(M, P)), columns=cols).to_csv(tmp_path / "ref.csv", index=False)
    pd.DataFrame(rng.normal(size=(50, P)), columns=cols).to_csv(tmp_path / "new.csv", index=False)
    return tmp_path


@pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")
def test_score_and_baseline_print_the_law_and_the_weak_screen(small, capsys):
    d = small
    assert main(["baseline", str(d / "ref.csv"), "-o", str(d / "m.json")]) == 0
    out = capsys.readouterr().out
    assert "limit of new rows (exact law)" in out
    chi = stats.chi2.isf(0.001, P)
    f_lim = P * (M + 1) * (M - 1) / (M * (M - P)) * stats.f.isf(0.001, P, M - P)
    weak = re.search(r"weak screen: the limit (\S+) at alpha=0.001 .* chi-square limit (\S+); about (\d+) reference "
                     r"rows \(now 8\)", out)
    assert weak and float(weak[1]) == pytest.approx(f_lim, rel=1e-3) and float(weak[2]) == pytest.approx(chi, rel=1e-3)
    assert main(["score", str(d / "new.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--alpha", "0.001"]) == 0
    out = capsys.readouterr().out
    assert "limit (exact law): exact: T²" in out and f"about {weak[3]} reference rows" in out
    assert main(["baseline", str(d / "ref.csv"), "-o", str(d / "sh.json"), "--estimator", "shrinkage"]) == 0
    out = capsys.readouterr().out
    assert re.search(r"limit of new rows \(simulated law\): .* \d+ refits x \d+ new rows, seed \d+\); Monte Carlo "
                     r"s\.e\. of alpha at this limit", out)
    assert main(["score", str(d / "new.csv"), "--baseline", str(d / "sh.json"), "-o", str(d / "s2.csv")]) == 0
    assert "limit (simulated law): simulated: " in capsys.readouterr().out


def test_sound_screen_prints_no_weak_line_and_loglik_states_its_law(tmp_path, capsys):
    rng = np.random.default_rng(4)
    cols = [f"s{j}" for j in range(P)]
    pd.DataFrame(rng.normal(size=(2000, P)), columns=cols).to_csv(tmp_path / "ref.csv", index=False)
    assert main(["baseline", str(tmp_path / "ref.csv"), "-o", str(tmp_path / "m.json")]) == 0
    assert "weak screen" not in capsys.readouterr().out
    assert main(["loglik", str(tmp_path / "ref.csv"), "--baseline", str(tmp_path / "m.json"),
                 "-o", str(tmp_path / "l.csv")]) == 0
    assert "upper tail of chi-square(n_observed)" in capsys.readouterr().out
    assert whiten.load_baseline(tmp_path / "m.json").n == 2000
