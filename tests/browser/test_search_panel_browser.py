"""The search panel in Voila and JupyterLab (headless Chromium): press "sweep", click a point, the explorer shows it.

``tests/browser/search_dashboard.ipynb`` shows a search panel over weight widths
4 and 5 on every layer above the demo explorer (whose plan has 10-bit weights), so
any point picked changes the weight-width slider and the fixed-point picture.
"""

from __future__ import annotations

import importlib.util
import json
import re
import shutil
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


@pytest.fixture(scope="module")
def search_lab(tmp_path_factory: pytest.TempPathFactory, chromium_available: Any) -> Iterator[Any]:
    """JupyterLab on a free loopback port, its notebook dir holding a copy of ``search_dashboard.ipynb``."""
    cf = _conftest()
    if importlib.util.find_spec("jupyterlab") is None:
        cf.missing("jupyterlab is not installed (pip install -e '.[lab]')")
    home = tmp_path_factory.mktemp("lab-search-home")
    nbdir = home / "notebooks"
    nbdir.mkdir()
    shutil.copy(HERE / "search_dashboard.ipynb", nbdir / "search_dashboard.ipynb")
    settings = home / "settings"
    for ext, name, value in (("apputils-extension", "notification", {"fetchNews": "false", "checkForUpdates": False}),
                             ("notebook-extension", "tracker", {"windowingMode": "none"})):  # fmt: skip
        (settings / "@jupyterlab" / ext).mkdir(parents=True)
        (settings / "@jupyterlab" / ext / f"{name}.jupyterlab-settings").write_text(json.dumps(value))
    (home / "workspaces").mkdir()
    port = cf.free_port()
    argv = [sys.executable, "-m", "jupyter", "lab", "--no-browser", "--allow-root", f"--port={port}",
            "--ServerApp.ip=127.0.0.1", "--ServerApp.port_retries=0", "--IdentityProvider.token=",
            "--ServerApp.password=", "--LabApp.news_url=None", f"--notebook-dir={nbdir}",
            f"--LabApp.user_settings_dir={settings}", f"--LabApp.workspaces_dir={home / 'workspaces'}"]  # fmt: skip
    env = cf._server_env(home)
    env["JUPYTERLAB_SETTINGS_DIR"] = str(settings)
    env["JUPYTERLAB_WORKSPACES_DIR"] = str(home / "workspaces")
    server = cf.Server("jupyter lab", argv, port, home / "lab.log", nbdir, env)
    try:
        server.wait_ready("/static/favicons/favicon.ico")
        yield server
    finally:
        server.stop()


def test_in_lab_run_all_sweep_and_pick(search_lab, new_page, explorer_page, artifacts):
    page, log = new_page(viewport={"width": 1600, "height": 2400})
    page.goto(f"{search_lab.base}/lab/tree/search_dashboard.ipynb", wait_until="domcontentloaded", timeout=90_000)
    page.wait_for_selector(".jp-Notebook .jp-CodeCell", timeout=90_000)
    page.wait_for_function("() => /\\| Idle/.test((document.querySelector('#jp-main-statusbar') || {}).textContent)",
                           timeout=90_000)  # fmt: skip
    page.locator(".lm-MenuBar-itemLabel", has_text=re.compile("^Run$")).click()
    page.locator(".lm-Menu-itemLabel", has_text=re.compile("^Run All Cells$")).click()
    page.wait_for_selector(".jp-Notebook .fxnet-search", timeout=150_000)
    root = ".jp-Notebook .fxnet-explorer"
    sweep_and_pick(page, explorer_page(page, root), ".jp-Notebook .fxnet-search", artifacts / "lab-search-swept.png")
    page.screenshot(path=str(artifacts / "lab-search-picked.png"), full_page=True)
    assert not log.page_errors, "uncaught errors in the page:\n" + "\n".join(log.page_errors)


def test_sweep_then_click_a_point_loads_it_into_the_explorer(search_voila, new_page, explorer_page, artifacts):
    page, log = new_page(viewport={"width": 1500, "height": 2200})
    page.goto(search_voila.base + "/", wait_until="domcontentloaded", timeout=90_000)
    page.wait_for_selector(".fxnet-search", timeout=120_000)
    sweep_and_pick(page, explorer_page(page), ".fxnet-search", artifacts / "voila-search-swept.png")
    page.screenshot(path=str(artifacts / "voila-search-picked.png"), full_page=True)
    # console messages (blocked CDN fonts, voila's own warnings) are written down; uncaught errors fail
    assert not log.page_errors, "uncaught errors in the page:\n" + "\n".join(log.page_errors)
    (artifacts / "voila-search-console.json").write_text(json.dumps({"console_errors": log.console_errors,
                                                                     "blocked": log.blocked}, indent=1))


def sweep_and_pick(page: Any, ex: Any, panel: str, shot: Path) -> None:
    """Press "sweep" in the panel, click its first point, and check the explorer shows that plan."""
    ex.wait_for("(s) => /^ok/.test(s.status) && s.images.length >= 4 && s.images.every(i => i)", timeout=60_000)
    before = ex.snapshot()
    width = "weight width"
    assert float(before["sliders"][width]) == 10, before["sliders"]
    fixed = "fixed-point decision"
    old_src = before["pictures"][fixed]

    page.locator(f"{panel} button", has_text="sweep").first.click()
    status = page.locator(f"{panel} .widget-html", has_text="sweep done")
    status.first.wait_for(timeout=120_000)
    assert "sweep done: 2 plans (0 refused)" in status.first.inner_text()
    dots = page.locator(f"{panel} .bqplot path.dot")
    page.wait_for_function("(sel) => document.querySelectorAll(sel).length >= 3", arg=f"{panel} .bqplot path.dot",
                           timeout=30_000)  # two records and the explorer's plan  # fmt: skip
    page.screenshot(path=str(shot), full_page=True)
    # hovering a point shows its plan in Q notation (bqplot's tooltip of the point's name)
    dots.first.hover(force=True)
    page.wait_for_function("() => [...document.querySelectorAll('.bqplot_tooltip_div')].some(e => "
                           "/L1: weights U?Q-?\\d+\\.-?\\d+ \\(\\d+ b\\)/.test(e.innerText))",
                           timeout=30_000)  # fmt: skip
    # click the first record point (the explorer's plan, a diamond, is drawn last)
    dots.first.click(force=True)
    picked = page.locator(".fxnet-search-picked").first
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
