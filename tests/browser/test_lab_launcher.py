"""``fxnet lab`` as the README's first command runs it: started as this user (root in CI), the page loads."""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.browser


def test_fxnet_lab_opens_the_quick_start(launched_lab, new_page, artifacts):
    # as root (CI), JupyterLab exits at once unless --allow-root is given (Jupyter Server's
    # ServerApp.allow_root option, from its documentation): answering at all shows the launcher added it
    page, log = new_page()
    page.goto(f"{launched_lab.base}/lab/tree/notebooks/01-quick-start.ipynb", wait_until="domcontentloaded",
              timeout=90_000)  # fmt: skip
    try:
        page.wait_for_selector(".jp-Notebook .jp-CodeCell", timeout=120_000)
    finally:
        page.screenshot(path=str(artifacts / "fxnet-lab.png"))
    assert page.locator(".lm-TabBar-tabLabel", has_text="01-quick-start.ipynb").count() >= 1
    assert log.page_errors == [], log.page_errors
