"""Render a :class:`~whiten.report.document.Report` as one self-contained HTML file.

Rules the output keeps (the browser tests in ``tests/report`` check them):

* inline CSS only; no script, no font, no link to anything outside the file:
  pictures are PNG data URIs and the only ``href`` values are in-page anchors;
* a Content-Security-Policy meta tag (``default-src 'none'``) so that a
  browser refuses any outside request even if a later edit slipped one in;
* every piece of user text is HTML-escaped;
* tables have ``<th>`` header cells and a ``<caption>``, pictures an ``alt``;
* at phone width the page is one column and wide tables scroll sideways
  inside their own box; printed, it drops the contents list and keeps tables
  and pictures from splitting across pages.
"""

from __future__ import annotations

import base64
import math
from html import escape
from typing import Any

import numpy as np

from .._version import __version__
from .blocks import Bullets, Figure, Paragraph, Table

__all__ = ["render", "CSP"]

#: Nothing may be fetched; inline styles and data: pictures are all the page needs.
CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'"

# A layout of our own: a narrow sheet, a band of figure tiles with a coloured
# top rule, a trust list with tone markers in the margin, a record box at the end.
_CSS = """
:root { --ink:#1f2a33; --muted:#5b6873; --rule:#d5dbe0; --paper:#ffffff; --wash:#f4f6f7;
  --good:#2d6a3e; --note:#8a5b00; --alert:#a32630; --plain:#3c5a78; }
* { box-sizing: border-box; }
html { -webkit-text-size-adjust: 100%; }
body { margin: 0; background: var(--wash); color: var(--ink);
  font: 16px/1.5 system-ui, -apple-system, "Segoe UI", "Helvetica Neue", Arial, sans-serif; }
.sheet { max-width: 62rem; margin: 0 auto; background: var(--paper); padding: 1.5rem 2rem 2rem; }
.masthead { border-bottom: 3px solid var(--ink); padding-bottom: .75rem; margin-bottom: 1.25rem; }
.masthead .job { margin: 0; font-size: .8rem; letter-spacing: .08em; text-transform: uppercase; color: var(--muted); }
h1 { font-size: 1.7rem; line-height: 1.2; margin: .2rem 0 .4rem; }
h2 { font-size: 1.2rem; margin: 1.8rem 0 .6rem; padding-left: .6rem; border-left: 4px solid var(--plain); }
.lede { margin: 0; color: var(--muted); }
.tiles { display: grid; grid-template-columns: repeat(auto-fit, minmax(10.5rem, 1fr)); gap: .75rem; margin: 0; }
.tile { border: 1px solid var(--rule); border-top: 5px solid var(--plain); padding: .55rem .7rem .6rem; margin: 0; }
.tile dt { font-size: .82rem; color: var(--muted); }
.tile dd { margin: 0; }
.tile .value { display: block; font-size: 1.45rem; font-weight: 650; font-variant-numeric: tabular-nums;
  overflow-wrap: anywhere; }
.tile .note { display: block; font-size: .8rem; color: var(--muted); }
.tone-good { border-top-color: var(--good); } .tone-note { border-top-color: var(--note); }
.tone-alert { border-top-color: var(--alert); } .tone-alert .value { color: var(--alert); }
.trust { list-style: none; padding: 0; margin: 0; }
.trust li { position: relative; padding: .35rem .5rem .35rem 1.9rem; border-bottom: 1px dotted var(--rule); }
.trust li::before { content: ""; position: absolute; left: .5rem; top: .75rem; width: .7rem; height: .7rem;
  border-radius: 50%; background: var(--good); }
.trust li.tone-note::before { background: var(--note); } .trust li.tone-alert::before { background: var(--alert); }
.trust li.tone-plain::before { background: var(--plain); }
.trust .topic { font-weight: 650; margin-right: .4rem; }
.contents { font-size: .9rem; margin: 1rem 0 0; }
.contents ol { margin: .2rem 0 0; padding-left: 1.2rem; columns: 2 14rem; }
a { color: var(--plain); }
.table-box { overflow-x: auto; margin: .75rem 0 1rem; border: 1px solid var(--rule); }
table { border-collapse: collapse; width: 100%; font-size: .88rem; font-variant-numeric: tabular-nums; }
caption { caption-side: top; text-align: left; padding: .45rem .6rem; font-weight: 600; background: var(--wash); }
th, td { padding: .3rem .6rem; border-top: 1px solid var(--rule); vertical-align: top; }
thead th { text-align: left; border-bottom: 2px solid var(--ink); white-space: nowrap; }
td.num { text-align: right; white-space: nowrap; }
tbody th { text-align: left; font-weight: 600; white-space: nowrap; }
.table-note { font-size: .82rem; color: var(--muted); margin: -.6rem 0 1rem; }
figure { margin: 1rem 0; }
figure img { display: block; max-width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { font-size: .85rem; color: var(--muted); margin-top: .3rem; }
.cautions { margin-top: 1.8rem; border: 2px solid var(--note); padding: .2rem 1rem .6rem; }
.cautions h2 { border-left: 0; padding-left: 0; margin-top: .6rem; }
.record { font-size: .88rem; }
.record dl { display: grid; grid-template-columns: max-content 1fr; gap: .2rem 1rem; margin: 0; }
.record dt { color: var(--muted); } .record dd { margin: 0; overflow-wrap: anywhere; }
code, .hash { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: .82rem;
  overflow-wrap: anywhere; }
footer { margin-top: 1.5rem; font-size: .78rem; color: var(--muted); border-top: 1px solid var(--rule);
  padding-top: .5rem; }
@media (max-width: 40rem) {
  body { font-size: 15px; }
  .sheet { padding: 1rem .8rem 1.5rem; }
  h1 { font-size: 1.35rem; }
  .tiles { grid-template-columns: 1fr 1fr; gap: .5rem; }
  .tile .value { font-size: 1.2rem; }
  .record dl { grid-template-columns: 1fr; } .record dt { margin-top: .4rem; }
  caption { position: sticky; left: 0; max-width: calc(100vw - 2rem); }
}
@media print {
  @page { margin: 14mm 12mm; }
  body { background: none; font-size: 10.5pt; }
  .sheet { max-width: none; padding: 0; }
  .contents { display: none; }
  a { color: inherit; text-decoration: none; }
  .table-box { overflow: visible; border: 0; }
  table, figure, .tile, .trust li, .cautions { break-inside: avoid; page-break-inside: avoid; }
  h2 { break-after: avoid; page-break-after: avoid; }
  thead { display: table-header-group; }
}
"""


def _e(text: Any) -> str:
    return escape(str(text), quote=True)


def _data_value(value: Any) -> str:
    """Full-precision machine-readable form of a cell (``repr`` of a float), or '' for text."""
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return "nan" if math.isnan(v) else repr(v)
    return ""


def _is_num(value: Any) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, (bool, np.bool_))


def _figures(rep: Any) -> str:
    if not rep.figures:
        return ""
    tiles = []
    for f in rep.figures:
        dv = _data_value(f.value)
        attr = f' data-value="{_e(dv)}"' if dv else ""
        note = f'<span class="note">{_e(f.note)}</span>' if f.note else ""
        tiles.append(f'<div class="tile tone-{f.tone}" data-key="{_e(f.key)}"><dt>{_e(f.label)}</dt>'
                     f'<dd><span class="value"{attr}>{_e(f.text)}</span>{note}</dd></div>')
    return ('<section id="answer" aria-labelledby="answer-h"><h2 id="answer-h">The answer</h2>'
            f'<dl class="tiles">{"".join(tiles)}</dl></section>')


def _trust(rep: Any) -> str:
    if not rep.trust:
        return ""
    items = "".join(f'<li class="tone-{t.tone}"><span class="topic">{_e(t.topic)}.</span>{_e(t.words)}</li>'
                    for t in rep.trust)
    return ('<section id="trust" aria-labelledby="trust-h"><h2 id="trust-h">How far to trust it</h2>'
            f'<ul class="trust">{items}</ul></section>')


def _table(t: Table) -> str:
    df = t.frame
    cols = list(df.columns)
    key = f' data-key="{_e(t.key)}"' if t.key else ""
    head = []
    if t.show_index:
        head.append(f'<th scope="col">{_e(df.index.name or "")}</th>')
    head += [f'<th scope="col">{_e(c)}</th>' for c in cols]
    rows = []
    for idx, row in zip(df.index, df.itertuples(index=False, name=None)):
        cells = [f'<th scope="row">{_e(idx)}</th>'] if t.show_index else []
        for c, v in zip(cols, row):
            dv = _data_value(v)
            cls = ' class="num"' if _is_num(v) else ""
            attr = f' data-value="{_e(dv)}"' if dv else ""
            cells.append(f"<td{cls}{attr}>{_e(t.cell_text(c, v))}</td>")
        rows.append(f"<tr>{''.join(cells)}</tr>")
    note = f'<p class="table-note">{_e(t.note)}</p>' if t.note else ""
    return (f'<div class="table-box" role="region" aria-label="{_e(t.caption)}" tabindex="0">'
            f"<table{key}><caption>{_e(t.caption)}</caption><thead><tr>{''.join(head)}</tr></thead>"
            f"<tbody>{''.join(rows)}</tbody></table></div>{note}")


def _figure(f: Figure) -> str:
    uri = "data:image/png;base64," + base64.b64encode(f.png).decode("ascii")
    key = f' data-key="{_e(f.key)}"' if f.key else ""
    cap = f"<figcaption>{_e(f.caption)}</figcaption>" if f.caption else ""
    return f'<figure{key}><img src="{uri}" alt="{_e(f.alt)}">{cap}</figure>'


def _block(b: Any) -> str:
    if isinstance(b, Paragraph):
        return f"<p>{_e(b.text)}</p>"
    if isinstance(b, Bullets):
        return "<ul>" + "".join(f"<li>{_e(i)}</li>" for i in b.items) + "</ul>"
    if isinstance(b, Table):
        return _table(b)
    if isinstance(b, Figure):
        return _figure(b)
    raise TypeError(f"unknown report block {type(b).__name__}")  # pragma: no cover - internal


def _record(rep: Any) -> str:
    pv = rep.provenance
    rows = [("Command", f"<code>{_e(pv.command)}</code>" if pv.command else
             "called from Python (no command line)"),
            ("whiten", _e(pv.version)), ("Python", _e(pv.python)), ("Made (UTC)", _e(pv.created_utc))]
    rows += [(_e(k), _e(v)) for k, v in pv.extra]
    dl = "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in rows)
    files = ""
    if pv.files:
        body = []
        for fr in pv.files:
            rows_txt = "" if fr.rows is None else str(fr.rows)
            detail = f"<br><span class=\"hash\">{_e(fr.detail)}</span>" if fr.detail else ""
            body.append(f'<tr><th scope="row">{_e(fr.role)}</th><td>{_e(fr.path)}{detail}</td>'
                        f'<td class="num" data-value="{"" if fr.rows is None else fr.rows}">{rows_txt}</td>'
                        f'<td class="num" data-value="{fr.size_bytes}">{fr.size_bytes}</td>'
                        f'<td class="hash">{_e(fr.sha256)}</td></tr>')
        files = ('<div class="table-box" role="region" aria-label="Files read" tabindex="0">'
                 '<table data-key="files"><caption>Files read, with their SHA-256 digests</caption><thead><tr>'
                 '<th scope="col">role</th><th scope="col">file</th><th scope="col">data rows</th>'
                 '<th scope="col">bytes</th><th scope="col">SHA-256</th></tr></thead>'
                 f"<tbody>{''.join(body)}</tbody></table></div>")
    return ('<section id="what-was-run" class="record" aria-labelledby="run-h"><h2 id="run-h">What was run</h2>'
            f"<dl>{dl}</dl>{files}</section>")


def render(rep: Any) -> str:
    """The HTML text of a report (UTF-8, one file, nothing fetched)."""
    job = f"{_e(rep.job)} report · " if rep.job else ""
    lede = f'<p class="lede">{_e(rep.lede)}</p>' if rep.lede else ""
    parts = [_figures(rep), _trust(rep)]
    if rep.sections:
        links = "".join(f'<li><a href="#{_e(s.key)}">{_e(s.heading)}</a></li>' for s in rep.sections)
        parts.append(f'<nav class="contents" aria-label="Contents"><strong>In this report</strong>'
                     f'<ol>{links}<li><a href="#cautions">Cautions</a></li>'
                     f'<li><a href="#what-was-run">What was run</a></li></ol></nav>')
    for s in rep.sections:
        blocks = "".join(_block(b) for b in s.blocks)
        parts.append(f'<section id="{_e(s.key)}"><h2>{_e(s.heading)}</h2>{blocks}</section>')
    if rep.cautions:
        items = "".join(f"<li>{_e(c)}</li>" for c in rep.cautions)
        parts.append(f'<aside id="cautions" class="cautions" aria-labelledby="cautions-h">'
                     f'<h2 id="cautions-h">Cautions</h2><ul>{items}</ul></aside>')
    parts.append(_record(rep))
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f'<meta http-equiv="Content-Security-Policy" content="{CSP}">\n'
        f'<meta name="generator" content="whiten {_e(__version__)}">\n'
        f"<title>{_e(rep.title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
        f'<main class="sheet">\n<header class="masthead"><p class="job">{job}whiten {_e(rep.provenance.version)}'
        f"</p><h1>{_e(rep.title)}</h1>{lede}</header>\n"
        + "\n".join(p for p in parts if p)
        + f"\n<footer>Made by whiten {_e(rep.provenance.version)} at {_e(rep.provenance.created_utc)}. "
        "This file is complete in itself: it loads nothing from anywhere.</footer>\n</main>\n</body>\n</html>\n"
    )
