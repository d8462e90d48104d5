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

import os
from pathlib import Path
from typing import Any

from ..errors import InputError
from ..io.atomic import write_text
from .blocks import (
    CAUTION_CALIBRATION,
    CAUTION_SCREEN,
    TONES,
    Bullets,
    Figure,
    KeyFigure,
    Paragraph,
    Section,
    Table,
    TrustLine,
    _check_tone,
    _slug,
    _text,
    format_number,
)
from .html import render
from .provenance import Provenance

__all__ = ["Report", "Section", "KeyFigure", "Paragraph", "Bullets", "Table", "Figure", "TrustLine",
           "format_number", "CAUTION_SCREEN", "CAUTION_CALIBRATION", "TONES"]


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
        return render(self)

    def write(self, path: str | os.PathLike, *, force: bool = False) -> Path:
        """Write the HTML atomically; an existing file is replaced only with ``force=True``.

        Raises
        ------
        InputError
            The file exists without ``force``, or its folder does not exist.
        """
        return write_text(path, self.to_html(), force=force, what="report")

