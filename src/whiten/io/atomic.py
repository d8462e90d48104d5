"""Atomic file output: write to a temporary file in the same folder, then rename.

A reader never sees half a file, and an existing file is replaced only when
the caller says so (``force=True``).

The temporary file is ``.<name>.w<pid>.<random>.part`` beside the output. It
is removed on any exception, including ``KeyboardInterrupt`` (SIGINT) and the
``SystemExit`` the command line raises on SIGTERM; a run killed outright
(SIGKILL, power loss) leaves it behind. The next write into the same folder
finds such files (their process no longer runs), reports them with a warning,
and removes them when ``force=True`` (``--force``). The finished file gets
the permissions of any new file (``0666`` less the umask), not the private
mode of the temporary file.
"""

from __future__ import annotations

import contextlib
import os
import re
import tempfile
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import IO

from ..errors import InputError

__all__ = ["check_writable", "atomic_open", "write_text", "write_bytes", "same_file", "stale_parts",
           "refuse_inputs"]

_PART = re.compile(r"^\..+\.w(\d+)\.[^.]+\.part$")


def check_writable(path: str | os.PathLike, *, force: bool = False, what: str = "output") -> Path:
    """Refuse to replace an existing file unless ``force``; the folder must exist."""
    p = Path(path)
    if p.exists() and not force:
        raise InputError(f"{what} file {str(p)!r} already exists; replace it with --force (force=True "
                         "in Python), or choose another name")
    if p.exists() and p.is_dir():
        raise InputError(f"{what} path {str(p)!r} is a folder, not a file")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise InputError(f"{what} folder {str(parent)!r} does not exist; create it first")
    return p


def refuse_inputs(outputs: dict, inputs: dict) -> None:
    """InputError when an output path names an input file or another output (resolved paths compared).

    ``outputs`` and ``inputs`` map how the user named each path (an option
    such as ``"-o"``) to the path; ``None`` entries are skipped.
    """
    outs = [(k, v) for k, v in outputs.items() if v is not None]
    for k, v in outs:
        for ik, iv in inputs.items():
            if iv is not None and same_file(v, iv):
                raise InputError(f"{k} {str(v)!r} names the {ik} file, which is read, never written over; "
                                 "write the output elsewhere")
    for i, (k, v) in enumerate(outs):
        for k2, v2 in outs[i + 1:]:
            if same_file(v, v2):
                raise InputError(f"{k} and {k2} name the same file {str(v)!r}; give each output its own name")


def stale_parts(folder: str | Path) -> list[Path]:
    """Temporary files of whiten writes in ``folder`` whose process no longer runs (a killed run)."""
    found = []
    try:
        entries = list(os.scandir(str(folder)))
    except OSError:
        return []
    for e in entries:
        m = _PART.match(e.name)
        if not m or not e.is_file(follow_symlinks=False):
            continue
        pid = int(m.group(1))
        if pid == os.getpid():
            continue
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            found.append(Path(e.path))
        except (PermissionError, OverflowError, OSError):
            continue  # PermissionError: a live process of another user
    return sorted(found)


def _handle_stale(folder: Path, force: bool) -> None:
    stale = stale_parts(folder)
    if not stale:
        return
    size = sum(f.stat().st_size for f in stale if f.exists())
    names = ", ".join(f.name for f in stale[:3]) + (f" and {len(stale) - 3} more" if len(stale) > 3 else "")
    if force:
        for f in stale:
            with contextlib.suppress(FileNotFoundError):
                f.unlink()
        warnings.warn(f"removed {len(stale)} temporary file(s) left in {str(folder)!r} by a run that was "
                      f"killed ({names}; {size} bytes)", UserWarning, stacklevel=4)
    else:
        warnings.warn(f"{len(stale)} temporary file(s) in {str(folder)!r} were left by a run that was killed "
                      f"({names}; {size} bytes); remove them, or run again with --force (force=True in "
                      "Python) to have them removed", UserWarning, stacklevel=4)


def _umask() -> int:
    old = os.umask(0o022)
    os.umask(old)
    return old


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
    folder = p.parent if str(p.parent) else Path(".")
    _handle_stale(folder, force)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.w{os.getpid()}.", suffix=".part", dir=str(folder))
    try:
        with os.fdopen(fd, mode, encoding=None if binary else encoding, newline=None if binary else "") as fh:
            yield fh
            fh.flush()
            os.fchmod(fh.fileno(), 0o666 & ~_umask())
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
