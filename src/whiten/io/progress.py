"""Progress of a long read on standard error: a bar on a terminal, a plain line now and then in a log.

:class:`Progress` is told how many bytes of the file have been read (and
rows); on a terminal it redraws one line, ``scoring  [#####.....]  48.1 of
100.0 MB  48%  120000 rows  0:07 left``, at most ten times a second; when
standard error is not a terminal (a pipe to a log, a cron job) it writes one
plain line about every :data:`LOG_EVERY` seconds, and nothing for a read
that ends sooner. Time left is the time so far scaled by the bytes still to
read, so it assumes the rest reads at the same pace.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable, Iterable, Iterator
from typing import Any

__all__ = ["Progress", "LOG_EVERY", "with_progress", "mode_of"]

LOG_EVERY = 10.0
"""Seconds between the plain progress lines written when standard error is not a terminal."""


def mode_of(enabled: bool | None, stream: Any = None) -> str | None:
    """``"bar"``, ``"lines"`` or ``None`` (silent) for a ``progress=`` setting.

    ``None`` decides by the stream: a bar on a terminal, else lines; ``True``
    is a bar, ``False`` silence.
    """
    if enabled is False:
        return None
    if enabled is True:
        return "bar"
    stream = sys.stderr if stream is None else stream
    try:
        tty = bool(stream.isatty())
    except (AttributeError, ValueError):
        tty = False
    return "bar" if tty else "lines"


def _size(n: float) -> str:
    for unit, step in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= step:
            return f"{n / step:.1f} {unit}"
    return f"{n:.0f} B"


def _clock(seconds: float) -> str:
    s = int(round(seconds))
    h, rest = divmod(s, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}" if h else f"{m}:{s:02d}"


class Progress:
    """Bytes read of a known total, shown as a bar (``mode="bar"``) or as plain lines (``mode="lines"``).

    Parameters
    ----------
    desc : str
        What is being done (``"scoring"``).
    total : int or None
        Bytes of the whole file (None: unknown, no percentage or time left).
    mode : {"bar", "lines"}
    stream : file, optional
        Where to write (default ``sys.stderr``).
    clock : callable, optional
        Seconds as a float (default ``time.monotonic``); tests pass their own.

    Examples
    --------
    >>> import io
    >>> t = iter([0.0, 12.0, 13.0])
    >>> out = io.StringIO()
    >>> p = Progress("scoring", 1000, mode="lines", stream=out, clock=lambda: next(t))
    >>> p.update(400, rows=40)
    >>> p.close()
    >>> out.getvalue()
    'whiten: scoring: 400 B of 1.0 kB read (40%), 40 rows, about 0:18 left\\n'
    """

    def __init__(self, desc: str, total: int | None, *, mode: str = "lines", stream: Any = None,
                 clock: Callable[[], float] | None = None):
        self.desc = desc
        self.total = total if total and total > 0 else None
        self.mode = mode
        self.stream = sys.stderr if stream is None else stream
        self._clock = clock or time.monotonic
        self.start = self._clock()
        self._last = self.start
        self.done = 0
        self.rows = 0
        self._drawn = False

    def text(self, now: float) -> tuple[str, str]:
        """(amount, time left) as words."""
        spent = max(now - self.start, 0.0)
        if self.total is None:
            return f"{_size(self.done)} read, {self.rows} rows", ""
        frac = min(self.done / self.total, 1.0)
        left = "" if frac <= 0 else _clock(spent * (1.0 - frac) / frac)
        return f"{_size(self.done)} of {_size(self.total)} read ({100 * frac:.0f}%), {self.rows} rows", left

    def update(self, done: int, *, rows: int = 0) -> None:
        """The bytes read so far and the rows so far."""
        self.done, self.rows = int(done), int(rows)
        now = self._clock()
        if self.mode == "bar":
            if now - self._last < 0.1 and self._drawn:
                return
            amount, left = self.text(now)
            frac = min(self.done / self.total, 1.0) if self.total else 0.0
            bar = "#" * int(round(20 * frac))
            line = f"\r{self.desc}  [{bar:<20}]  {amount}" + (f", {left} left" if left else "")
            self.stream.write(line.ljust(79) if not self._drawn else line + "  ")
            self.stream.flush()
            self._drawn = True
            self._last = now
        elif now - self._last >= LOG_EVERY:
            amount, left = self.text(now)
            self.stream.write(f"whiten: {self.desc}: {amount}" + (f", about {left} left" if left else "") + "\n")
            self.stream.flush()
            self._last = now

    def close(self) -> None:
        """End the bar's line (lines mode writes nothing more)."""
        if self.mode == "bar" and self._drawn:
            self.stream.write("\r" + " " * 79 + "\r")
            self.stream.flush()


def with_progress(chunks: Iterable, position: Callable[[], int], total: int | None, *, desc: str,
                  enabled: bool | None) -> Iterator[Any]:
    """Yield ``chunks``, reporting ``position()`` bytes of ``total`` after each (see :class:`Progress`)."""
    mode = mode_of(enabled)
    if mode is None:
        yield from chunks
        return
    bar = Progress(desc, total, mode=mode)
    rows = 0
    try:
        for ch in chunks:
            rows += len(ch)
            bar.update(position(), rows=rows)
            yield ch
    finally:
        bar.close()
