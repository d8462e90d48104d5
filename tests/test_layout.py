"""The package's layout rules, read from the source (AST), imports inside functions included.

* no import circle anywhere in ``src/whiten``;
* no upward import: every import goes to the same layer or a lower one (the
  layers are listed below, the same picture as DEVELOPERS.md);
* the in-memory code never imports an engine package (``whiten.parallel``): the
  engines are reached through the seam ``whiten._engines``;
* only ``whiten.linalg`` calls LAPACK/BLAS (imports ``scipy.linalg``), and it
  imports nothing of the package but the base modules;
* no source file over 500 lines.

A module's dependency is the module it names: ``from whiten.a import b`` is an
edge to ``whiten.a.b`` when that is a module, else to ``whiten.a``. Importing a
submodule also runs its package's ``__init__``, but a package re-exporting its
own submodules is not a circle of design, so that implicit edge is not counted.
"""

from __future__ import annotations

import ast
import pathlib

import pytest

SRC = pathlib.Path(__file__).resolve().parents[1] / "src" / "whiten"
MAX_LINES = 500

#: bottom to top; a module belongs to the first entry that is a prefix of its name
LAYERS: list[tuple[str, ...]] = [
    ("whiten.errors", "whiten._numerics", "whiten._warn", "whiten._settings", "whiten._records",
     "whiten._palette", "whiten._version", "whiten._engines"),
    ("whiten._validate", "whiten.io.atomic", "whiten.io.modelfile"),
    ("whiten.linalg",),
    ("whiten.gaussian", "whiten.estimate", "whiten.io"),
    ("whiten.monitor", "whiten.regression", "whiten.likelihood"),
    ("whiten.baseline",),
    ("whiten.parallel",),
    ("whiten.report", "whiten.demos"),
    ("whiten.cli",),
    ("whiten",),
]
LINALG_MAY_IMPORT = ("whiten.errors", "whiten._validate", "whiten._settings", "whiten._warn", "whiten._numerics")


def _module_name(path: pathlib.Path) -> str:
    parts = list(path.relative_to(SRC.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, pathlib.Path]:
    return {_module_name(p): p for p in sorted(SRC.rglob("*.py"))}


MODULES = _modules()


def _imports(name: str, path: pathlib.Path) -> list[tuple[str, int]]:
    """(imported module, line) for every import in the file, at any depth; external ones included."""
    is_pkg = path.name == "__init__.py"
    package = name.split(".") if is_pkg else name.split(".")[:-1]
    out = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            out += [(a.name, node.lineno) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            for a in node.names:
                sub = f"{mod}.{a.name}"
                out.append((sub if sub in MODULES else mod, node.lineno))
    return out


GRAPH = {m: sorted({t for t, _ in _imports(m, p) if t in MODULES and t != m}) for m, p in MODULES.items()}


def _layer(name: str) -> int:
    for k, group in enumerate(LAYERS):
        if any(name == g or name.startswith(g + ".") for g in group):
            return k
    raise AssertionError(f"{name}: not placed in a layer; add it to LAYERS in tests/test_layout.py")


def _cycles() -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan, 1972)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    found = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in GRAPH[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                found.append(sorted(comp))

    for v in GRAPH:
        if v not in index:
            visit(v)
    return found


def test_the_scan_sees_the_package():
    # a scan that found no modules or no edges would pass every rule below
    assert len(MODULES) > 60 and sum(len(v) for v in GRAPH.values()) > 150
    assert "whiten.linalg.factor" in GRAPH["whiten.gaussian"]


def test_no_import_circle():
    assert _cycles() == []


def test_a_planted_circle_is_found(monkeypatch):
    # the detector itself: two modules importing each other must be reported
    monkeypatch.setitem(GRAPH, "whiten.errors", GRAPH["whiten.errors"] + ["whiten._numerics"])
    monkeypatch.setitem(GRAPH, "whiten._numerics", GRAPH["whiten._numerics"] + ["whiten.errors"])
    assert ["whiten._numerics", "whiten.errors"] in _cycles()


def test_no_upward_import():
    bad = []
    for m, path in MODULES.items():
        for t, line in _imports(m, path):
            if t not in MODULES or t == m:
                continue
            if t == "whiten" and m.startswith(("whiten.cli", "whiten.demos")):
                continue  # the command line and the demos use the public API
            if _layer(t) > _layer(m):
                bad.append(f"{path.relative_to(SRC.parent)}:{line}: {m} imports {t} (a higher layer)")
    assert bad == []


def test_in_memory_code_never_imports_an_engine():
    bad = [f"{m} imports {t}" for m, deps in GRAPH.items() for t in deps
           if t.startswith("whiten.parallel") and not m.startswith("whiten.parallel") and m != "whiten"]
    assert bad == []


def test_only_linalg_calls_lapack_and_linalg_imports_only_the_base():
    bad = []
    for m, path in MODULES.items():
        in_linalg = m.startswith("whiten.linalg")
        for t, line in _imports(m, path):
            where = f"{path.relative_to(SRC.parent)}:{line}"
            if t.startswith("scipy.linalg") and not in_linalg:
                bad.append(f"{where}: {m} imports {t}; ask a Factor or a whiten.linalg function instead")
            if in_linalg and t.startswith("whiten") and not t.startswith("whiten.linalg") \
                    and t not in LINALG_MAY_IMPORT:
                bad.append(f"{where}: {m} imports {t}; linalg may import only {LINALG_MAY_IMPORT}")
    assert bad == []


def test_scipy_linalg_spelled_as_from_scipy_import_linalg_is_caught():
    # "from scipy import linalg" names the module scipy.linalg only through the alias rule above
    tree = ast.parse("from scipy import linalg\n")
    node = tree.body[0]
    assert isinstance(node, ast.ImportFrom) and node.module == "scipy" and node.names[0].name == "linalg"
    hits = [m for m, p in MODULES.items() if not m.startswith("whiten.linalg")
            for n in ast.walk(ast.parse(p.read_text(encoding="utf-8")))
            if isinstance(n, ast.ImportFrom) and n.module == "scipy" and any(a.name == "linalg" for a in n.names)]
    assert hits == []


@pytest.mark.parametrize("module", sorted(MODULES))
def test_no_source_file_over_500_lines(module):
    n = len(MODULES[module].read_text(encoding="utf-8").splitlines())
    assert n <= MAX_LINES, f"{MODULES[module].relative_to(SRC.parent)} has {n} lines; split it into rooms"
