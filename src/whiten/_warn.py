"""Warnings that point at the user's line, not at whiten's internals, printed once per call site.

Python's default filter shows a warning once per (text, category, line), so a
warning whose text carries numbers (an rcond, a rank) prints again on every
pass of a loop. :func:`warn` remembers the call site instead: the user's line
and the place in whiten that warns. Under the ``"default"``, ``"module"`` and
``"once"`` actions a second warning from the same site is not issued, whatever
its numbers; each result keeps its own health fields, so nothing is lost.
Under ``"always"`` or ``"error"`` (``pytest.warns``,
``warnings.catch_warnings(record=True)`` with ``simplefilter("always")``)
every warning is issued. The memory belongs to the active filter list, so a
new ``warnings.catch_warnings()`` block starts afresh, as Python's own
registry does.
"""

from __future__ import annotations

import os
import re
import sys
import types
import warnings
from typing import Any

_PKG_DIR = os.path.dirname(os.path.abspath(__file__))

#: appended to the first warning of a site when later ones are held back
REPEATS_NOTE = " (repeats from this line are not printed; each result's health fields hold them)"

# id(filter list) -> (the list, the call sites already warned under it); a few lists at most
_SEEN: dict[int, tuple[Any, set]] = {}
_MAX_LISTS = 16


def _user_frame() -> tuple[int, types.FrameType | None]:
    """stacklevel of the first frame outside the whiten package (for warn's caller), and that frame."""
    level = 1
    frame: types.FrameType | None = sys._getframe(2)
    while frame is not None:
        fname = os.path.abspath(frame.f_code.co_filename)
        if not fname.startswith(_PKG_DIR + os.sep):
            return level, frame
        frame = frame.f_back
        level += 1
    return level, None  # pragma: no cover - only whiten frames on the stack


def _user_stacklevel() -> int:
    """stacklevel of the first frame outside the whiten package."""
    return _user_frame()[0]


def _action(category: type[Warning], message: str, module: str, lineno: int) -> str:
    """The action the warning filters give this warning (first match wins, as in :mod:`warnings`)."""
    for action, msg, cat, mod, ln in warnings.filters:
        if ((msg is None or msg.match(message)) and issubclass(category, cat)
                and (mod is None or (mod.match(module) if hasattr(mod, "match") else re.match(mod, module)))
                and (ln == 0 or ln == lineno)):
            return action
    return str(getattr(warnings, "defaultaction", "default"))


def _seen_sites() -> set:
    filters = warnings.filters
    found = _SEEN.get(id(filters))
    if found is not None and found[0] is filters:
        return found[1]
    if len(_SEEN) >= _MAX_LISTS:
        _SEEN.clear()
    sites: set = set()
    _SEEN[id(filters)] = (filters, sites)
    return sites


def warn(category: type[Warning], message: str) -> None:
    """Issue ``message`` attributed to the caller's code outside whiten, once per call site."""
    level, frame = _user_frame()
    if frame is None:  # pragma: no cover
        warnings.warn(message, category, stacklevel=level + 1)
        return
    origin = sys._getframe(1)
    module = str(frame.f_globals.get("__name__", "<string>"))
    action = _action(category, message, module, frame.f_lineno)
    if action in ("default", "module", "once"):
        site = (category, frame.f_code.co_filename, frame.f_lineno, origin.f_code.co_filename, origin.f_lineno)
        seen = _seen_sites()
        if site in seen:
            return
        seen.add(site)
        message += REPEATS_NOTE
    warnings.warn(message, category, stacklevel=level + 1)
