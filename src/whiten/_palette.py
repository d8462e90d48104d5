"""whiten's one palette, used by every chart the package draws (reports, CLI charts, demos).

The same hues as the HTML reports' style sheet (``whiten.report.html``): a dark
slate ink, a steel blue for ordinary points and lines, a sienna accent for
reference lines and limits, a crimson for alarms, a pale grid. ``SERIES`` is the
order in which several lines of one chart (ridge paths, compared fits) take
their colours; it starts with the two main hues and continues with quieter ones.
"""

from __future__ import annotations

__all__ = ["INK", "PLAIN", "ACCENT", "ALARM", "GOOD", "NOTE", "MUTED", "GRID", "LIGHT", "SERIES", "series"]

INK = "#1f2a33"      # text, axes, emphasised lines
PLAIN = "#3c5a78"    # ordinary points and lines
ACCENT = "#a0522d"   # reference lines, limits, the chosen value
ALARM = "#a32630"    # alarms, points out of limits
GOOD = "#2d6a3e"     # an in-control or accepted state
NOTE = "#8a5b00"     # a caution
MUTED = "#5b6873"    # secondary text, a second series
GRID = "#e4e8eb"     # grid lines
LIGHT = "#9fb3c6"    # a lighter steel blue for dense point clouds and histograms

SERIES = (PLAIN, ACCENT, GOOD, NOTE, MUTED, ALARM, INK, LIGHT)


def series(i: int) -> str:
    """The colour of line ``i`` of a chart with several (cycles through :data:`SERIES`)."""
    return SERIES[i % len(SERIES)]
