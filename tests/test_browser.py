"""The demo report and operator sheets rendered by a real browser (headless Chromium).

Chromium is driven through the DevTools protocol by playwright's Python package,
using the system's Chromium (Debian package ``chromium``; ``.ci/run`` installs it).
The page must load with no console error and no network request, every plate
drawing and the timeline must have a size on the page, and at A4 width (print
media) nothing may stick out sideways. A full-page screenshot is saved beside
the report (and copied to ``$PACKER_SCREENSHOT_DIR`` when that is set).
"""

import os
import shutil
import tempfile
from pathlib import Path

import pytest

CHROMIUM = next((p for p in (shutil.which("chromium"), shutil.which("chromium-browser"), "/usr/bin/chromium")
                 if p and Path(p).is_file()), None)
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]
#: A4 is 210 mm wide; less 2 x 12 mm page margins, at 96 px per inch: 703 px.
A4_CONTENT_PX = int((210 - 24) / 25.4 * 96)

pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed (apt-get install chromium)")


@pytest.fixture(scope="module")
def browser_page():
    from playwright.sync_api import sync_playwright
    profile = tempfile.mkdtemp(prefix="packer-chromium-")
    with sync_playwright() as pw:
        ctx = pw.chromium.launch_persistent_context(profile, executable_path=CHROMIUM, headless=True,
                                                    args=FLAGS, viewport={"width": 1100, "height": 900})
        try:
            yield ctx
        finally:
            ctx.close()
            shutil.rmtree(profile, ignore_errors=True)


def _open(ctx, path: Path):
    page = ctx.new_page()
    errors, requests = [], []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("request", lambda r: requests.append(r.url) if not r.url.startswith("file:") else None)
    page.goto(path.resolve().as_uri(), wait_until="load")
    return page, errors, requests


def test_report_renders_every_drawing_without_errors(demo, browser_page):
    _, plan, out = demo
    page, errors, requests = _open(browser_page, out / "report.html")
    sizes = page.evaluate("""() => [...document.querySelectorAll('svg.plate-drawing, svg.timeline')].map(s => {
        const r = s.getBoundingClientRect();
        const empty = [...s.querySelectorAll('path, text, rect')].filter(e => !e.closest('defs')).filter(e => {
            const b = e.getBoundingClientRect(); return b.width <= 0 && b.height <= 0; }).length;
        return {cls: s.getAttribute('class'), w: r.width, h: r.height, empty: empty,
                tags: s.querySelectorAll('text[paint-order]').length};
    })""")
    drawings = [s for s in sizes if s["cls"] == "plate-drawing"]
    want = sum(3 if p["technology"] == "powder" else 1 for p in plan["plates"])
    assert len(drawings) == want and any(s["cls"] == "timeline" for s in sizes)
    for s in sizes:
        assert s["w"] > 50 and s["h"] > 30 and s["empty"] == 0, s
    assert errors == [] and requests == []
    shot = out / "report-screenshot.png"
    page.screenshot(path=str(shot), full_page=True)
    assert shot.stat().st_size > 10_000
    if os.environ.get("PACKER_SCREENSHOT_DIR"):
        Path(os.environ["PACKER_SCREENSHOT_DIR"]).mkdir(parents=True, exist_ok=True)
        shutil.copy(shot, Path(os.environ["PACKER_SCREENSHOT_DIR"]) / shot.name)
    # printed on A4: nothing wider than the page's content width
    page.emulate_media(media="print")
    page.set_viewport_size({"width": A4_CONTENT_PX, "height": 1000})
    assert page.evaluate("document.documentElement.scrollWidth") <= A4_CONTENT_PX + 1
    page.close()


def test_operator_sheets_render_without_errors(demo, browser_page):
    _, plan, out = demo
    page, errors, requests = _open(browser_page, out / "operator-sheets.html")
    pages = page.evaluate("[...document.querySelectorAll('section.page')].map(s => s.getBoundingClientRect().height)")
    assert pages and all(h > 20 for h in pages)
    assert errors == [] and requests == []
    page.close()
