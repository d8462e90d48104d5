"""Layout rules of the numerical core, checked from the source (AST, imports inside functions included)."""

from __future__ import annotations

import ast
import pathlib

import pytest

SRC = pathlib.Path(__file__).resolve().parents[2] / "src" / "whiten"
#: what the linalg package may import from whiten
LINALG_MAY_IMPORT = {"errors", "_validate", "_settings", "_warn", "_numerics", "linalg"}


def _module_name(path: pathlib.Path) -> str:
    rel = path.relative_to(SRC.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _imports(path: pathlib.Path) -> list[str]:
    """Absolute names of every module imported anywhere in the file (``from x import y`` gives x and x.y)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    mod = _module_name(path)
    package = mod if path.name == "__init__.py" else mod.rsplit(".", 1)[0]
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.extend(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                prefix = ".".join(base + ([node.module] if node.module else []))
            else:
                prefix = node.module or ""
            out.append(prefix)
            out.extend(f"{prefix}.{a.name}" for a in node.names)
    return out


def _files():
    return sorted(SRC.rglob("*.py"))


def test_only_linalg_imports_scipy_linalg():
    offenders = []
    for path in _files():
        if _module_name(path).startswith("whiten.linalg"):
            continue
        for name in _imports(path):
            if name == "scipy.linalg" or name.startswith("scipy.linalg."):
                offenders.append(f"{path.relative_to(SRC)}: {name}")
    assert not offenders, offenders


def test_linalg_imports_only_the_core():
    offenders = []
    for path in _files():
        if not _module_name(path).startswith("whiten.linalg"):
            continue
        for name in _imports(path):
            parts = name.split(".")
            if parts[0] == "whiten" and len(parts) > 1 and parts[1] not in LINALG_MAY_IMPORT:
                offenders.append(f"{path.relative_to(SRC)}: {name}")
    assert not offenders, offenders


def _graph(packages: tuple[str, ...]) -> dict[str, set[str]]:
    modules = {_module_name(p): p for p in _files()}
    graph: dict[str, set[str]] = {}
    for mod, path in modules.items():
        if not mod.startswith(packages):
            continue
        deps = set()
        for name in _imports(path):
            # "from .pkg import sub" names a module; "from .mod import func" names mod
            while name and name not in modules:
                name = name.rpartition(".")[0]
            if name and name != mod and name.startswith(packages):
                deps.add(name)
        graph[mod] = deps
    return graph


@pytest.mark.parametrize("area", ["whiten.linalg", "whiten.regression", "whiten.likelihood"])
def test_no_import_circles(area):
    """No module imports (even lazily) a module that imports it back; a package __init__ may re-export."""
    graph = _graph(("whiten.linalg", "whiten.regression", "whiten.likelihood"))

    def reach(start):
        seen, todo = set(), [start]
        while todo:
            for d in graph.get(todo.pop(), ()):
                # the package __init__ re-exports its submodules: entering it is not a way back
                if d not in seen and not (d in (area,) or d.count(".") == 1):
                    seen.add(d)
                    todo.append(d)
        return seen

    circles = [m for m in graph if m.startswith(area) and m.count(".") > 1 and m in reach(m)]
    assert not circles, circles
