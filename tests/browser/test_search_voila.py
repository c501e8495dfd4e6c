"""The search panel in Voila (headless Chromium): press "sweep", click a point, the explorer shows that plan.

``tests/browser/search_dashboard.ipynb`` shows a search panel over weight widths
4 and 5 on every layer above the demo explorer (whose plan has 10-bit weights), so
any point picked changes the weight-width slider and the fixed-point picture.
"""

from __future__ import annotations

import importlib.util
import json
import re
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

pytestmark = pytest.mark.browser

HERE = Path(__file__).resolve().parent


def _conftest() -> Any:
    """This folder's conftest as a module (its Server class and helpers)."""
    spec = importlib.util.spec_from_file_location("fxnet_browser_conftest", HERE / "conftest.py")
    assert spec is not None and spec.loader is not None
    mod = sys.modules.get(spec.name)
    if mod is None:
        mod = importlib.util.module_from_spec(spec)
        sys.modules[spec.name] = mod  # dataclasses look their module up while it runs
        spec.loader.exec_module(mod)
    return mod


@pytest.fixture(scope="module")
def search_voila(tmp_path_factory: pytest.TempPathFactory, chromium_available: Any) -> Iterator[Any]:
    """Voila serving ``search_dashboard.ipynb`` on a free loopback port."""
    cf = _conftest()
    if importlib.util.find_spec("voila") is None:
        cf.missing("voila is not installed (pip install -e '.[lab]')")
    home = tmp_path_factory.mktemp("voila-search-home")
    port = cf.free_port()
    argv = [sys.executable, "-m", "voila", str(HERE / "search_dashboard.ipynb"), "--no-browser", f"--port={port}",
            "--Voila.ip=127.0.0.1", "--Voila.port_retries=0", "--show_tracebacks=True"]  # fmt: skip
    server = cf.Server("voila", argv, port, home / "voila.log", HERE, cf._server_env(home))
    try:
        server.wait_ready("/voila/static/voila.js")
        yield server
    finally:
        server.stop()


def test_sweep_then_click_a_point_loads_it_into_the_explorer(search_voila, new_page, explorer_page, artifacts):
    page, log = new_page(viewport={"width": 1500, "height": 2200})
    page.goto(search_voila.base + "/", wait_until="domcontentloaded", timeout=90_000)
    page.wait_for_selector(".fxnet-search", timeout=120_000)
    ex = explorer_page(page)
    ex.wait_for("(s) => /^ok/.test(s.status) && s.images.length >= 4 && s.images.every(i => i)", timeout=60_000)
    before = ex.snapshot()
    width = "weight width"
    assert float(before["sliders"][width]) == 10, before["sliders"]
    fixed = "fixed-point decision"
    old_src = before["pictures"][fixed]

    page.locator(".fxnet-search button", has_text="sweep").first.click()
    status = page.locator(".fxnet-search .widget-html", has_text="sweep done")
    status.first.wait_for(timeout=120_000)
    assert "sweep done: 2 plans (0 refused)" in status.first.inner_text()
    dots = page.locator(".fxnet-search .bqplot path.dot")
    page.wait_for_function("() => document.querySelectorAll('.fxnet-search .bqplot path.dot').length >= 3",
                           timeout=30_000)  # two records and the explorer's plan  # fmt: skip
    page.screenshot(path=str(artifacts / "voila-search-swept.png"), full_page=True)
    # click the first record point (the explorer's plan, a diamond, is drawn last)
    dots.first.click(force=True)
    picked = page.locator(".fxnet-search-picked")
    picked.wait_for(timeout=30_000)
    page.wait_for_function("() => /picked:\\s*records\\[\\d\\]/.test(document.querySelector('.fxnet-search-picked')"
                           ".innerText)", timeout=30_000)  # fmt: skip
    text = picked.inner_text()
    bits = int(re.search(r"'weight_bits': (\d+)", text).group(1))
    assert bits in (4, 5), text
    # the explorer shows the picked plan: the slider moved, the fixed-point picture is new
    ex.wait_for("(s, b) => +s.sliders[b[0]] === b[1]", [width, bits])
    ex.wait_for("(s, old) => s.pictures[old[0]] && s.pictures[old[0]] !== old[1]", [fixed, old_src])
    assert re.search(rf"L1 W{bits}\.", ex.snapshot()["status"]), ex.snapshot()["status"]
    page.screenshot(path=str(artifacts / "voila-search-picked.png"), full_page=True)
    # console messages (blocked CDN fonts, voila's own warnings) are written down; uncaught errors fail
    assert not log.page_errors, "uncaught errors in the page:\n" + "\n".join(log.page_errors)
    (artifacts / "voila-search-console.json").write_text(json.dumps({"console_errors": log.console_errors,
                                                                     "blocked": log.blocked}, indent=1))
