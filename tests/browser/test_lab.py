"""A copy of the quick-start notebook in JupyterLab, in headless Chromium: Run All, then drag a slider."""

from __future__ import annotations

import re

import pytest

pytestmark = pytest.mark.browser

#: every code cell ran (its prompt holds an execution count) and the kernel is idle (status bar text)
ALL_RAN_JS = r"""
() => {
  const prompts = [...document.querySelectorAll('.jp-Notebook .jp-CodeCell .jp-InputPrompt')];
  const ran = prompts.length > 0 && prompts.every(p => /^\[\d+\]:$/.test(p.textContent.trim()));
  const bar = (document.querySelector('#jp-main-statusbar') || {}).textContent || '';
  return ran && bar.includes('| Idle');
}
"""


def test_run_all_then_drag_the_table_width(lab_server, new_page, explorer_page, artifacts, lab_menu):
    menu = lab_menu
    page, log = new_page(viewport={"width": 1600, "height": 1200})
    page.goto(f"{lab_server.base}/lab/tree/{lab_server.notebook}", wait_until="domcontentloaded", timeout=90_000)
    page.wait_for_selector(".jp-Notebook .jp-CodeCell", timeout=90_000)
    # wait until the kernel is up before running (the status bar names the kernel and its state)
    page.wait_for_function("() => /\\| Idle/.test((document.querySelector('#jp-main-statusbar') || {}).textContent)",
                           timeout=90_000)  # fmt: skip

    # the stored notebook has execution counts: clear them, so "every cell ran" means ran now
    menu(page, "Edit", "Clear Outputs of All Cells")
    page.wait_for_function(
        "() => [...document.querySelectorAll('.jp-Notebook .jp-CodeCell .jp-InputPrompt')]"
        ".every(p => !/\\d/.test(p.textContent))"
    )  # fmt: skip
    menu(page, "Run", "Run All Cells")
    page.wait_for_function(ALL_RAN_JS, timeout=150_000, polling=250)
    errors = page.locator('.jp-OutputArea-output[data-mime-type="application/vnd.jupyter.error"]')
    assert errors.count() == 0, "a cell raised:\n" + "\n".join(errors.all_inner_texts())[:3000]

    root = ".jp-Notebook .fxnet-explorer"
    page.locator(root).first.scroll_into_view_if_needed()
    ex = explorer_page(page, root)
    ex.wait_for("(s) => /^ok/.test(s.status) && ['R-G', 'R-B', 'G-B'].every(t => s.figures[t] && s.figures[t].heatmap)")
    before = ex.snapshot()
    old_update = int(re.search(r"update (\d+)", before["status"]).group(1))

    # drag the table-width handle to the left end of its track (read the old value first)
    handle = ex.slider_handle(ex.TABLE_WIDTH)
    handle.scroll_into_view_if_needed()
    old = int(float(handle.get_attribute("aria-valuenow")))
    low = int(float(handle.get_attribute("aria-valuemin")))
    assert old > low, f"the table width must be movable to the left, at {old} (min {low})"
    track = page.locator(f"{root} .widget-slider").filter(has=page.locator(".widget-label", has_text=ex.TABLE_WIDTH))
    track_box = track.locator(".noUi-target").first.bounding_box()
    box = handle.bounding_box()
    y = box["y"] + box["height"] / 2
    page.mouse.move(box["x"] + box["width"] / 2, y)
    page.mouse.down()
    page.mouse.move(track_box["x"] - 20, y, steps=8)
    page.mouse.up()
    ex.wait_for("(s, t) => +s.sliders[t] < " + str(old), ex.TABLE_WIDTH)

    # the kernel computed the plan the slider shows: the status counts more updates and the cost
    # names a table of 2^T entries for the T on screen (wait until slider and kernel agree)
    ex.wait_for("(s, n) => /update (\\d+)/.test(s.status) && +s.status.match(/update (\\d+)/)[1] > n", old_update)
    ex.wait_for("(s, t) => s.metrics.includes(`table(s) of ${2 ** Math.round(+s.sliders[t])} x `)", ex.TABLE_WIDTH)
    # the boundary heat maps were redrawn
    ex.wait_for(
        "(s, old) => Object.keys(old).some(t => s.figures[t].heatmap !== old[t])",
        {t: before["figures"][t]["heatmap"] for t in ("R-G", "R-B", "G-B")},
    )  # fmt: skip
    page.locator(root).first.scroll_into_view_if_needed()
    ex.screenshot(artifacts / "lab-explorer.png")
    # the slider stays where it was dropped (no stale echo from the kernel moves it back)
    page.wait_for_timeout(1000)
    shown = int(float(ex.snapshot()["sliders"][ex.TABLE_WIDTH]))
    assert shown == low, f"the table-width slider was dropped at {low} but moved back to {shown}"
    # at the narrowest table the fixed-point decisions change: the preview image has a new src
    fixed = "fixed-point decision"
    ex.section("decision boundary")  # for the report: the slices at Lab's width with the file browser open
    ex.screenshot(artifacts / "lab-explorer-boundary.png")
    ex.wait_for("(s, old) => s.pictures[old[0]] && s.pictures[old[0]] !== old[1]", [fixed, before["pictures"][fixed]])
    assert not log.page_errors, "uncaught errors in the page:\n" + "\n".join(log.page_errors)
