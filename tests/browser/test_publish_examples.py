"""Every example notebook, executed and published offline, renders all its widgets from ``file://``.

References: the Jupyter widgets HTML manager renders the saved widget state (ipywidgets'
"Embedding Jupyter Widgets in Other Contexts than the Notebook" documentation); the
saved state and its ``IPY_MODEL_<id>`` references follow the widget state schema
(``application/vnd.jupyter.widget-state+json``, ipywidgets' embedding documentation);
bqplot draws a figure as an ``svg.svg-figure`` and ipywidgets an ``Image`` as an
``<img>`` with a ``blob:`` or ``data:`` source (both libraries' DOM, from memory).
With JavaScript off, the browser shows ``<noscript>`` content (HTML Living Standard, the
``noscript`` element).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

pytest.importorskip("nbconvert")
pytest.importorskip("bqplot")

import nbformat  # noqa: E402

from fxnet_widgets.report.publish import WIDGET_STATE_MIME, publish_notebook  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = sorted((ROOT / "notebooks").glob("*.ipynb"))
VIEW_MIME = "application/vnd.jupyter.widget-view+json"

pytestmark = pytest.mark.browser


def _refs(value: Any) -> list[str]:
    """Every model id a state value refers to (``"IPY_MODEL_<id>"`` strings, nested anywhere)."""
    if isinstance(value, str):
        return [value[len("IPY_MODEL_") :]] if value.startswith("IPY_MODEL_") else []
    if isinstance(value, dict):
        return [r for v in value.values() for r in _refs(v)]
    if isinstance(value, list):
        return [r for v in value for r in _refs(v)]
    return []


def _shown_models(nb: Any) -> tuple[dict[str, str], int]:
    """Model name of every model reachable from a displayed view, and the number of views shown."""
    state = nb.metadata.get("widgets", {}).get(WIDGET_STATE_MIME, {}).get("state", {})
    roots = [
        out["data"][VIEW_MIME]["model_id"]
        for cell in nb.cells
        if cell.cell_type == "code"
        for out in cell.get("outputs", [])
        if VIEW_MIME in out.get("data", {})
    ]
    seen: dict[str, str] = {}
    todo = list(roots)
    while todo:
        mid = todo.pop()
        if mid in seen or mid not in state:
            continue
        seen[mid] = state[mid]["model_name"]
        todo.extend(_refs(state[mid]["state"]))
    return seen, len(roots)


@pytest.fixture(scope="module")
def published(tmp_path_factory: pytest.TempPathFactory, html_manager_dir: Path) -> dict[str, tuple[Path, Any]]:
    """Each example notebook executed once in a clean kernel (widget state stored), then published offline."""
    from nbconvert.preprocessors import ExecutePreprocessor

    out = tmp_path_factory.mktemp("published-examples")
    pages = {}
    for src in EXAMPLES:
        nb = nbformat.read(str(src), as_version=4)
        ExecutePreprocessor(timeout=300, store_widget_state=True).preprocess(
            nb, {"metadata": {"path": str(src.parent)}}
        )
        executed = out / src.name
        nbformat.write(nb, str(executed))
        page = publish_notebook(executed, out / f"{src.stem}.html", offline_bundles=html_manager_dir)
        pages[src.stem] = (page, nb)
    return pages


@pytest.mark.parametrize("name", [p.stem for p in EXAMPLES])
def test_example_page_renders_every_widget_offline(
    name: str, published: dict[str, tuple[Path, Any]], new_page: Any, artifacts: Path
) -> None:
    page_path, nb = published[name]
    models, n_views = _shown_models(nb)
    if n_views == 0:  # a notebook without widgets: the page says so instead of showing empty boxes
        page, log = new_page()
        page.goto(page_path.as_uri())
        assert "saved without widget state" in page.locator(".fxnet-page-facts").inner_text()
        assert log.blocked == [] and log.errors() == []
        return
    n_figures = sum(1 for m in models.values() if m == "FigureModel")
    n_images = sum(1 for m in models.values() if m == "ImageModel")

    page, log = new_page()
    page.goto(page_path.as_uri())
    if n_figures:
        page.wait_for_function(
            f"document.querySelectorAll('.bqplot.figure svg.svg-figure').length >= {n_figures}", timeout=60_000
        )
        sizes = page.eval_on_selector_all(".bqplot.figure svg.svg-figure", "es => es.map(e => e.innerHTML.length)")
        assert all(s > 200 for s in sizes), f"{name}: an empty bqplot figure ({sizes})"
    if n_images:
        page.wait_for_function(
            "[...document.querySelectorAll('.widget-image')].filter(e => e.src && e.naturalWidth > 0).length"
            f" >= {n_images}",
            timeout=60_000,
        )
    page.screenshot(path=str(artifacts / f"publish-{name}.png"), full_page=True)
    assert log.blocked == [], f"{name}: the offline page asked the network for {log.blocked}"
    assert log.errors() == [], f"{name}: console errors: {log.errors()}"

    # JavaScript off: the page says so and every widget output shows its static form
    page, log = new_page(java_script_enabled=False)
    page.goto(page_path.as_uri())
    assert page.locator(".fxnet-page-facts").inner_text().count("JavaScript is off") == 1
    fallbacks = page.locator(".fxnet-fallback")
    assert fallbacks.count() == n_views, f"{name}: {fallbacks.count()} static forms for {n_views} widget outputs"
    for i in range(fallbacks.count()):
        assert fallbacks.nth(i).is_visible()
        assert fallbacks.nth(i).inner_text().strip() or fallbacks.nth(i).locator("img").count() == 1
    page.screenshot(path=str(artifacts / f"publish-{name}-no-js.png"), full_page=True)
    assert log.blocked == []
