"""Streaming `whiten score` keeps memory bounded: peak RSS does not grow with the file.

Method (common practice for memory checks): run the command in a fresh subprocess on two files of
different length and compare their peak resident set size (``VmHWM``). Holding the larger file in
memory would cost at least rows x sensors x 8 bytes more (here about 23 MB of float64 alone, several
times that through a CSV parser); streaming in chunks costs nothing per extra row.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

import whiten

# VmHWM is the peak RSS of this process's own address space. (ru_maxrss is not: on Linux a child
# inherits the parent's high-water mark through fork + exec, which would hide the child's own use.)
PROBE = """
import sys
from whiten.cli import main
code = main(sys.argv[1:])
hwm = [ln.split()[1] for ln in open("/proc/self/status") if ln.startswith("VmHWM")][0]
print("MAXRSS_KB", hwm)
sys.exit(code)
"""


def _write(path, n, rng, chunk=100_000):
    cols = [f"s{k}" for k in range(6)]
    mix = np.eye(6) + 0.3
    first = True
    for a in range(0, n, chunk):
        m = min(chunk, n - a)
        pd.DataFrame(rng.normal(size=(m, 6)) @ mix, columns=cols).to_csv(
            path, mode="w" if first else "a", header=first, index=False, float_format="%.6g")
        first = False


def _peak_kb(args):
    r = subprocess.run([sys.executable, "-c", PROBE, *args], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    line = [ln for ln in r.stdout.splitlines() if ln.startswith("MAXRSS_KB")][-1]
    return int(line.split()[1]), r.stdout


@pytest.mark.slow
def test_peak_memory_does_not_grow_with_file_length(tmp_path):
    rng = np.random.default_rng(5)
    ref = pd.DataFrame(rng.normal(size=(5000, 6)) @ (np.eye(6) + 0.3), columns=[f"s{k}" for k in range(6)])
    model = tmp_path / "m.json"
    whiten.fit_baseline(ref).save(model)
    small, big = tmp_path / "small.csv", tmp_path / "big.csv"
    _write(small, 100_000, rng)  # past the allocator's warm-up
    _write(big, 600_000, rng)
    kb_small, _ = _peak_kb(["score", str(small), "--baseline", str(model), "-o", str(tmp_path / "a.csv"),
                            "--chunksize", "20000"])
    kb_big, out = _peak_kb(["score", str(big), "--baseline", str(model), "-o", str(tmp_path / "b.csv"),
                            "--chunksize", "20000"])
    grew_mb = (kb_big - kb_small) / 1024
    in_memory_mb = (600_000 - 100_000) * 6 * 8 / 2**20  # 23 MB of float64 alone; VmHWM varies ~4 MB run to run
    assert grew_mb < 0.5 * in_memory_mb, (kb_small, kb_big)
    # and nothing was lost: one output line per input row
    with open(tmp_path / "b.csv") as fh:
        assert sum(1 for _ in fh) == 600_000 + 1
    assert "scored 600000 rows" in out
