"""The building blocks of a report: key figures, paragraphs, bullets, tables, figures, trust lines, sections.

Plain frozen records (and :class:`Section`, which collects them); both the
:class:`~whiten.report.document.Report` that holds them and the HTML renderer
(:mod:`whiten.report.html`) read them from here.
"""


from __future__ import annotations

import dataclasses
import io
import math
import os
import re
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import InputError

__all__ = ["Section", "KeyFigure", "Paragraph", "Bullets", "Table", "Figure", "TrustLine",
           "format_number", "CAUTION_SCREEN", "CAUTION_CALIBRATION", "CAUTION_REGRESSION",
           "CAUTION_INDEPENDENT_ROWS", "TONES"]

CAUTION_SCREEN = ("A statistical screen is not a protective function: an alarm here, or its absence, "
                  "does not replace the plant's safety systems, interlocks or operating procedures.")
CAUTION_REGRESSION = ("A regression describes the rows it was fitted on: a coefficient is an association, "
                      "not a cause; coefficients of nearly collinear columns are not separately determined; "
                      "a prediction outside the range of the fitted rows is an extrapolation. Check the "
                      "residuals and the influence of single rows before relying on the fit.")
CAUTION_INDEPENDENT_ROWS = ("The exact limits, p-values and the count expected by chance assume independent "
                            "rows. Readings minutes apart are usually correlated: alarms then come in runs "
                            "and false alarms over a long record are more frequent than stated. Subsample, "
                            "widen the limit, or model the dependence; and make sure the reference period "
                            "was itself in control.")
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

    def paragraph(self, text: str) -> Section:
        self.blocks.append(Paragraph(_text(text, "paragraph")))
        return self

    def bullets(self, items) -> Section:
        items = tuple(_text(i, "bullet") for i in items)
        if items:
            self.blocks.append(Bullets(items))
        return self

    def table(self, frame: Any, caption: str, *, formats: Mapping[str, Any] | None = None,
              show_index: bool = True, key: str = "", note: str = "") -> Section:
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

    def figure(self, image: Any, alt: str, *, caption: str = "", key: str = "") -> Section:
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
