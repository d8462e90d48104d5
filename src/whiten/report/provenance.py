"""What was run: command line, files with their SHA-256 and row counts, version, time.

A report that travels to a maintenance ticket or a calibration record must let
a reader who never ran Python check that it belongs to the data in front of
them. :func:`file_record` fingerprints one file (SHA-256 of its bytes, size,
number of data rows for tables); :meth:`Provenance.collect` gathers the whole
"what was run" block.
"""

from __future__ import annotations

import bz2
import csv
import dataclasses
import datetime as _dt
import gzip
import hashlib
import json
import lzma
import os
import shlex
import sys
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from .._version import __version__

__all__ = ["FileRecord", "Provenance", "file_record", "sha256_file", "count_rows", "cli_provenance"]

_CHUNK = 1 << 20
_OPENERS = {".gz": gzip.open, ".bz2": bz2.open, ".xz": lzma.open}
_TEXT_TABLES = (".csv", ".tsv", ".txt")


def _utc_now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def sha256_file(path: str | os.PathLike) -> str:
    """Hex SHA-256 of the bytes of a file, read in 1 MiB pieces (bounded memory).

    Raises
    ------
    InputError
        The file does not exist or is a folder.
    """
    p = _existing(path)
    h = hashlib.sha256()
    with open(p, "rb") as fh:
        for piece in iter(lambda: fh.read(_CHUNK), b""):
            h.update(piece)
    return h.hexdigest()


def _existing(path: str | os.PathLike) -> Path:
    from ..io.tables import existing_file

    return existing_file(path, missing="report: file {path!r} not found; cannot fingerprint it",
                         folder="report: {path!r} is a folder; pass the file that was read")


def _table_kind(p: Path) -> tuple[str | None, Any]:
    """('text', opener) for CSV/TSV (maybe compressed), ('parquet', None), or (None, None)."""
    name = p.name.lower()
    opener: Any = open
    for ext, op in _OPENERS.items():
        if name.endswith(ext):
            name, opener = name[: -len(ext)], op
            break
    if name.endswith((".parquet", ".pq")):
        return "parquet", None
    if name.endswith(_TEXT_TABLES):
        return "text", opener
    return None, None


def count_rows(path: str | os.PathLike) -> int | None:
    """Data rows of a table file (records after the header), or None when it is not a table.

    CSV and TSV files (also ``.gz``, ``.bz2``, ``.xz``) are read as CSV records,
    so a quoted field that spans lines is one row; blank lines are not rows.
    Parquet row counts come from the file footer (needs pyarrow; None without it).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "t.csv").write_text('a,b\\n1,"two\\nlines"\\n3,4\\n')
    >>> count_rows(d / "t.csv")
    2
    """
    p = _existing(path)
    kind, opener = _table_kind(p)
    if kind == "parquet":
        try:
            import pyarrow.parquet as pq
        except ImportError:
            return None
        return int(pq.ParquetFile(str(p)).metadata.num_rows)
    if kind is None:
        return None
    delim = "\t" if ".tsv" in p.name.lower() else ","
    with opener(p, "rt", encoding="utf-8", errors="replace", newline="") as fh:
        records = sum(1 for rec in csv.reader(fh, delimiter=delim) if rec)
    return max(0, records - 1)


@dataclasses.dataclass(frozen=True)
class FileRecord:
    """Fingerprint of one file a job read.

    Attributes
    ----------
    path : str
        As given (the report shows it; it is not resolved, so it stays meaningful to the reader).
    role : str
        ``"input"``, ``"model"`` or another word of the caller's.
    sha256 : str
        Hex digest of the file's bytes.
    size_bytes : int
    rows : int or None
        Data rows for a table file; None otherwise.
    detail : str
        Extra plain words, e.g. the format and payload checksum of a model file.
    """

    path: str
    role: str
    sha256: str
    size_bytes: int
    rows: int | None = None
    detail: str = ""

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)


def _model_detail(p: Path) -> str:
    """Format name and stored payload checksum of a whiten model file, when it is one."""
    if p.stat().st_size > 64 * _CHUNK:
        return ""
    try:
        doc = json.loads(p.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError, OSError):
        return ""
    if isinstance(doc, dict) and isinstance(doc.get("format"), str) and isinstance(doc.get("sha256"), str):
        return f"format {doc['format']}; stored payload checksum {doc['sha256']}"
    return ""


def file_record(path: str | os.PathLike, role: str = "input") -> FileRecord:
    """Fingerprint a file: SHA-256, size, data rows (tables) and model-file details.

    Parameters
    ----------
    path : path of the file
    role : str
        How the job used it (``"input"``, ``"model"``, ...).

    Returns
    -------
    FileRecord

    Raises
    ------
    InputError
        The file does not exist or is a folder.

    Notes
    -----
    Two passes over the file: one for the digest, one for the CSV records
    (text tables only). Cost is linear in the file size, memory bounded.

    Examples
    --------
    >>> import hashlib, pathlib, tempfile
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "x.csv"
    >>> _ = f.write_bytes(b"t,v\\n0,1.5\\n")
    >>> r = file_record(f)
    >>> (r.rows, r.sha256 == hashlib.sha256(b"t,v\\n0,1.5\\n").hexdigest())
    (1, True)
    """
    p = _existing(path)
    detail = _model_detail(p) if p.name.lower().endswith(".json") else ""
    return FileRecord(path=str(path), role=str(role), sha256=sha256_file(p), size_bytes=p.stat().st_size,
                      rows=count_rows(p), detail=detail)


@dataclasses.dataclass(frozen=True)
class Provenance:
    """The "what was run" block of a report.

    Attributes
    ----------
    command : str or None
        The command line, shell-quoted (None when called from Python without one).
    files : tuple of FileRecord
    version : str
        whiten's version.
    created_utc : str
        ISO 8601 UTC time the report was made.
    python : str
        Python version.
    extra : tuple of (str, str)
        Further labelled facts (options, seeds, ...).
    """

    command: str | None
    files: tuple = ()
    version: str = __version__
    created_utc: str = dataclasses.field(default_factory=_utc_now)
    python: str = dataclasses.field(default_factory=lambda: sys.version.split()[0])
    extra: tuple = ()

    @classmethod
    def collect(cls, *, inputs: Iterable[str | os.PathLike] = (), model: str | os.PathLike | None = None,
                command: str | Sequence[str] | None = None, extra: dict | None = None) -> Provenance:
        """Fingerprint the files and stamp the time.

        Parameters
        ----------
        inputs : paths of the data files read
        model : path of the model file used, optional
        command : str or sequence of str, optional
            The command line; a sequence (such as ``sys.argv``) is shell-quoted.
        extra : dict, optional
            Further labelled facts, shown as given.

        Raises
        ------
        InputError
            A file does not exist.
        """
        files = [file_record(p, "input") for p in inputs]
        if model is not None:
            files.append(file_record(model, "model"))
        if command is not None and not isinstance(command, str):
            command = shlex.join([str(c) for c in command])
        ext = tuple((str(k), str(v)) for k, v in (extra or {}).items())
        return cls(command=command, files=tuple(files), extra=ext)

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["files"] = [f.to_dict() for f in self.files]
        d["extra"] = [list(kv) for kv in self.extra]
        return d



def cli_provenance(args: Any, inputs: Iterable[str | os.PathLike] = (),
                   model: str | os.PathLike | None = None) -> Provenance:
    """Provenance for a ``whiten`` command: its own command line, the files it read.

    The command line is ``whiten`` followed by the arguments
    :func:`whiten.cli.main` received (``args._argv``); when the namespace
    lacks them (a command run some other way) the process's ``sys.argv`` is used.
    """
    argv = getattr(args, "_argv", None)
    if argv is None:
        argv = sys.argv[1:]
    return Provenance.collect(inputs=inputs, model=model, command=["whiten", *[str(a) for a in argv]])
