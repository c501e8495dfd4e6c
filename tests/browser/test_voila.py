"""The explorer as a Voila dashboard in headless Chromium: a key press on a slider updates every view.

``tests/browser/dashboard.ipynb`` opens the demo explorer with a narrow table
(6 address bits), so that one step of the table-width slider changes the decisions.
"""

from __future__ import annotations

import json
import re

import pytest

pytestmark = pytest.mark.browser

#: the first result is on screen: the status line says "ok: update N" (or shows an error)
READY_JS = "(snap) => /^(ok|error)/.test(snap.status) && snap.images.length >= 4 && snap.images.every(s => s)"


def _update_number(status: str) -> int:
    m = re.search(r"update (\d+)", status)
    assert m, f"the status line should count updates, not {status!r}"
    return int(m.group(1))


def test_table_width_key_press_updates_every_view(voila_server, new_page, explorer_page, artifacts):
    page, log = new_page(viewport={"width": 1500, "height": 1800})
    page.goto(voila_server.base + "/", wait_until="domcontentloaded", timeout=90_000)
    page.wait_for_selector(".fxnet-explorer", timeout=120_000)
    ex = explorer_page(page)
    ex.wait_for(READY_JS, timeout=60_000)
    assert ex.snapshot()["status"].startswith("ok"), ex.snapshot()["status"]

    # read every old value BEFORE pressing the key (reading after may already see the new one)
    ex.wait_for("(s) => ['R-G', 'R-B', 'G-B'].every(t => s.figures[t] && s.figures[t].heatmap)")
    before = ex.snapshot()
    ex.section("overflow and clamps")
    ex.wait_for("(s) => Object.values(s.figures).some(f => f.visible && f.bars > 0)")
    ex.wait_drawn()
    before_hist = ex.snapshot()["figures"]
    histograms = sorted(t for t, f in before_hist.items() if t not in ("R-G", "R-B", "G-B", "events per neuron"))
    assert histograms, f"no histogram figures among {sorted(before_hist)}"
    ex.section("decision boundary")

    handle = ex.slider_handle(ex.TABLE_WIDTH)
    old = int(float(handle.get_attribute("aria-valuenow")))
    assert old == 6, "the dashboard opens with a 6-bit table"
    old_update = _update_number(before["status"])
    handle.focus()
    page.keyboard.press("ArrowLeft")
    new = old - 1

    # the kernel computed the new plan: status counts one more update, the cost names the new table
    ex.wait_for("(s, n) => /^ok: update (\\d+)/.test(s.status) && +s.status.match(/update (\\d+)/)[1] > n",
                old_update)  # fmt: skip
    table = f"{2**new} x 8 b"  # 2^T entries of out_bits: the contract's table of T address bits
    ex.wait_for("(s, t) => s.metrics.includes(t)", table)
    after = ex.snapshot()
    assert float(after["sliders"][ex.TABLE_WIDTH]) == new
    assert int(ex.number_box(ex.TABLE_WIDTH).input_value()) == new  # the kernel wrote the number box
    assert f"table(s) of {2**old} x 8 b" not in after["metrics"]
    # the status line names the plan's widths: T<address bits>.<fraction bits> on every layer
    widths = re.findall(r"L\d+ W-?\d+\.-?\d+ A\d+ T(\d+)\.", after["status"])
    assert widths and all(int(t) == new for t in widths), after["status"]

    # the boundary heat maps (the PNG each one draws) changed
    ex.wait_for(
        "(s, old) => ['R-G', 'R-B', 'G-B'].every(t => s.figures[t].heatmap && s.figures[t].heatmap !== old[t])",
        {t: before["figures"][t]["heatmap"] for t in ("R-G", "R-B", "G-B")},
    )  # fmt: skip
    ex.screenshot(artifacts / "voila-boundary.png")

    # the preview: the fixed-point decision image got a new src (a new blob: URL)
    ex.section("image")
    fixed = "fixed-point decision"
    assert before["pictures"].get(fixed), f"no picture titled {fixed!r} among {sorted(before['pictures'])}"
    ex.wait_for("(s, old) => s.pictures[old[0]] && s.pictures[old[0]] !== old[1]", [fixed, before["pictures"][fixed]])
    assert ex.snapshot()["pictures"][fixed].startswith("blob:")
    ex.screenshot(artifacts / "voila-image.png")

    # the histograms: the table window marks moved (their SVG changed)
    ex.section("overflow and clamps")
    ex.wait_for(
        "(s, old) => Object.keys(old).every(t => s.figures[t] && s.figures[t].svg !== old[t])",
        {t: before_hist[t]["svg"] for t in histograms},
    )  # fmt: skip
    ex.screenshot(artifacts / "voila-events.png")

    assert not log.page_errors, "uncaught errors in the page:\n" + "\n".join(log.page_errors)
    (artifacts / "voila-console.json").write_text(json.dumps({"console_errors": log.console_errors,
                                                              "blocked": log.blocked}, indent=1))  # fmt: skip
