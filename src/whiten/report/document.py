"""A small document model for one-file reports: figures first, then the detail.

A :class:`Report` is filled in by a builder (or by hand) and rendered by
:mod:`whiten.report.html` into one self-contained HTML file. The model knows
nothing about HTML: it holds text, numbers, pandas DataFrames and PNG bytes.

Parts of a report, in reading order:

* the title and a one-line lede;
* **key figures** -- the answer, as a few labelled numbers;
* **trust** -- the numerical health in plain words, one line per topic;
* **sections** -- headings with paragraphs, bullet lists, tables and figures;
* **cautions** -- what the numbers do not mean;
* **what was run** -- a :class:`~whiten.report.provenance.Provenance`.
"""

from __future__ import annotations

import dataclasses
import io
import math
import os
import re
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ..errors import InputError
from .provenance import Provenance

__all__ = ["Report", "Section", "KeyFigure", "Paragraph", "Bullets", "Table", "Figure", "TrustLine",
           "format_number", "CAUTION_SCREEN", "CAUTION_CALIBRATION", "TONES"]

CAUTION_SCREEN = ("A statistical screen is not a protective function: an alarm here, or its absence, "
                  "does not replace the plant's safety systems, interlocks or operating procedures.")
CAUTION_CALIBRATION = ("Regulated calibration follows local codes and accredited practice; these figures "
                       "support such work and do not certify an instrument or a measurement.")

#: ``plain`` (neutral), ``good``, ``note`` (worth a look) and ``alert``.
TONES = ("plain", "good", "note", "alert")
_PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def format_number(value: Any, digits: int = 5) -> str:
    """A number as short plain text: ``digits`` significant digits, ``n/a`` for NaN.

    Integers (and integral numpy scalars) are written in full; booleans as
    ``yes``/``no``; infinities as ``inf``/``-inf``.

    Examples
    --------
    >>> format_number(3.14159265, 3), format_number(12), format_number(float("nan"))
    ('3.14', '12', 'n/a')
    """
    if value is None:
        return "n/a"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(v):
        return "n/a"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    return f"{v:.{int(digits)}g}"


def _check_tone(tone: str) -> str:
    if tone not in TONES:
        raise InputError(f"tone: choose one of {TONES}, got {tone!r}")
    return tone


def _text(value: Any, what: str) -> str:
    if not isinstance(value, str):
        raise InputError(f"{what}: expected text, got {type(value).__name__}")
    return value


@dataclasses.dataclass(frozen=True)
class KeyFigure:
    """One labelled number of the answer.

    ``value`` is kept at full precision (rendered into a ``data-value``
    attribute so a reader program can check it); ``text`` is what people see.
    """

    label: str
    value: Any
    text: str
    note: str = ""
    key: str = ""
    tone: str = "plain"


@dataclasses.dataclass(frozen=True)
class Paragraph:
    text: str


@dataclasses.dataclass(frozen=True)
class Bullets:
    items: tuple


@dataclasses.dataclass(frozen=True)
class Table:
    """A DataFrame shown as a table with header cells and a caption.

    ``formats`` maps a column name to a format spec (``".3g"``) or a callable
    ``value -> str``; other numeric cells use :func:`format_number`.
    """

    frame: Any
    caption: str
    formats: Mapping[str, Any] = dataclasses.field(default_factory=dict)
    show_index: bool = True
    key: str = ""
    note: str = ""

    def cell_text(self, column: Any, value: Any) -> str:
        fmt = self.formats.get(column)
        if callable(fmt):
            return str(fmt(value))
        if isinstance(value, float) and math.isnan(value):
            return "n/a"
        if fmt is not None:
            try:
                return format(value, fmt)
            except (TypeError, ValueError):
                return str(value)
        if isinstance(value, (bool, np.bool_, int, np.integer, float, np.floating)):
            return format_number(value)
        return "" if value is None else str(value)


@dataclasses.dataclass(frozen=True)
class Figure:
    """A PNG picture (embedded as a data URI) with alt text and a caption."""

    png: bytes
    alt: str
    caption: str = ""
    key: str = ""


@dataclasses.dataclass(frozen=True)
class TrustLine:
    """One topic of the numerical health, in plain words."""

    topic: str
    words: str
    tone: str = "good"


def _png_bytes(image: Any) -> bytes:
    """PNG bytes of a matplotlib figure, PNG bytes, or a PNG file path."""
    if hasattr(image, "savefig"):
        buf = io.BytesIO()
        image.savefig(buf, format="png", facecolor="white")
        data = buf.getvalue()
    elif isinstance(image, (bytes, bytearray)):
        data = bytes(image)
    elif isinstance(image, (str, os.PathLike)):
        p = Path(image)
        if not p.is_file():
            raise InputError(f"figure: file {str(p)!r} not found")
        data = p.read_bytes()
    else:
        raise InputError(f"figure: expected a matplotlib figure, PNG bytes or a PNG file path, "
                         f"got {type(image).__name__}")
    if not data.startswith(_PNG_MAGIC):
        raise InputError("figure: the picture is not a PNG (wrong signature); save it with format='png'")
    return data


def _slug(text: str) -> str:
    s = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
    return s or "part"


class Section:
    """A heading with blocks; returned by :meth:`Report.section`. Methods return ``self`` to chain."""

    def __init__(self, heading: str, key: str):
        self.heading = _text(heading, "heading")
        self.key = key
        self.blocks: list = []

    def paragraph(self, text: str) -> "Section":
        self.blocks.append(Paragraph(_text(text, "paragraph")))
        return self

    def bullets(self, items) -> "Section":
        items = tuple(_text(i, "bullet") for i in items)
        if items:
            self.blocks.append(Bullets(items))
        return self

    def table(self, frame: Any, caption: str, *, formats: Mapping[str, Any] | None = None,
              show_index: bool = True, key: str = "", note: str = "") -> "Section":
        """Add a table from a pandas DataFrame (copied; later changes to it do not show).

        Raises
        ------
        InputError
            Not a DataFrame, or an empty caption (a table needs one).
        """
        if not (hasattr(frame, "columns") and hasattr(frame, "itertuples")):
            raise InputError(f"table: expected a pandas DataFrame, got {type(frame).__name__}")
        if not _text(caption, "caption").strip():
            raise InputError("table: give a caption that says what the table shows")
        self.blocks.append(Table(frame.copy(), caption, dict(formats or {}), bool(show_index), key, note))
        return self

    def figure(self, image: Any, alt: str, *, caption: str = "", key: str = "") -> "Section":
        """Add a picture: a matplotlib figure, PNG bytes, or a PNG file.

        Raises
        ------
        InputError
            Empty alt text (people who cannot see the picture need it), or not a PNG.
        """
        if not _text(alt, "alt").strip():
            raise InputError("figure: alt text is required; describe what the picture shows")
        self.blocks.append(Figure(_png_bytes(image), alt, _text(caption, "caption"), key))
        return self


class Report:
    """A one-file report: key figures, trust, sections, cautions, provenance.

    Parameters
    ----------
    title : str
    job : str
        Short name of the job (``"monitoring"``, ``"regression"``, ...), shown above the title.
    lede : str
        One or two sentences under the title.
    provenance : Provenance, optional
        The "what was run" block; a bare one (no command, no files, the
        current time) is made when omitted.
    cautions : sequence of str, optional
        Default: :data:`CAUTION_SCREEN` and :data:`CAUTION_CALIBRATION`.

    Examples
    --------
    >>> import pandas as pd
    >>> from whiten.report import Report
    >>> r = Report("Pump 4, week 32", job="monitoring")
    >>> _ = r.key_figure("Alarms", 3, note="of 1000 rows", tone="alert")
    >>> _ = r.section("Worst rows").table(pd.DataFrame({"d2": [41.5]}), "The worst row")
    >>> html = r.to_html()
    >>> "<th" in html and "<script" not in html
    True
    """

    def __init__(self, title: str, *, job: str = "", lede: str = "", provenance: Provenance | None = None,
                 cautions=None):
        self.title = _text(title, "title")
        self.job = _text(job, "job")
        self.lede = _text(lede, "lede")
        if provenance is not None and not isinstance(provenance, Provenance):
            raise InputError(f"provenance: expected whiten.report.Provenance, got {type(provenance).__name__}")
        self.provenance = provenance if provenance is not None else Provenance(command=None)
        self.figures: list[KeyFigure] = []
        self.trust: list[TrustLine] = []
        self.sections: list[Section] = []
        self.cautions: list[str] = [CAUTION_SCREEN, CAUTION_CALIBRATION] if cautions is None else \
            [_text(c, "caution") for c in cautions]
        self._keys: set[str] = set()

    def _unique(self, base: str) -> str:
        key, k = base, 2
        while key in self._keys:
            key, k = f"{base}-{k}", k + 1
        self._keys.add(key)
        return key

    def key_figure(self, label: str, value: Any, *, text: str | None = None, note: str = "",
                   key: str | None = None, tone: str = "plain", digits: int = 5) -> KeyFigure:
        """Add one number of the answer; ``text`` defaults to :func:`format_number` (``digits``)."""
        fig = KeyFigure(_text(label, "label"), value, format_number(value, digits) if text is None else
                        _text(text, "text"), _text(note, "note"), self._unique(key or _slug(label)),
                        _check_tone(tone))
        self.figures.append(fig)
        return fig

    def health(self, topic: str, words: str, tone: str = "good") -> TrustLine:
        """Add one line of numerical health (tone ``good``, ``note`` or ``alert``)."""
        line = TrustLine(_text(topic, "topic"), _text(words, "words"), _check_tone(tone))
        self.trust.append(line)
        return line

    def caution(self, text: str) -> None:
        self.cautions.append(_text(text, "caution"))

    def section(self, heading: str, *, key: str | None = None) -> Section:
        s = Section(heading, self._unique("s-" + (key or _slug(heading))))
        self.sections.append(s)
        return s

    def to_html(self) -> str:
        """The report as one self-contained HTML document (inline CSS, no scripts, no external links)."""
        from .html import render

        return render(self)

    def write(self, path: str | os.PathLike, *, force: bool = False) -> Path:
        """Write the HTML atomically; an existing file is replaced only with ``force=True``.

        Raises
        ------
        InputError
            The file exists without ``force``, or its folder does not exist.
        """
        from ..io.atomic import write_text

        return write_text(path, self.to_html(), force=force, what="report")

