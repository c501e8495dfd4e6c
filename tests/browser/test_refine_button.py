"""The explorer's refine button in a Voila dashboard, in headless Chromium: click, wait, see both boundaries.

``tests/browser/dashboard.ipynb`` opens the demo explorer; the refine section's button runs
``refine`` in the kernel's background thread and swaps the refined network in.
"""

from __future__ import annotations

import json

import pytest

pytestmark = pytest.mark.browser

READY_JS = "(snap) => /^(ok|error)/.test(snap.status) && snap.images.length >= 4 && snap.images.every(s => s)"
#: per slice figure, how many scatter marks (sample points and outline dots) it draws
DOTS_JS = r"""
() => Object.fromEntries([...document.querySelectorAll('.fxnet-explorer .bqplot.figure')].map(f => [
  ((f.querySelector('.mainheading') || {}).textContent || ''), f.querySelectorAll('.dot').length]))
"""


def _panel_text(page) -> str:
    return page.locator(".fxnet-refine").first.inner_text()


def test_refine_button_swaps_in_and_outlines_the_plain_boundary(voila_server, new_page, explorer_page, artifacts,
                                                               kernel_run):  # fmt: skip
    page, log = new_page(viewport={"width": 1500, "height": 1800})
    page.goto(voila_server.base + "/", wait_until="domcontentloaded", timeout=90_000)
    page.wait_for_selector(".fxnet-explorer", timeout=120_000)
    ex = explorer_page(page)
    ex.wait_for(READY_JS, timeout=60_000)
    # narrower weights (5 and 4 bits), set from Python on this page's kernel: plain rounding loses pixels there
    # (the dashboard's 6-bit table back at the demo's 14 bits)
    kernel_run(voila_server, "explorer.plan = explorer.plan.replace(table_bits=14).replace(layer=0, weight_bits=5, "
               "weight_frac=0).replace(layer=1, weight_bits=4, weight_frac=1)")  # fmt: skip
    ex.wait_for("(s) => /L1 W5\\.0 A\\d+ T14\\.10 .*L2 W4\\.1 /.test(s.status)")
    ex.section("refine")
    before = page.evaluate(DOTS_JS)
    assert "plain rounding of the float weights" in _panel_text(page)

    page.locator(".fxnet-refine button", has_text="refine").first.click()
    page.wait_for_function(
        "() => /showing the refined network[^]*plain rounding -> refined:/"
        ".test(document.querySelector('.fxnet-refine').innerText)",
        timeout=120_000, polling=200,
    )  # fmt: skip
    text = _panel_text(page)
    assert "plain rounding -> refined:" in text and "held out" in text
    # the slices now also carry the plain network's boundary as dots (more marks than the samples alone),
    # as many as the kernel's outline holds
    want = json.loads(kernel_run(voila_server, "import json; print(json.dumps({sp.figure.title: len(sp.outline.x) "
                                               "for sp in explorer.boundary.slices}))"))  # fmt: skip
    assert all(want.values()), want
    page.wait_for_function(
        "([js, old, want]) => { const now = eval(js)(); "
        "return ['R-G', 'R-B', 'G-B'].every(t => now[t] === old[t] + want[t]); }",
        arg=[DOTS_JS, before, want], timeout=60_000, polling=200,
    )  # fmt: skip
    assert "dots: where the fixed-point decision of plain rounding changes" in page.locator(
        ".fxnet-explorer").first.inner_text()  # fmt: skip
    ex.section("decision boundary")
    ex.screenshot(artifacts / "voila-refined-boundary.png")

    # the toggle back: plain rounding again, the refined network's boundary dotted instead
    ex.section("refine")
    page.locator(".fxnet-refine button", has_text="plain rounding").first.click()
    page.wait_for_function(
        "() => /showing plain rounding/.test(document.querySelector('.fxnet-refine').innerText)",
        timeout=60_000, polling=200,
    )  # fmt: skip
    page.wait_for_function(
        "() => /fixed-point decision of the refined network changes/.test("
        "document.querySelector('.fxnet-explorer').innerText)", timeout=60_000, polling=200,
    )  # fmt: skip
    assert not log.page_errors, "uncaught errors in the page:\n" + "\n".join(log.page_errors)
