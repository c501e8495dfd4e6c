"""A saved explorer report, read in Chromium with JavaScript off: the search and A/B sections are there.

The explorer (the demo) runs a small SearchPanel sweep, a record is picked, and a
comparison of the demo plan (A) against the picked plan (B) is pinned; the report is
opened from file:// with JavaScript disabled. Its "search" and "compare" sections must
show as laid-out text, with the comparison's calibrated cost rows labelled as estimates
for the named device (project caution: open-tool figures are estimates, not sign-off).
"""

from __future__ import annotations

from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def compare_report(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, dict[str, object]]:
    from fxnet_widgets import Explorer, SearchPanel
    from fxnet_widgets.core.analysis import hardware_cost
    from fxnet_widgets.core.analysis.search import SerialExecutor

    ex = Explorer.demo(ROOT / "assets", samples=200)
    demo = ex.plan
    panel = SearchPanel(ex, {"weight_bits": [4, 8]}, layer=0, executor=SerialExecutor())
    panel.run(wait=True)
    picked = panel.pick(0)
    cmp = ex.compare(plan_a=demo)  # B follows the explorer: the picked plan
    out = tmp_path_factory.mktemp("report") / "report.html"
    ex.save_report(out)
    luts = hardware_cost(ex.session.network, picked)
    return out, {"target": luts.target, "luts_b": luts.estimated()["luts"], "plan_b": repr(cmp.comparison.plan_b),
                 "records": len(panel.records)}  # fmt: skip


def test_report_without_javascript_shows_search_and_comparison(compare_report, new_page):
    path, want = compare_report
    page, log = new_page(java_script_enabled=False)
    page.goto(path.as_uri(), wait_until="load")
    for sid in ("search", "compare"):
        box = page.locator(f"section#{sid}").bounding_box()
        assert box and box["height"] > 100, f"section {sid} is not laid out: {box}"
    search = page.locator("section#search").inner_text()
    assert f"{want['records']} plans" in search, search[:500]
    text = page.locator("section#compare").inner_text()
    row = page.locator("section#compare table.compare tr", has_text="cost luts").inner_text().split("\t")
    assert row[0].strip() == "cost luts" and row[2].strip() == str(want["luts_b"]), row
    assert f"cost luts, ffs, brams: calibrated estimates for {want['target']}" in text and "not sign-off" in text
    assert "JavaScript is off" in page.locator("section#live").inner_text()
    assert not log.page_errors and not log.blocked, (log.page_errors, log.blocked)
