"""The published notebook page opened offline from ``file://`` in headless Chromium.

Reference: the Jupyter widgets HTML manager renders the saved widget state
(ipywidgets' "Embedding Jupyter Widgets in Other Contexts than the Notebook"
documentation); bqplot draws a figure as an ``svg.svg-figure`` (bqplot's own
DOM, from memory, also read by the report test in this directory).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

pytest.importorskip("nbconvert")
pytest.importorskip("bqplot")

import nbformat  # noqa: E402

from fxnet_widgets.report.publish import publish_notebook  # noqa: E402


def _notebook(path: Path) -> None:
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.cells = [
        nbformat.v4.new_markdown_cell("# Ripe fruit on the sorting line"),
        nbformat.v4.new_code_cell("import ipywidgets as w\nw.IntSlider(value=7, max=20, description='ripeness')"),
        nbformat.v4.new_code_cell(
            "import bqplot.pyplot as plt\nfig = plt.figure(title='red share per frame')\n"
            "plt.plot([0, 1, 2, 3], [0.1, 0.4, 0.35, 0.8])\nfig"
        ),
    ]
    nbformat.write(nb, str(path))


def test_offline_page_renders_widgets_from_file(
    tmp_path: Path, new_page: Any, html_manager_dir: Path, artifacts: Path
) -> None:
    src = tmp_path / "team.ipynb"
    _notebook(src)
    out = publish_notebook(src, tmp_path / "team.html", execute=True, offline_bundles=html_manager_dir, timeout=120)
    page, log = new_page()
    page.goto(out.as_uri())
    page.wait_for_selector(".bqplot.figure svg.svg-figure .line", timeout=30_000)
    page.wait_for_selector(".widget-slider .noUi-handle", timeout=30_000)
    svg = page.eval_on_selector(".bqplot.figure svg.svg-figure", "e => e.innerHTML")
    assert len(svg) > 200 and "path" in svg
    # the slider shows the saved value (7), read from the state, not recomputed
    value = page.eval_on_selector(".widget-slider .noUi-handle", "e => e.getAttribute('aria-valuenow')")
    assert float(value) == 7
    assert page.locator(".fxnet-live").inner_text().count("Model") == 2
    page.screenshot(path=str(artifacts / "publish-offline.png"), full_page=True)
    assert log.blocked == [], f"the offline page asked the network for {log.blocked}"
    assert log.errors() == [], f"console errors: {log.errors()}"
