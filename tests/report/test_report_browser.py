"""Each kind of report opened in headless Chromium from a file:// URL.

Checks: the page loads with no console message at all (the report has no
script, so any console line is a blocked or failed load or a CSP report),
no network request is attempted, every image decodes (non-zero natural
width, read by a probe script in a test-only wrapper page), the page fits a phone
width without sideways scrolling, and it prints to PDF. Screenshots are kept
in pytest's tmp_path (not in git).

Needs Debian's ``chromium`` package; skipped with that reason otherwise.
"""

from __future__ import annotations

import numpy as np
import pytest

from .conftest import REPORT_KINDS, build_reports
from .page import (CHROMIUM, NO_CHROMIUM, ReportPage, chromium, console_lines, decode_png, network_lines,
                   probe_copy, probe_result)

pytestmark = pytest.mark.skipif(CHROMIUM is None, reason=NO_CHROMIUM)


@pytest.fixture(scope="module")
def report_files(filler_scores, filler_model, tmp_path_factory):
    folder = tmp_path_factory.mktemp("reports")
    files = {}
    for kind, html in build_reports(filler_scores, filler_model).items():
        path = folder / f"{kind}.html"
        path.write_text(html, encoding="utf-8")
        files[kind] = path
    return files


@pytest.mark.parametrize("kind", REPORT_KINDS)
def test_report_opens_cleanly_and_is_photographed(kind, report_files, tmp_path):
    path = report_files[kind]
    shot = tmp_path / f"{kind}-desktop.png"
    res = chromium(path.as_uri(), tmp_path, f"--screenshot={shot}", "--window-size=1200,1600")
    assert res.returncode == 0, res.stderr[-2000:]
    assert console_lines(res.stderr) == []
    assert network_lines(res.stderr) == []
    pixels = decode_png(shot.read_bytes())
    assert pixels.shape[:2] == (1600, 1200)
    assert float(np.ptp(pixels[..., :3])) > 0.5      # something was drawn (ink on paper)


@pytest.mark.parametrize("kind", REPORT_KINDS)
def test_every_image_decodes_in_the_browser(kind, report_files, tmp_path):
    html = report_files[kind].read_text(encoding="utf-8")
    n_images = len(ReportPage(html).images)
    copy = probe_copy(html, tmp_path / f"{kind}-probe.html")
    res = chromium(copy.as_uri(), tmp_path, "--dump-dom", "--window-size=1200,900")
    assert res.returncode == 0, res.stderr[-2000:]
    got = probe_result(res.stdout)
    assert len(got["widths"]) == n_images and n_images >= 1
    assert all(w > 0 for w in got["widths"]), got["widths"]
    assert console_lines(res.stderr) == []


@pytest.mark.parametrize("kind", REPORT_KINDS)
def test_phone_width_has_no_sideways_page_scroll(kind, report_files, tmp_path):
    html = report_files[kind].read_text(encoding="utf-8")
    copy = probe_copy(html, tmp_path / f"{kind}-phone.html", width=360)
    res = chromium(copy.as_uri(), tmp_path, "--dump-dom", "--window-size=800,900")
    got = probe_result(res.stdout)
    assert got["inner_width"] == 360
    # wide tables scroll inside their own box; the page itself must not be wider than the screen
    assert got["scroll_width"] <= got["inner_width"], got
    shot = tmp_path / f"{kind}-phone.png"
    res = chromium(report_files[kind].as_uri(), tmp_path, f"--screenshot={shot}", "--window-size=500,2400")
    assert res.returncode == 0 and decode_png(shot.read_bytes()).shape[1] == 500


def test_report_prints_to_pdf(report_files, tmp_path):
    pdf = tmp_path / "monitoring.pdf"
    res = chromium(report_files["monitoring"].as_uri(), tmp_path, f"--print-to-pdf={pdf}",
                   "--no-pdf-header-footer")
    assert res.returncode == 0, res.stderr[-2000:]
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF") and data.count(b"/Type /Page") + data.count(b"/Type/Page") >= 1


# ------------------------------------------------------------------ the checks can fail
def test_console_scan_sees_errors_and_blocked_requests(tmp_path):
    bad = tmp_path / "bad.html"
    bad.write_text(
        "<!DOCTYPE html><html><head><meta http-equiv=\"Content-Security-Policy\" "
        "content=\"default-src 'none'; img-src data:; script-src 'unsafe-inline'\"></head><body>"
        '<img src="http://images.example/pump.png" alt="x">'
        "<script>console.error('probe: broken');</script><script>notDefinedAnywhere();</script>"
        "</body></html>", encoding="utf-8")
    res = chromium(bad.as_uri(), tmp_path, "--dump-dom")
    lines = console_lines(res.stderr)
    assert any("probe: broken" in ln for ln in lines)
    assert any("Uncaught" in ln for ln in lines)
    assert any("images.example" in ln for ln in lines)        # the CSP refused the outside picture


def test_probe_sees_an_image_that_does_not_decode(tmp_path):
    html = ("<!DOCTYPE html><html><head><meta http-equiv=\"Content-Security-Policy\" "
            "content=\"default-src 'none'; img-src data:\"></head><body>"
            '<img src="data:image/png;base64,iVBORw0KGgoAAAAA" alt="broken"></body></html>')
    copy = probe_copy(html, tmp_path / "broken.html")
    got = probe_result(chromium(copy.as_uri(), tmp_path, "--dump-dom").stdout)
    assert got["widths"] == [0]


def test_probe_sees_a_page_too_wide_for_a_phone(tmp_path):
    html = "<!DOCTYPE html><html><body><div style=\"width:900px\">a fixed-width layout</div></body></html>"
    copy = probe_copy(html, tmp_path / "wide.html", width=360)
    got = probe_result(chromium(copy.as_uri(), tmp_path, "--dump-dom").stdout)
    assert got["scroll_width"] > got["inner_width"] == 360
