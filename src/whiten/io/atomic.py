"""Atomic file output: write to a temporary file in the same folder, then rename.

A reader never sees half a file, and an existing file is replaced only when
the caller says so (``force=True``).
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import IO

from ..errors import InputError

__all__ = ["check_writable", "atomic_open", "write_text", "write_bytes", "same_file"]


def check_writable(path: str | os.PathLike, *, force: bool = False, what: str = "output") -> Path:
    """Refuse to replace an existing file unless ``force``; the folder must exist."""
    p = Path(path)
    if p.exists() and not force:
        raise InputError(f"{what} file {str(p)!r} already exists; pass force=True (--force) to replace it")
    if p.exists() and p.is_dir():
        raise InputError(f"{what} path {str(p)!r} is a folder, not a file")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise InputError(f"{what} folder {str(parent)!r} does not exist; create it first")
    return p


def same_file(a: str | os.PathLike, b: str | os.PathLike) -> bool:
    """Whether two paths name one file (links and relative spellings included), so an input is never
    written over."""
    pa, pb = Path(a), Path(b)
    if pa.exists() and pb.exists():
        with contextlib.suppress(OSError):
            return os.path.samefile(pa, pb)
    return pa.resolve() == pb.resolve()


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike, mode: str = "w", *, force: bool = False,
                what: str = "output", encoding: str | None = "utf-8") -> Iterator[IO]:
    """Open a temporary sibling of ``path`` for writing; rename it into place on success.

    On any exception the temporary file is removed and ``path`` is untouched.
    """
    p = check_writable(path, force=force, what=what)
    binary = "b" in mode
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=str(p.parent or "."))
    try:
        with os.fdopen(fd, mode, encoding=None if binary else encoding, newline=None if binary else "") as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        if p.exists() and not force:  # appeared while we were writing
            raise InputError(f"{what} file {str(p)!r} appeared while writing; not replaced")
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text(path: str | os.PathLike, text: str, *, force: bool = False, what: str = "output") -> Path:
    with atomic_open(path, "w", force=force, what=what) as fh:
        fh.write(text)
    return Path(path)


def write_bytes(path: str | os.PathLike, data: bytes, *, force: bool = False, what: str = "output") -> Path:
    with atomic_open(path, "wb", force=force, what=what) as fh:
        fh.write(data)
    return Path(path)
