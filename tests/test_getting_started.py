"""docs/getting-started.rst runs as written, shell commands and Python blocks in page order, in an empty folder."""

from __future__ import annotations

import pathlib
import re
import warnings

from tests.helpers import commands

PAGE = pathlib.Path(__file__).resolve().parents[1] / "docs" / "getting-started.rst"
_BLOCK = re.compile(r"^\.\. code-block:: (python|shell)\n((?:[ \t]*\n|(?: {4}).*\n)+)", re.M)


def _blocks() -> list[tuple[str, str]]:
    out = []
    for m in _BLOCK.finditer(PAGE.read_text(encoding="utf-8")):
        body = "\n".join(ln[4:] for ln in m.group(2).splitlines()).strip() + "\n"
        out.append((m.group(1), body))
    return out


def test_the_page_covers_the_first_jobs():
    blocks = _blocks()
    shell = " ".join(b for kind, b in blocks if kind == "shell")
    for cmd in ("pip install", "whiten demo", "whiten baseline", "whiten score", "whiten regress", "whiten loglik"):
        assert cmd in shell
    assert sum(kind == "python" for kind, _ in blocks) >= 3


def test_getting_started_runs_in_an_empty_folder(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    cwd = tmp_path
    namespace: dict = {"__name__": "__getting_started__"}
    for k, (kind, body) in enumerate(_blocks()):
        if kind == "shell":
            for c in commands.commands(body):
                cwd = commands.run(c, cwd)
        else:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UserWarning)
                exec(compile(body, f"getting-started.rst[block {k}]", "exec"), namespace)
    for name in ("loop.json", "scores.csv", "scores.html", "kiln_fit.json", "cooling_loglik.csv"):
        assert (tmp_path / name).exists(), name
