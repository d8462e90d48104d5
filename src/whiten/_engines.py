"""Where a job's engine is chosen: the one seam between the in-memory code and other engines.

The in-memory code (baselines, scoring, regression) never imports another
engine. Each public entry point that can run elsewhere asks
:func:`engine_for` first; when an engine claims the data, the call is handed
to it whole. Engines are registered by the top of the package
(``whiten/__init__.py``, which sits above every engine) with a cheap claim test
that imports nothing heavy and a loader that imports the engine only when
it is first needed. So the dependency points one way: the engines import the
domain packages' shared kernels; the domain packages import only this seam.

An engine is a module (or object) with the functions the entry points hand
over to: ``fit_baseline(data, **kw)``, ``score(baseline, data, **kw)`` and
``fit_linear(X, y, **kw)``.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

__all__ = ["register", "engine_for", "registered"]


@dataclass(frozen=True)
class _Entry:
    name: str
    claims: Callable[[Any], bool]
    load: Callable[[], Any]


_REGISTRY: list[_Entry] = []


def register(name: str, *, claims: Callable[[Any], bool], load: Callable[[], Any]) -> None:
    """Register an engine: ``claims(x)`` says whether it owns input ``x``; ``load()`` returns the engine.

    Registering a name again replaces the earlier entry.
    """
    _REGISTRY[:] = [e for e in _REGISTRY if e.name != name]
    _REGISTRY.append(_Entry(name, claims, load))


def registered() -> list[str]:
    """Names of the registered engines, in the order they are asked."""
    return [e.name for e in _REGISTRY]


def engine_for(*data: Any) -> Any | None:
    """The engine that claims any of ``data``, loaded; ``None`` for the in-memory engine."""
    for entry in _REGISTRY:
        if any(x is not None and entry.claims(x) for x in data):
            return entry.load()
    return None
