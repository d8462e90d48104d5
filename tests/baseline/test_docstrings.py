"""The docstring examples of the baseline modules hold (doctest, standard library)."""

from __future__ import annotations

import doctest
import importlib

import pytest


@pytest.mark.parametrize("module", ["whiten.baseline", "whiten.io.tables"])
def test_docstring_examples(module):
    mod = importlib.import_module(module)
    res = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert res.attempted > 0 and res.failed == 0
