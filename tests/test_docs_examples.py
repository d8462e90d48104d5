"""Every Python example in README.md runs (docstring examples: tests/test_docstrings.py)."""

from __future__ import annotations

import pathlib
import re

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _python_blocks(path: pathlib.Path) -> list[str]:
    return re.findall(r"```python\n(.*?)```", path.read_text(encoding="utf-8"), flags=re.S)


def test_readme_examples_run_in_order(tmp_path, monkeypatch):
    # the tour is one session: later blocks use names defined by earlier ones
    monkeypatch.chdir(tmp_path)
    blocks = _python_blocks(ROOT / "README.md")
    assert len(blocks) >= 5
    ns = {"__name__": "__readme__"}
    for i, code in enumerate(blocks):
        exec(compile(code, f"README.md[python block {i}]", "exec"), ns)
    assert (tmp_path / "week.html").stat().st_size > 10_000 and (tmp_path / "loop.json").exists()


def test_readme_quick_start_has_the_two_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    quick = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    cmds = re.findall(r"```\n(.*?)\n```", quick, flags=re.S)
    assert cmds == ['pip install -e . && whiten demo --out demo-output',
                    'pip install -e ".[test]" && python -m pytest']
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert cmds[1] in ci  # CI runs exactly the README's test command
