"""The docstring examples of every module hold (doctest, standard library): one collector for the package.

Modules are found by walking the installed package, so a new module's examples
are checked without anyone adding it to a list.
"""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import whiten


def _modules() -> list[str]:
    names = ["whiten"]
    for info in pkgutil.walk_packages(whiten.__path__, prefix="whiten."):
        if info.name.rsplit(".", 1)[-1] != "__main__":
            names.append(info.name)
    return sorted(names)


def _with_examples() -> list[str]:
    out = []
    finder = doctest.DocTestFinder(exclude_empty=True)
    for name in _modules():
        mod = importlib.import_module(name)
        if any(t.examples for t in finder.find(mod, name)):
            out.append(name)
    return out


WITH_EXAMPLES = _with_examples()


def test_the_collector_finds_the_packages_examples():
    # a collector that silently found nothing would pass every parametrized case below
    assert len(_modules()) > 60
    for area in ("linalg", "gaussian", "baseline", "monitor", "regression", "likelihood", "report", "_numerics"):
        assert any(m.startswith(f"whiten.{area}") for m in WITH_EXAMPLES), area


@pytest.mark.parametrize("module", WITH_EXAMPLES)
def test_docstring_examples(module, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # examples that write files write them here
    res = doctest.testmod(importlib.import_module(module), optionflags=doctest.NORMALIZE_WHITESPACE)
    assert res.attempted > 0 and res.failed == 0
