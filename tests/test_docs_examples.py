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


def test_readme_command_line_block_runs_as_written(tmp_path):
    from tests.helpers import commands

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = commands.markdown_blocks(text, "### Command line")
    cmds = commands.commands(blocks[0])
    assert any(c.startswith("whiten regress") for c in cmds)
    cwd = tmp_path
    for c in cmds:
        cwd = commands.run(c, cwd)
    assert (tmp_path / "fit.json").exists() and (tmp_path / "batch_loglik.csv").exists()


def test_every_regress_example_names_bundled_columns():
    """Each `whiten regress` line in README and docs names a file and columns the regression demo provides."""
    import re as _re

    from whiten.demos import kiln_energy

    known = set(kiln_energy.table().columns)
    texts = [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.rst")), ROOT / "src/whiten/cli/regress.py"]
    seen = 0
    for path in texts:
        body = path.read_text(encoding="utf-8").replace("\\\n", " ")
        for line in _re.findall(r"whiten regress \S+\.csv[^\n`]*", body):
            seen += 1
            assert "kiln_energy.csv" in line, f"{path.name}: {line}"
            for flag in ("--response", "--weights"):
                m = _re.search(flag + r" (\S+)", line)
                if m:
                    assert m.group(1) in known, f"{path.name}: {line}"
            m = _re.search(r"--predictors (\S+)", line)
            if m:
                assert set(m.group(1).split(",")) <= known, f"{path.name}: {line}"
    assert seen >= 3
