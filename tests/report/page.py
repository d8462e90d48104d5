"""Test helpers: read a report back out of its HTML, and drive headless Chromium.

Nothing here is shipped. The parser uses only the standard library's
``html.parser``; Chromium is Debian's ``chromium`` package, driven from the
command line (``--dump-dom``, ``--screenshot``) so that no websocket client
or other dependency is needed.
"""

from __future__ import annotations

import base64
import io
import os
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
NO_CHROMIUM = "headless Chromium not on PATH (Debian: apt-get install -y chromium)"

# attributes that make a browser fetch or navigate
_URL_ATTRS = {"src", "href", "srcset", "poster", "data", "action", "formaction", "background", "xlink:href",
              "cite", "longdesc", "manifest", "ping", "imagesrcset"}
_FETCHING_TAGS = {"script", "link", "iframe", "frame", "object", "embed", "base", "audio", "video", "source",
                  "track", "applet"}
_VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}
_CSS_URL = re.compile(r"url\(\s*['\"]?([^'\")]*)", re.I)
_CSS_IMPORT = re.compile(r"@import", re.I)


def _local(url: str) -> bool:
    u = url.strip()
    return u.startswith("#") or u.lower().startswith("data:")


class ReportPage(HTMLParser):
    """Everything the tests look at in one parse.

    Attributes
    ----------
    external : list of str
        Every reference that would leave the file (attribute or CSS url()).
    fetching_tags : list of str
        Tags that load content (script, link, iframe, ...), which a report must not have.
    images : list of dict
        ``{"src", "alt"}`` per ``<img>``.
    tiles : dict
        ``data-key -> {"value": data-value, "text": shown text, "label": dt text, "note": note text}``.
    tables : dict
        ``data-key -> {"caption", "head": [..], "rows": [[(text, data-value or None), ..]], "row_heads": [..]}``.
    ids, anchors : set of str
        Element ids and in-page link targets.
    unbalanced : list of str
        Start and end tags that do not nest (every element of a report is closed explicitly).
    """

    def __init__(self, text: str):
        super().__init__(convert_charrefs=True)
        self.external: list[str] = []
        self.fetching_tags: list[str] = []
        self.images: list[dict] = []
        self.tiles: dict = {}
        self.tables: dict = {}
        self.ids: set = set()
        self.anchors: set = set()
        self.meta_csp: list[str] = []
        self.title = ""
        self._stack: list[tuple] = []
        self._tile = None
        self._grab = None
        self._table = None
        self._row = None
        self._cell = None
        self._in_style = False
        self._in_title = False
        self.style_text = ""
        self.unbalanced: list[str] = []
        self._open: list[str] = []
        self.doctype = ""
        self.feed(text)
        self.close()
        self.unbalanced += [f"<{t}> never closed" for t in self._open]

    def handle_decl(self, decl):
        self.doctype = decl

    # -------------------------------------------------------------- parse
    def handle_starttag(self, tag, attrs):
        a = {k: (v or "") for k, v in attrs}
        if tag not in _VOID:
            self._open.append(tag)
        if tag in _FETCHING_TAGS:
            self.fetching_tags.append(tag)
        for k, v in a.items():
            if k in _URL_ATTRS and not _local(v):
                self.external.append(f"<{tag} {k}={v[:60]!r}>")
            if k == "style":
                self._css(v, f"<{tag} style>")
        if "id" in a:
            self.ids.add(a["id"])
        if tag == "a" and a.get("href", "").startswith("#"):
            self.anchors.add(a["href"][1:])
        if tag == "meta" and a.get("http-equiv", "").lower() == "content-security-policy":
            self.meta_csp.append(a.get("content", ""))
        if tag == "meta" and a.get("http-equiv", "").lower() == "refresh":
            self.external.append("<meta refresh>")
        if tag == "style":
            self._in_style = True
        if tag == "title":
            self._in_title = True
        if tag == "img":
            self.images.append({"src": a.get("src", ""), "alt": a.get("alt")})
        if tag == "div" and "tile" in a.get("class", "").split():
            self._tile = {"key": a.get("data-key", ""), "value": None, "text": "", "label": "", "note": ""}
        if self._tile is not None and tag == "dt":
            self._grab = "label"
        if self._tile is not None and tag == "span" and "value" in a.get("class", "").split():
            self._tile["value"] = a.get("data-value")
            self._grab = "text"
        if self._tile is not None and tag == "span" and "note" in a.get("class", "").split():
            self._grab = "note"
        if tag == "table":
            self._table = {"key": a.get("data-key", ""), "caption": "", "head": [], "rows": [], "row_heads": [],
                           "_part": None}
        if self._table is not None:
            if tag in ("thead", "tbody"):
                self._table["_part"] = tag
            elif tag == "caption":
                self._cell = {"kind": "caption", "text": ""}
            elif tag == "tr" and self._table["_part"] == "tbody":
                self._row = []
            elif tag in ("th", "td"):
                self._cell = {"kind": tag, "text": "", "value": a.get("data-value"),
                              "part": self._table["_part"]}

    def handle_endtag(self, tag):
        if tag in _VOID:
            self.unbalanced.append(f"</{tag}> closes a void element")
        elif not self._open or self._open[-1] != tag:
            self.unbalanced.append(f"</{tag}> while <{self._open[-1] if self._open else 'nothing'}> is open")
        else:
            self._open.pop()
        if tag == "style":
            self._in_style = False
        if tag == "title":
            self._in_title = False
        if self._tile is not None:
            if tag in ("dt", "span"):
                self._grab = None
            if tag == "div":
                self.tiles[self._tile["key"]] = self._tile
                self._tile = None
        if self._table is not None:
            if tag == "caption" and self._cell:
                self._table["caption"] = self._cell["text"].strip()
                self._cell = None
            elif tag in ("th", "td") and self._cell:
                c = self._cell
                self._cell = None
                if c["part"] == "thead":
                    self._table["head"].append(c["text"].strip())
                elif self._row is not None:
                    if c["kind"] == "th":
                        self._table["row_heads"].append(c["text"].strip())
                    else:
                        self._row.append((c["text"].strip(), c["value"]))
            elif tag == "tr" and self._row is not None:
                self._table["rows"].append(self._row)
                self._row = None
            elif tag == "table":
                t = self._table
                t.pop("_part")
                self.tables[t["key"] or f"table-{len(self.tables)}"] = t
                self._table = None

    def handle_data(self, data):
        if self._in_style:
            self.style_text += data
            self._css(data, "<style>")
        if self._in_title:
            self.title += data
        if self._tile is not None and self._grab:
            self._tile[self._grab] += data
        if self._cell is not None:
            self._cell["text"] += data

    def _css(self, css: str, where: str) -> None:
        for url in _CSS_URL.findall(css):
            if not _local(url):
                self.external.append(f"{where} url({url[:60]})")
        if _CSS_IMPORT.search(css):
            self.external.append(f"{where} @import")

    # ---------------------------------------------------------- helpers
    def png_images(self) -> list[bytes]:
        out = []
        for im in self.images:
            head, _, data = im["src"].partition(",")
            assert head == "data:image/png;base64", f"image is not an embedded PNG: {head[:40]}"
            out.append(base64.b64decode(data, validate=True))
        return out

    def column(self, table_key: str, name: str) -> list[tuple[str, str | None]]:
        t = self.tables[table_key]
        j = t["head"].index(name)
        offset = 1 if len(t["head"]) == len(t["rows"][0]) + 1 else 0  # header over the row-head column
        return [row[j - offset] for row in t["rows"]]


def check_self_contained(html: str) -> ReportPage:
    """Parse a report and assert it is well nested, self-contained and accessible; return the parse."""
    page = ReportPage(html)
    assert page.doctype.lower() == "doctype html" and page.unbalanced == [], page.unbalanced
    assert len(page.ids) == html.count(' id="'), "duplicate element ids"
    assert page.external == [], page.external
    assert page.fetching_tags == [], page.fetching_tags
    assert "<script" not in html.lower()
    assert page.meta_csp and "default-src 'none'" in page.meta_csp[0]
    # every in-page link lands on an element of the page
    assert page.anchors <= page.ids, page.anchors - page.ids
    for im in page.images:
        assert im["alt"] and im["alt"].strip(), "an image without alt text"
    for key, t in page.tables.items():
        assert t["caption"], f"table {key} has no caption"
        assert t["head"], f"table {key} has no header cells"
    return page


def decode_png(data: bytes):
    """Decode PNG bytes with matplotlib (an independent decoder); returns the pixel array."""
    import matplotlib.image as mpimg

    return mpimg.imread(io.BytesIO(data), format="png")


# ------------------------------------------------------------------ chromium
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-default-apps", "--disable-extensions", "--hide-scrollbars", "--mute-audio",
         "--enable-logging=stderr", "--v=0",
         # any name lookup fails, so a request that slipped past the page's CSP still cannot leave
         "--host-resolver-rules=MAP * ~NOTFOUND"]


def chromium(url: str, work: Path, *extra: str, timeout: float = 90.0) -> subprocess.CompletedProcess:
    """Run headless Chromium once on ``url`` with a fresh profile folder under ``work``."""
    profile = work / f"profile-{len(list(work.glob('profile-*')))}"
    profile.mkdir(parents=True)
    env = dict(os.environ)
    env.pop("DISPLAY", None)
    cmd = [CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *extra, url]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, env=env, stdin=subprocess.DEVNULL)


def console_lines(stderr: str) -> list[str]:
    """Lines of Chromium's log that come from the page's console (errors, CSP reports, uncaught exceptions).

    With ``--enable-logging=stderr`` Chromium writes every console message as
    ``...:CONSOLE(...)] "message", source: ...``; the shipped report has no
    script, so *any* such line means something went wrong (a blocked or failed
    load, a CSP violation).
    """
    return [ln for ln in stderr.splitlines() if ":CONSOLE" in ln or "Uncaught" in ln]


def network_lines(stderr: str) -> list[str]:
    """Log lines that mention a network scheme or a network error."""
    pat = re.compile(r"https?://|wss?://|ftp://|net::ERR_", re.I)
    return [ln for ln in stderr.splitlines() if pat.search(ln)]


_WRAPPER = """<!DOCTYPE html><html><head><meta charset="utf-8"><title>probe</title></head>
<body style="margin:0"><iframe id="page" style="width:{width}px;height:900px;border:0" srcdoc="{doc}"></iframe>
<script>
window.addEventListener('load', function () {{
  var f = document.getElementById('page'), d = f.contentDocument;
  var w = Array.prototype.map.call(d.images, function (i) {{ return i.complete ? i.naturalWidth : -1; }});
  var o = document.createElement('pre'); o.id = 'probe-result';
  o.textContent = 'widths=' + w.join(',') + ';scrollw=' + d.documentElement.scrollWidth +
                  ';innerw=' + f.contentWindow.innerWidth;
  document.body.appendChild(o);
}});
</script></body></html>
"""


def probe_copy(html: str, path: Path, width: int = 1100) -> Path:
    """A test-only wrapper page that shows the report, unchanged, in an iframe ``width`` pixels wide.

    The report keeps its own CSP (no script may run inside it); a script in
    the wrapper reads the images' natural widths and the report's scroll
    width once everything has loaded, and writes them into the wrapper's DOM
    for ``--dump-dom``. The iframe sets a true phone width, which a headless
    window (at least 500 px wide) cannot.
    """
    from html import escape

    path.write_text(_WRAPPER.format(width=int(width), doc=escape(html, quote=True)), encoding="utf-8")
    return path


def probe_result(dom: str) -> dict:
    m = re.search(r'<pre id="probe-result">widths=([^;<]*);scrollw=(\d+);innerw=(\d+)</pre>', dom)
    assert m, "the probe script did not run (no result in the dumped DOM)"
    widths = [int(w) for w in m.group(1).split(",")] if m.group(1) else []
    return {"widths": widths, "scroll_width": int(m.group(2)), "inner_width": int(m.group(3))}
