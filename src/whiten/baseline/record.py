"""What a baseline remembers: the settings it was read and fitted with, and where it came from.

``settings`` (:attr:`Baseline.settings`) is what scoring needs to read new rows
the same way: ``index_column`` and ``index_kind`` (``"time"``, ``"number"``
or ``"text"``, judged from the training labels), ``columns`` (the sensors, in
order), ``na_values`` (codes read as missing), ``missing``, ``estimator`` and
its ``options``.

``provenance`` (:attr:`Baseline.provenance`) says where the model came from:
``source`` (the file name, or ``"DataFrame"``/``"array"``/``"chunks"``),
``source_bytes`` and ``source_sha256`` (of the file's bytes, for a file),
``rows_read`` and ``rows_used``, ``first_index`` and ``last_index`` (the
training period when the index holds times), ``whiten_version``,
``created_utc`` and ``call`` (the command line, or the Python call).
:func:`model_tag` is how scores, reports and charts name a model: the first
12 hex digits of the model file's checksum and the training period.
"""

from __future__ import annotations

import hashlib
import os
from typing import Any

__all__ = ["file_sha256", "settings_of", "provenance_of", "model_tag", "index_kind", "call_words"]

_BLOCK = 1 << 20


def file_sha256(path: str | os.PathLike) -> str:
    """SHA-256 (hex) of a file's bytes, read in 1 MiB blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(_BLOCK), b""):
            h.update(block)
    return h.hexdigest()


def index_kind(labels: list) -> str | None:
    """``"time"``, ``"number"`` or ``"text"`` for a few row labels (None when there are none)."""
    labels = [v for v in labels if v is not None]
    if not labels:
        return None
    if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in labels):
        return "number"
    import warnings

    import pandas as pd

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pd.to_datetime(pd.Series([str(v) for v in labels]), errors="raise")
    except (ValueError, TypeError, OverflowError):
        return "text"
    return "time"


def _plain(v: Any) -> Any:
    if hasattr(v, "item"):
        v = v.item()
    if hasattr(v, "isoformat"):
        return v.isoformat()
    return v if isinstance(v, (int, float, str)) or v is None else str(v)


def settings_of(*, columns: list[str], index_column: str | None, first: Any, last: Any, na_values: tuple,
                missing: str, estimator: str, options: dict) -> dict:
    return {"index_column": index_column, "index_kind": index_kind([first, last]) if index_column else None,
            "columns": list(columns), "na_values": list(na_values), "missing": missing, "estimator": estimator,
            "options": {k: _plain(v) for k, v in options.items()}}


def provenance_of(data: Any, *, rows_read: int, rows_used: int, first: Any, last: Any, call: str | None,
                  created_utc: str) -> dict:
    from .._version import __version__

    out: dict = {"source": None, "source_bytes": None, "source_sha256": None}
    path = getattr(data, "path", data)
    if isinstance(path, (str, os.PathLike)) and os.path.isfile(path):
        out.update(source=os.path.basename(os.fspath(path)), source_bytes=os.path.getsize(path),
                   source_sha256=file_sha256(path))
    else:
        out["source"] = type(data).__name__ if not isinstance(data, list) else "chunks"
    out.update(rows_read=int(rows_read), rows_used=int(rows_used), first_index=_plain(first),
               last_index=_plain(last), whiten_version=__version__, created_utc=created_utc,
               call=call or "whiten.fit_baseline(...)")
    return out


def call_words(data: Any, options: dict) -> str:
    """The Python call as it was made, for ``provenance["call"]`` (arrays shown by their shape)."""
    shown = getattr(data, "path", data)
    if isinstance(shown, (str, os.PathLike)):
        first = repr(os.fspath(shown))
    else:
        shape = getattr(data, "shape", None)
        first = f"<{type(data).__name__}{' ' + 'x'.join(map(str, shape)) if shape else ''}>"
    rest = "".join(f", {k}={v!r}" for k, v in options.items() if v is not None)
    return f"whiten.fit_baseline({first}{rest})"


def model_tag(baseline: Any, checksum: str | None = None) -> str:
    """How outputs name a model: ``model 3f2a9c01b7de, trained on 2026-05-04 00:00:00 .. 2026-05-08 03:45:00``."""
    prov = getattr(baseline, "provenance", None) or {}
    parts = []
    if checksum:
        parts.append(f"model {checksum[:12]}")
    if prov.get("first_index") is not None:
        parts.append(f"trained on {prov['first_index']} .. {prov['last_index']}"
                     + (f" ({prov['source']})" if prov.get("source") else ""))
    elif prov.get("source"):
        parts.append(f"trained on {prov['source']}")
    return ", ".join(parts)
