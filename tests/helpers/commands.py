"""Run the shell commands of a documentation block as written, in a given folder.

A block is the text between fences (README) or an indented ``.. code-block:: shell`` (docs). Each
line is one command; a trailing backslash continues it; ``#`` starts a comment. ``whiten ...`` runs
through this interpreter (``python -m whiten``), ``python ...`` with this interpreter, ``pip
install ...`` is skipped (the test environment is already installed), and ``cd DIR`` changes folder.
"""

from __future__ import annotations

import pathlib
import re
import shlex
import subprocess
import sys


def commands(block: str) -> list[str]:
    out, cur = [], ""
    for line in block.splitlines():
        line = line.strip()
        if not line:
            continue
        cur = (cur + " " + line[:-1].strip()) if line.endswith("\\") else (cur + " " + line)
        if not line.endswith("\\"):
            out.append(cur.strip())
            cur = ""
    return [c for c in out if c and not c.startswith("#")]


def markdown_blocks(text: str, heading: str) -> list[str]:
    section = text.split(heading, 1)[1].split("\n#", 1)[0]
    return re.findall(r"```\n(.*?)\n```", section, flags=re.S)


def rst_blocks(text: str, language: str) -> list[str]:
    """Bodies of ``.. code-block:: LANGUAGE`` directives, dedented, in order."""
    blocks = []
    lines = text.splitlines()
    i = 0
    while i < len(lines):
        if lines[i].strip() == f".. code-block:: {language}":
            i += 1
            body = []
            while i < len(lines) and (not lines[i].strip() or lines[i].startswith("   ")):
                body.append(lines[i][3:] if lines[i].startswith("   ") else "")
                i += 1
            blocks.append("\n".join(body).strip("\n"))
        else:
            i += 1
    return blocks


def run(command: str, cwd: pathlib.Path, timeout: int = 600) -> pathlib.Path:
    """Run one documented command in ``cwd``; returns the folder for the next one (``cd`` changes it)."""
    words = shlex.split(command, comments=True)
    if not words:
        return cwd
    for chained in " ".join(words).split(" && "):
        part = shlex.split(chained)
        if part[0] == "cd":
            cwd = (cwd / part[1]).resolve()
            continue
        if part[0] == "pip":
            continue
        if part[0] == "mkdir":
            for d in part[1:]:
                if not d.startswith("-"):
                    (cwd / d).mkdir(parents=True, exist_ok=True)
            continue
        if part[0] == "whiten":
            argv = [sys.executable, "-m", "whiten", *part[1:]]
        elif part[0] == "python":
            argv = [sys.executable, *part[1:]]
        else:
            raise AssertionError(f"documented command not runnable by the docs test: {chained!r}")
        res = subprocess.run(argv, cwd=cwd, capture_output=True, text=True, timeout=timeout)
        assert res.returncode == 0, f"{chained!r} failed ({res.returncode}):\n{res.stdout[-2000:]}\n{res.stderr[-2000:]}"
    return cwd
