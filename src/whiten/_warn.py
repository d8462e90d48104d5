"""Warnings that point at the user's line, not at whiten's internals."""

from __future__ import annotations

import os
import sys
import types
import warnings

_PKG_DIR = os.path.dirname(os.path.abspath(__file__))


def _user_stacklevel() -> int:
    """stacklevel of the first frame outside the whiten package."""
    level = 1
    frame: types.FrameType | None = sys._getframe(1)
    while frame is not None:
        fname = os.path.abspath(frame.f_code.co_filename)
        if not fname.startswith(_PKG_DIR + os.sep):
            return level
        frame = frame.f_back
        level += 1
    return level  # pragma: no cover - only whiten frames on the stack


def warn(category: type[Warning], message: str) -> None:
    """Issue ``message`` attributed to the caller's code outside whiten."""
    warnings.warn(message, category, stacklevel=_user_stacklevel())
