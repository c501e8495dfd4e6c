"""The offline HTML report (``fxnet report ... --offline DIR``) opened from file:// in headless Chromium.

With JavaScript the embedded widgets render from their saved state (bqplot SVG, the
preview image) with zero console errors and no request at all; without JavaScript the
static tables and pictures drawn in Python are there.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parents[2]
ASSETS = ROOT / "assets"


@pytest.fixture(scope="module")
def offline_report(tmp_path_factory: pytest.TempPathFactory, html_manager_dir: Path) -> Path:
    """The demo report written by the command line, every script inlined."""
    out = tmp_path_factory.mktemp("report") / "report.html"
    argv = [
        sys.executable, "-m", "fxnet_widgets.cli", "report", str(ASSETS / "network.json"), str(ASSETS / "plan.json"),
        str(ASSETS / "scene-test.png"), "--mask", str(ASSETS / "scene-test-mask.png"), "-o", str(out),
        "--offline", str(html_manager_dir), "--title", "demo belt report",
    ]  # fmt: skip
    done = subprocess.run(argv, capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert done.returncode == 0, f"fxnet report failed ({done.returncode}): {done.stderr[-2000:]}"
    assert out.is_file()
    return out


def test_offline_report_renders_the_widgets_with_no_console_error(offline_report, new_page, explorer_page, artifacts):
    page, log = new_page(viewport={"width": 1500, "height": 1400})
    page.goto(offline_report.as_uri(), wait_until="load", timeout=90_000)
    live = "section#live .widgets"
    page.wait_for_selector(f"{live} .fxnet-explorer", timeout=60_000)
    ex = explorer_page(page, f"{live} .fxnet-explorer")
    # bqplot figures drew their SVG (the heat maps their PNG), the preview image has a source
    ex.wait_for("(s) => ['R-G', 'R-B', 'G-B'].every(t => (s.figures[t] || {heatmap: ''}).heatmap.startsWith('data:'))")
    ex.wait_for("(s) => s.images.length >= 4 && s.images.every(src => src) && s.pictures['fixed-point decision']")
    assert page.locator(f"{live} .bqplot svg").count() > 0
    assert page.locator(f"{live} img.widget-image").first.evaluate("i => i.complete && i.naturalWidth > 0")
    ex.screenshot(artifacts / "report-live.png")
    # no kernel, no browser-side links (a page-side copy would reach a kernel as a person's change, issue 19):
    # the slider moves alone and its number box keeps the saved value, as the page's note says
    handle = ex.slider_handle(ex.TABLE_WIDTH)
    box = ex.number_box(ex.TABLE_WIDTH)
    old = int(float(handle.get_attribute("aria-valuenow")))
    assert int(box.input_value()) == old
    handle.focus()
    page.keyboard.press("ArrowLeft")
    page.wait_for_function("([el, v]) => +el.getAttribute('aria-valuenow') === v",
                           arg=[handle.element_handle(), old - 1])  # fmt: skip
    assert int(box.input_value()) == old
    assert "moves only that slider" in page.locator("#kernel-note").inner_text()

    assert log.blocked == [], f"the offline report asked the network for {log.blocked}"
    assert log.errors() == [], "console errors:\n" + "\n".join(log.errors())


def test_report_without_javascript_has_the_tables_and_pictures(offline_report, new_page, artifacts):
    page, log = new_page(java_script_enabled=False, viewport={"width": 1400, "height": 1000})
    page.goto(offline_report.as_uri(), wait_until="load", timeout=60_000)
    assert page.locator("section#live .fxnet-explorer").count() == 0  # no script ran: no widget views
    for section in ("plan", "cost", "metrics", "events"):
        tables = page.locator(f"section#{section} table")
        assert tables.count() > 0, f"section {section} has no table"
        assert tables.first.is_visible()
        assert tables.first.locator("td").count() > 0, f"the table of section {section} is empty"
    for section in ("preview", "boundary"):
        pictures = page.locator(f"section#{section} figure img")
        assert pictures.count() > 0, f"section {section} has no picture"
        for i in range(pictures.count()):
            img = pictures.nth(i)
            assert (img.get_attribute("src") or "").startswith("data:image/png;base64,")
            box = img.bounding_box()
            assert box is not None and box["width"] > 16 and box["height"] > 16, f"{section} picture {i} is not shown"
    # the plan table names the demo plan's widths (assets/plan.json: 14 address bits on both layers)
    assert "14" in page.locator("section#plan table").first.inner_text()
    assert page.locator("noscript").count() > 0
    page.screenshot(path=str(artifacts / "report-static.png"), full_page=True)
    assert log.blocked == [], f"the offline report asked the network for {log.blocked}"


def test_cdn_report_opened_with_no_network_throws_nothing(tmp_path: Path, new_page):
    # the default report loads require.js and the HTML manager from CDNs; opened with no network those
    # requests fail (blocked here), and the inlined bqplot module must then be skipped, not throw
    # "define is not defined": no uncaught page error, and the static pictures are there
    out = tmp_path / "cdn.html"
    argv = [sys.executable, "-m", "fxnet_widgets.cli", "report", str(ASSETS / "network.json"),
            str(ASSETS / "plan.json"), str(ASSETS / "scene-test.png"), "-o", str(out)]  # fmt: skip
    done = subprocess.run(argv, capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert done.returncode == 0, f"fxnet report failed ({done.returncode}): {done.stderr[-2000:]}"
    page, log = new_page()
    page.goto(out.as_uri(), wait_until="load", timeout=60_000)
    assert log.blocked, "the CDN report should have asked for its scripts"
    assert log.page_errors == [], "uncaught page errors:\n" + "\n".join(log.page_errors)
    img = page.locator("section#preview figure img").first
    assert (img.get_attribute("src") or "").startswith("data:image/png;base64,")
