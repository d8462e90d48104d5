"""The library passes its linters: ruff (style, import order, likely bugs) and mypy (types).

Both read their settings from pyproject.toml, so they run from the repository root
exactly as a developer runs them by hand; a failure prints the tool's own report.
"""

from __future__ import annotations

import importlib.util
import pathlib
import subprocess
import sys

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _run(tool: str, *args: str, timeout: float) -> subprocess.CompletedProcess[str]:
    if importlib.util.find_spec(tool) is None:
        pytest.skip(f"{tool} is not installed in this environment (it comes with the test extra: "
                    "pip install -e '.[test]')")
    return subprocess.run([sys.executable, "-m", tool, *args], cwd=ROOT, capture_output=True, text=True,
                          timeout=timeout, check=False)


def _report(res: subprocess.CompletedProcess[str]) -> str:
    return f"exit {res.returncode}\n--- stdout ---\n{res.stdout}\n--- stderr ---\n{res.stderr}"


def test_ruff_finds_nothing_in_src():
    res = _run("ruff", "check", "src", "--no-fix", timeout=120)
    assert res.returncode == 0, _report(res)


@pytest.mark.slow
def test_mypy_finds_nothing_in_src():
    # a cold run (no .mypy_cache) takes about a minute on 2 shared cores
    res = _run("mypy", timeout=600)
    assert res.returncode == 0, _report(res)
