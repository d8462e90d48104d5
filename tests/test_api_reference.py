"""The API reference (docs/api.rst) lists every public name.

Public means: every name in ``whiten.__all__`` and in the ``__all__`` of the
subpackages a user imports from (monitor, report, regression, likelihood,
linalg, linalg.structured, errors). A name counts as listed when an
``auto...`` directive names it, or when it sits in a module the page documents
with ``:members:``. whiten.baseline and whiten.estimate are internal layers
(their user-facing names are re-exported at the top level), so their
``__all__`` is not part of the reference.
"""

from __future__ import annotations

import importlib
import re
from pathlib import Path

import pytest

API = Path(__file__).resolve().parents[1] / "docs" / "api.rst"
PUBLIC = ("whiten", "whiten.monitor", "whiten.report", "whiten.regression", "whiten.likelihood",
          "whiten.linalg", "whiten.linalg.structured", "whiten.errors")


def _documented() -> tuple[set[str], set[str]]:
    text = API.read_text(encoding="utf-8")
    named = set()
    members_of = set()
    for m in re.finditer(r"^\.\. auto(\w+):: ([\w.]+)\n((?:   .*\n)*)", text, flags=re.M):
        kind, target, options = m.groups()
        named.add(target.rsplit(".", 1)[-1])
        if kind == "module" and re.search(r"^   :members:\s*$", options, flags=re.M):
            members_of.add(target)
    return named, members_of


@pytest.mark.parametrize("package", PUBLIC)
def test_every_public_name_is_in_the_api_reference(package):
    named, members_of = _documented()
    mod = importlib.import_module(package)
    missing = []
    for name in mod.__all__:
        if name.startswith("__"):
            continue
        obj = getattr(mod, name)
        home = getattr(obj, "__module__", None) if not isinstance(obj, type(mod)) else obj.__name__
        if name in named or home in members_of:
            continue
        missing.append(name)
    assert not missing, f"{package}: names missing from docs/api.rst: {missing}"


def test_the_scan_sees_a_missing_name(tmp_path, monkeypatch):
    # the check itself can fail: drop one directive and the name is reported
    text = API.read_text(encoding="utf-8")
    assert ".. autofunction:: whiten.monitor.episodes\n" in text
    fake = tmp_path / "api.rst"
    fake.write_text(text.replace(".. autofunction:: whiten.monitor.episodes\n", ""), encoding="utf-8")
    monkeypatch.setitem(globals(), "API", fake)
    with pytest.raises(AssertionError, match="episodes"):
        test_every_public_name_is_in_the_api_reference("whiten.monitor")
