"""Read options shared by every command that reads a table: missing-value codes and column renames."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from ..errors import InputError

__all__ = ["na_list", "rename_map"]


def na_list(na_values: Sequence[str] | str | None) -> tuple[str, ...]:
    """The missing-value codes, checked: a comma-separated string or a sequence of non-empty strings."""
    if na_values is None:
        return ()
    items = na_values.split(",") if isinstance(na_values, str) else list(na_values)
    out = []
    for v in items:
        if not isinstance(v, str) or not v.strip():
            raise InputError(f"--na-values / na_values: expected codes such as -9999,ERR,n/a (comma-separated), "
                             f"got {na_values!r}")
        out.append(v.strip())
    return tuple(dict.fromkeys(out))


def rename_map(value: Any) -> dict[str, str] | None:
    """``"old=new,old2=new2"`` (or a dict) as ``{"old": "new", ...}``, checked; None stays None."""
    if value is None:
        return None
    if isinstance(value, dict):
        pairs = [(str(k), str(v)) for k, v in value.items()]
    else:
        pairs = []
        for part in str(value).split(","):
            old, eq, new = part.partition("=")
            if not eq or not old.strip() or not new.strip():
                raise InputError(f"--rename / rename: expected old=new pairs separated by commas (e.g. "
                                 f"--rename P1=suction_bar,P2=discharge_bar), got {part.strip()!r}")
            pairs.append((old.strip(), new.strip()))
    olds = [o for o, _ in pairs]
    if len(set(olds)) != len(olds):
        raise InputError(f"--rename / rename: a column is renamed twice: {olds}")
    return dict(pairs)
