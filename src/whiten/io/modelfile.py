"""Versioned model files: JSON with a format name, a payload and its SHA-256.

Layout (a format of whiten's own)::

    {
      "format": "whiten.baseline/2",
      "payload": { ... },
      "sha256": "<hex digest of the canonical payload>"
    }

The canonical payload is ``json.dumps(payload, sort_keys=True,
separators=(",", ":"), ensure_ascii=True, allow_nan=False)``; floats are
written by ``repr``, which reads back to the same binary64 value. Files are
written atomically (temporary file + rename, :mod:`whiten.io.atomic`) and never
replace an existing file unless ``force=True``.

The SHA-256 detects accidental damage (a truncated copy, a hand edit, a bad
disk); it is not an authentication: anyone who can edit the file can write a
matching checksum, so a model file from an untrusted source must be treated
like any other untrusted data. Reading is bounded: a file larger than
:data:`MAX_MODEL_BYTES` or nested deeper than :data:`MAX_DEPTH` is refused,
and every failure is a :class:`~whiten.errors.ModelFileError`.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
from pathlib import Path
from typing import Any

from .._numerics import json_ready
from ..errors import ModelFileError
from .atomic import write_text

__all__ = ["write_model", "read_model", "canonical", "checksum", "utc_now", "jsonable", "MAX_MODEL_BYTES",
           "MAX_DEPTH"]

MAX_MODEL_BYTES = 512 * 1024 * 1024
"""Largest model file read (512 MiB: a 4000-sensor baseline is about 170 MB)."""
MAX_DEPTH = 32
"""Deepest nesting of lists and objects in a model file (whiten writes at most 6 levels)."""


def _depth(value: Any, limit: int) -> int:
    """Nesting depth of parsed JSON, stopping once past ``limit``."""
    stack = [(value, 1)]
    deepest = 0
    while stack:
        v, d = stack.pop()
        if d > limit:
            return d
        deepest = max(deepest, d)
        if isinstance(v, dict):
            stack.extend((x, d + 1) for x in v.values() if isinstance(x, (dict, list)))
        elif isinstance(v, list):
            stack.extend((x, d + 1) for x in v if isinstance(x, (dict, list)))
    return deepest


def utc_now() -> str:
    """The current time as an ISO 8601 UTC string, e.g. ``2026-12-01T23:05:00Z``."""
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def jsonable(value: Any) -> Any:
    """Plain JSON types in the project's one rule (:mod:`whiten._numerics`): numpy scalars and arrays
    to Python, NaN to None, infinities to ``"inf"``/``"-inf"``; anything else unknown as its ``str``."""
    return json_ready(value, other=str)


def canonical(payload: dict) -> str:
    return json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)


def checksum(payload: dict) -> str:
    return hashlib.sha256(canonical(payload).encode("ascii")).hexdigest()


_MAGIC = ((b"\x89PNG", "a PNG image"), (b"PAR1", "a Parquet table"), (b"\x1f\x8b", "gzip-compressed data"),
          (b"PK\x03\x04", "a zip archive"), (b"BZh", "bzip2-compressed data"), (b"%PDF", "a PDF document"))


def _binary_kind(p: Path) -> str:
    """``": it looks like a Parquet table"`` from a file's first bytes, or ``""``."""
    try:
        with open(p, "rb") as fh:
            head = fh.read(8)
    except OSError:
        return ""
    for magic, word in _MAGIC:
        if head.startswith(magic):
            return f": it looks like {word}"
    return ""


def _table_kind(text: str) -> str | None:
    """``"a CSV table of 4 columns (header: stamp, a, b, c) and 120 data lines"`` when text reads as a table."""
    lines = [ln for ln in text.splitlines()[:50] if ln.strip()]
    if not lines or lines[0].lstrip().startswith(("{", "[")):
        return None
    for sep, word in ((",", "CSV"), ("\t", "tab-separated"), (";", "semicolon-separated")):
        n = lines[0].count(sep)
        if n and all(ln.count(sep) == n for ln in lines[:10]):
            names = [c.strip() for c in lines[0].split(sep)]
            shown = ", ".join(names[:6]) + (", ..." if len(names) > 6 else "")
            rows = sum(1 for ln in text.splitlines()[1:] if ln.strip())
            return f"a {word} table of {n + 1} columns (header: {shown}) and {rows} data line(s)"
    return "plain text" if len(lines) > 1 else None


def write_model(path: str | os.PathLike, fmt: str, payload: dict, *, force: bool = False) -> Path:
    """Write ``payload`` under format name ``fmt`` (e.g. ``"whiten.baseline/1"``), atomically.

    Raises
    ------
    InputError
        The file exists and ``force`` is False, or its folder does not exist.
    """
    payload = jsonable(payload)
    doc = {"format": fmt, "payload": payload, "sha256": checksum(payload)}
    text = json.dumps(doc, indent=1, sort_keys=True, ensure_ascii=True, allow_nan=False) + "\n"
    return write_text(path, text, force=force, what="model")


def read_model(path: str | os.PathLike, fmt: str, *, older: tuple[str, ...] = (),
               digest_to: dict | None = None) -> tuple[dict, str]:
    """Read and verify a model file written by :func:`write_model`; returns ``(payload, format)``.

    ``older`` lists earlier versions of ``fmt`` the caller can still read;
    ``digest_to``, a dict, receives the verified checksum under ``"sha256"``.

    Raises
    ------
    ModelFileError
        Missing, not JSON (e.g. truncated), another format or version, a
        payload whose checksum does not match (edited or damaged).
    """
    p = Path(path)
    if not p.exists():
        raise ModelFileError(f"model file {str(p)!r} not found")
    if p.is_dir():
        raise ModelFileError(f"model path {str(p)!r} is a folder, not a model file")
    try:
        size = p.stat().st_size
        if size > MAX_MODEL_BYTES:
            raise ModelFileError(f"model file {str(p)!r} is {size / 2**20:.0f} MiB, over the limit of "
                                 f"{MAX_MODEL_BYTES / 2**20:.0f} MiB for a model file; it is not a whiten model "
                                 "file, or a model too large to load safely")
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise ModelFileError(f"model file {str(p)!r} is not text{_binary_kind(p)}; it is not a whiten model "
                             "file") from None
    except OSError as exc:
        raise ModelFileError(f"model file {str(p)!r} cannot be read ({exc.strerror or exc})") from None
    if not text.strip():
        raise ModelFileError(f"model file {str(p)!r} is empty ({size} bytes{', only blank space' if size else ''}); "
                             "it is not a whiten model file: fit one with `whiten baseline`")
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        table = _table_kind(text)
        if table:
            raise ModelFileError(f"model file {str(p)!r} is not a model file: it looks like {table}. Fit a model "
                                 f"from a table with `whiten baseline {p.name} -o MODEL.json`") from None
        raise ModelFileError(
            f"model file {str(p)!r} is not valid JSON (line {exc.lineno}, column {exc.colno}): "
            "it is truncated or damaged; write it again") from None
    except (RecursionError, MemoryError, ValueError):
        raise ModelFileError(f"model file {str(p)!r} is nested too deeply or too large to be a whiten model "
                             "file") from None
    if _depth(doc, MAX_DEPTH) > MAX_DEPTH:
        raise ModelFileError(f"model file {str(p)!r} is nested deeper than {MAX_DEPTH} levels; it is not a "
                             "whiten model file")
    if not isinstance(doc, dict) or "format" not in doc:
        kind = "a JSON list" if isinstance(doc, list) else ("a JSON object" if isinstance(doc, dict) else "JSON")
        raise ModelFileError(f"model file {str(p)!r} is {kind} with no 'format' field; it is not a whiten model file")
    got = doc.get("format")
    want_name, _, want_ver = fmt.partition("/")
    if not isinstance(got, str) or got.partition("/")[0] != want_name:
        raise ModelFileError(f"model file {str(p)!r} holds format {got!r}, expected {fmt!r}")
    if got != fmt and got not in older:
        raise ModelFileError(
            f"model file {str(p)!r} is format version {got.partition('/')[2]!r}; this whiten reads "
            f"version {want_ver!r} ({fmt}). Refit the model with this version or upgrade whiten")
    payload, digest = doc.get("payload"), doc.get("sha256")
    if not isinstance(payload, dict) or not isinstance(digest, str):
        raise ModelFileError(f"model file {str(p)!r} lacks its payload or checksum")
    try:
        actual = checksum(payload)
    except (ValueError, TypeError, RecursionError):
        raise ModelFileError(f"model file {str(p)!r} holds values that are not plain JSON numbers") from None
    if actual != digest:
        raise ModelFileError(
            f"model file {str(p)!r} failed its SHA-256 check (stored {digest[:12]}..., computed "
            f"{actual[:12]}...): it was edited or damaged after writing; refit or restore it")
    if digest_to is not None:
        digest_to["sha256"] = actual
    return payload, got
