"""Sphinx configuration for the whiten documentation.

Build (warnings are errors, as in CI)::

    pip install -e ".[docs]"
    sphinx-build -W -b html docs docs/_build/html
"""

from __future__ import annotations

import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "src"))

import whiten  # noqa: E402

project = "whiten"
author = "the whiten authors"
copyright = "2026, the whiten authors"
release = whiten.__version__
version = ".".join(release.split(".")[:2])

# no MathJax (it would load from a CDN): formulas are written in plain text
extensions = ["sphinx.ext.autodoc", "numpydoc"]

source_suffix = {".rst": "restructuredtext"}
master_doc = "index"
exclude_patterns = ["_build", "benchmarks.md"]

autodoc_default_options = {"members": True, "undoc-members": False, "show-inheritance": False}
autodoc_member_order = "bysource"
autodoc_typehints = "none"
autosummary_generate = False
numpydoc_show_class_members = False
numpydoc_class_members_toctree = False
numpydoc_xref_param_type = False
numpydoc_validation_checks: set = set()

html_theme = "alabaster"
html_static_path: list = []
html_theme_options = {"nosidebar": False, "font_family": "system-ui, sans-serif",
                      "head_font_family": "system-ui, sans-serif", "code_font_family": "monospace"}
html_show_sourcelink = False
pygments_style = "sphinx"
# every cross-reference must resolve (the suite builds with -W); the docs are built offline, so the
# few classes of other packages named in signatures are listed here instead of fetched by intersphinx
nitpicky = False  # turned on once the docstrings below resolve
nitpick_ignore = [("py:class", "matplotlib.figure.Figure"), ("py:class", "pandas.DataFrame"),
                  ("py:class", "numpy.ndarray"), ("py:class", "dask.array.Array")]


_BENCH_INCLUDE = ".. literalinclude:: benchmarks.md\n   :language: text\n"


def _benchmark_page(app, docname, source):
    """The performance page shows docs/benchmarks.md (the benchmark runner's record) once it exists."""
    if docname == "performance" and not os.path.exists(os.path.join(HERE, "benchmarks.md")):
        source[0] = source[0].replace(_BENCH_INCLUDE, "No benchmark record has been written yet.\n")


def setup(app):
    app.connect("source-read", _benchmark_page)
    return {"parallel_read_safe": True}


def _cli_help_directive():
    """``.. whiten-cli-help::`` -- the ``--help`` text of every command, read from the parser itself."""
    import argparse

    from docutils.parsers.rst import Directive
    from docutils import nodes
    from docutils.statemachine import StringList
    from sphinx.util.nodes import nested_parse_with_titles

    class CliHelp(Directive):
        has_content = False

        def run(self):
            from whiten.cli import build_parser

            os.environ["COLUMNS"] = "88"  # argparse wraps to the terminal width; fix it for the page
            parser = build_parser()
            sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
            lines = []
            for name, p in sub.choices.items():
                title = f"whiten {name}"
                lines += [title, "-" * len(title), "", "::", ""]
                lines += ["    " + ln if ln.strip() else "" for ln in p.format_help().splitlines()]
                lines += [""]
            holder = nodes.section()
            holder.document = self.state.document
            nested_parse_with_titles(self.state, StringList(lines, source="whiten --help"), holder)
            return holder.children

    return CliHelp


_setup_benchmarks = setup


def setup(app):  # noqa: F811 - extends the setup above
    app.add_directive("whiten-cli-help", _cli_help_directive())
    return _setup_benchmarks(app)
