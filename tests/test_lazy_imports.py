"""`whiten --help` stays light, the lazy re-exports agree, and progress is shown as issue 20 (item 5) asks."""

from __future__ import annotations

import ast
import io
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import COMMANDS, main
from whiten.io import progress as prog

HEAVY = ("scipy", "pandas", "matplotlib", "pyarrow", "tqdm")
_PROBE = """
import sys
from whiten.cli import main
try:
    main({argv!r})
except SystemExit:
    pass
print("IMPORTED=" + ",".join(m for m in {heavy!r} if m in sys.modules))
"""


@pytest.mark.parametrize("command", [None, *COMMANDS])
def test_help_imports_no_heavy_package(command):
    """A fresh interpreter prints the help; sys.modules then holds none of the heavy packages."""
    argv = ["--help"] if command is None else [command, "--help"]
    res = subprocess.run([sys.executable, "-c", _PROBE.format(argv=argv, heavy=HEAVY)], capture_output=True,
                         text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    last = res.stdout.strip().splitlines()[-1]
    assert "usage: whiten" in res.stdout and last == "IMPORTED=", last


def test_every_public_name_resolves_and_the_lazy_table_matches_the_typing_block():
    for name in whiten.__all__:
        assert getattr(whiten, name) is not None, name
    tree = ast.parse(Path(whiten.__file__).read_text())
    typed = set()
    for node in tree.body:
        if isinstance(node, ast.If):  # the TYPE_CHECKING block
            for sub in node.body:
                if isinstance(sub, ast.ImportFrom):
                    typed |= {a.asname or a.name for a in sub.names}
    eager = set(vars(whiten))
    assert typed - set(whiten._LAZY) <= eager | {"_engines"}
    assert set(whiten._LAZY) <= typed
    with pytest.raises(AttributeError, match="no attribute 'nonexistent'"):
        _ = whiten.nonexistent


class Clock:
    def __init__(self, times):
        self.times = list(times)

    def __call__(self):
        return self.times.pop(0)


def test_log_lines_come_about_every_ten_seconds():
    out = io.StringIO()
    # start, then updates at 3 s, 11 s (line), 15 s, 22 s (line)
    p = prog.Progress("scoring", 1000, mode="lines", stream=out, clock=Clock([0, 3, 11, 15, 22]))
    for done in (100, 250, 400, 550):
        p.update(done, rows=done // 10)
    p.close()
    lines = out.getvalue().splitlines()
    # time left = time so far x bytes to go / bytes done: 11 * 750/250 = 33 s, 22 * 450/550 = 18 s
    assert lines == ["whiten: scoring: 250 B of 1.0 kB read (25%), 25 rows, about 0:33 left",
                     "whiten: scoring: 550 B of 1.0 kB read (55%), 55 rows, about 0:18 left"]


def test_terminal_bar_shows_bytes_of_total_and_time_left():
    out = io.StringIO()
    p = prog.Progress("reading", 4_000_000, mode="bar", stream=out, clock=Clock([0, 5]))
    p.update(1_000_000, rows=5000)
    text = out.getvalue()
    assert text.startswith("\rreading  [#####") and "1.0 MB of 4.0 MB read (25%)" in text and "0:15 left" in text
    p.close()
    assert out.getvalue().endswith("\r")


def test_mode_follows_the_stream():
    class Tty(io.StringIO):
        def isatty(self):
            return True

    assert prog.mode_of(None, Tty()) == "bar"
    assert prog.mode_of(None, io.StringIO()) == "lines"
    assert prog.mode_of(False, Tty()) is None and prog.mode_of(True, io.StringIO()) == "bar"


@pytest.fixture
def files(tmp_path):
    rng = np.random.default_rng(5)
    pd.DataFrame(rng.normal(size=(300, 2)), columns=["a", "b"]).to_csv(tmp_path / "r.csv", index=False)
    assert main(["baseline", str(tmp_path / "r.csv"), "-o", str(tmp_path / "m.json"), "--quiet"]) == 0
    return tmp_path


def test_score_logs_progress_when_stderr_is_not_a_terminal(files, capsys, monkeypatch):
    monkeypatch.setattr(prog, "LOG_EVERY", 0.0)  # a line at every chunk instead of every 10 s
    d = files
    assert main(["score", str(d / "r.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "s.csv"),
                 "--chunksize", "100"]) == 0
    err = capsys.readouterr().err
    size = (d / "r.csv").stat().st_size
    lines = [ln for ln in err.splitlines() if ln.startswith("whiten: scoring:")]
    assert len(lines) == 3 and "300 rows" in lines[-1] and f"of {prog._size(size)} read" in lines[-1]
    assert main(["score", str(d / "r.csv"), "--baseline", str(d / "m.json"), "-o", str(d / "q.csv"),
                 "--chunksize", "100", "--quiet"]) == 0
    assert "whiten: scoring" not in capsys.readouterr().err
