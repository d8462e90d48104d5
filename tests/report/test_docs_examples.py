"""The documentation: every ``.. code-block:: python`` in docs/*.rst runs, and the Sphinx build is clean.

The blocks of one page run in order in one namespace (later blocks use
earlier ones), in a temporary working folder so that files they write do not
land in the repository.
"""

from __future__ import annotations

import importlib.util
import pathlib
import re
import subprocess
import sys
import warnings

import pytest

DOCS = pathlib.Path(__file__).resolve().parents[2] / "docs"
_BLOCK = re.compile(r"^\.\. code-block:: python\n((?:[ \t]*\n|(?: {4}|\t).*\n)+)", re.M)


def python_blocks(path: pathlib.Path) -> list[str]:
    """The code of each ``.. code-block:: python`` directive of an rst file, dedented."""
    out = []
    for m in _BLOCK.finditer(path.read_text(encoding="utf-8")):
        lines = m.group(1).splitlines()
        out.append("\n".join(ln[4:] if ln.startswith("    ") else ln.strip() for ln in lines).strip() + "\n")
    return out


# getting-started mixes shell commands and Python in one session: tests/test_getting_started.py runs it
PAGES = sorted(p for p in DOCS.glob("*.rst") if python_blocks(p) and p.stem != "getting-started")


def test_extractor_finds_the_blocks():
    # the guides exist and the extractor sees their examples (a broken pattern would find none)
    names = {p.name for p in PAGES}
    assert {"guide-monitoring.rst", "guide-regression.rst", "guide-likelihood.rst", "numerics.rst",
            "reports.rst"} <= names
    sample = "x\n\n.. code-block:: python\n\n    a = 1\n\n    b = a + 1\n\nafter\n"
    found = _BLOCK.findall(sample)
    assert len(found) == 1 and "b = a + 1" in found[0] and "after" not in found[0]


@pytest.mark.parametrize("page", PAGES, ids=[p.stem for p in PAGES])
def test_page_examples_run(page, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    namespace: dict = {"__name__": f"__docs_{page.stem}__"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)   # the pages demonstrate warnings on purpose
        for k, code in enumerate(python_blocks(page)):
            exec(compile(code, f"{page.name}[python block {k}]", "exec"), namespace)


@pytest.mark.skipif(importlib.util.find_spec("sphinx") is None or importlib.util.find_spec("numpydoc") is None,
                    reason="sphinx and numpydoc not installed (pip install -e '.[docs]')")
def test_sphinx_build_has_no_warnings(tmp_path):
    out = tmp_path / "html"
    res = subprocess.run([sys.executable, "-m", "sphinx", "-W", "--keep-going", "-b", "html", "-q",
                          "-d", str(tmp_path / "doctrees"), str(DOCS), str(out)],
                         capture_output=True, text=True, timeout=300)
    assert res.returncode == 0, res.stderr[-4000:]
    assert (out / "index.html").exists() and (out / "api.html").exists()
    api = (out / "api.html").read_text(encoding="utf-8")
    # the API page is generated from the docstrings, not written by hand
    assert "whiten.cholesky" in api and "dpocon" in api and "monitoring_report" in api
    cli = (out / "cli.html").read_text(encoding="utf-8")
    # the command help is read from the parser, so every command and the --report option appear
    assert "whiten score" in cli and "whiten regress" in cli and cli.count("--report") >= 3
