"""Publish an executed notebook as one HTML page whose widgets still render.

The page is nbconvert's ``lab`` HTML with the widget scripts of the report
(:mod:`fxnet_widgets.report._bundles`) in place of nbconvert's own loader:
require.js and the widget HTML manager from public CDNs by default, or every
script inlined from a bundle directory (``offline_bundles``, the layout
``scripts/fetch_widget_bundles.sh`` writes), so the page opens from
``file://`` with no network. bqplot's JavaScript is always inlined from the
installed wheel. The page records the package versions, the kernel, and the
execution time (from the cells' timing metadata); a notebook saved without
widget state says so. Each widget output also carries a static form inside
``<noscript>`` (its plain text or PNG, and the saved pictures, controls and bqplot figures
drawn as SVG from the saved state, :mod:`fxnet_widgets.report._fallback`).

``jupyter nbconvert --to fxnet-page NB.ipynb`` uses :class:`PageExporter`
(registered under the ``nbconvert.exporters`` entry point).
"""

from __future__ import annotations

import os
import time
from datetime import datetime
from importlib import metadata
from pathlib import Path
from typing import Any

from jinja2 import DictLoader
from nbconvert.exporters import HTMLExporter
from traitlets import Unicode

from ..core.fileio import atomic_write_text, first_line
from ._bundles import Bundles, cdn_bundles
from ._bundles import offline_bundles as _offline_bundles
from ._fallback import static_forms
from ._static import esc

__all__ = ["PageExporter", "publish_notebook", "read_notebook", "page_facts", "PACKAGES"]

WIDGET_STATE_MIME = "application/vnd.jupyter.widget-state+json"
VIEW_MIME = "application/vnd.jupyter.widget-view+json"
#: the packages whose versions the page records
PACKAGES = ("fxnet-widgets", "ipywidgets", "bqplot", "nbconvert", "nbclient", "nbformat", "ipykernel")

_TEMPLATE = r"""{%- extends 'lab/index.html.j2' -%}
{%- block html_head_js_requirejs -%}{%- endblock html_head_js_requirejs -%}
{%- block html_head_js_mathjax -%}
{%- if not resources.fxnet_page.offline -%}{{ super() }}{%- endif -%}
{%- endblock html_head_js_mathjax -%}
{%- block html_head_js_mermaidjs -%}
{%- if not resources.fxnet_page.offline -%}{{ super() }}{%- endif -%}
{%- endblock html_head_js_mermaidjs -%}
{% block jupyter_widgets %}
{%- if resources.fxnet_page.has_state -%}
{{ resources.fxnet_page.scripts }}
{%- endif -%}
{% endblock jupyter_widgets %}
{%- block body_header -%}
{{ super() }}
{{ resources.fxnet_page.facts }}
{%- endblock body_header -%}
{%- block data_widget_view scoped %}
{{ super() }}
{%- set view = output.data['application/vnd.jupyter.widget-view+json'] %}
{%- set form = resources.fxnet_page.forms.get(view['model_id'], '') %}
{%- if form or 'text/plain' in output.data or 'image/png' in output.data %}
<noscript><div class="fxnet-fallback">
{%- if 'image/png' in output.data -%}
<img alt="static picture of the widget" src="data:image/png;base64,{{ output.data['image/png'] }}">
{%- elif 'text/plain' in output.data -%}
<pre>{{ output.data['text/plain'] | escape }}</pre>
{%- endif -%}
{{ form }}
</div></noscript>
{%- endif %}
{%- endblock data_widget_view -%}
"""

_STYLE = (
    "<style>.fxnet-page-facts{font:13px/1.4 sans-serif;margin:8px 16px;padding:6px 10px;"
    "border:1px solid #ccc;background:#f7f7f7}.fxnet-page-facts code{font-size:12px}"
    # with JavaScript off the static form goes on its own line under the (empty) widget output
    # (the lab template lays an output out as a table: a caption at the bottom spans it)
    ".jp-OutputArea-child > noscript{display:table-caption;caption-side:bottom;text-align:left}"
    ".fxnet-fallback pre{white-space:pre-wrap}</style>"
)


def read_notebook(path: str | os.PathLike[str]) -> Any:
    """Read and validate a notebook (nbformat 4), or raise ``ValueError`` with one line naming the file."""
    import nbformat

    name = os.fspath(path)
    if not os.path.isfile(name):
        raise ValueError(f"notebook must be an existing .ipynb file, not {name!r}")
    try:
        nb = nbformat.read(name, as_version=4)
        nbformat.validate(nb)
    except Exception as exc:  # NotJSONError, ValidationError, UnicodeDecodeError, ...
        why = first_line(exc)
        raise ValueError(f"notebook {name!r} must be a valid Jupyter notebook (nbformat 4): {why}") from None
    return nb


def _versions() -> list[tuple[str, str]]:
    out = []
    for pkg in PACKAGES:
        try:
            out.append((pkg, metadata.version(pkg)))
        except metadata.PackageNotFoundError:
            out.append((pkg, "not installed"))
    return out


def _execution_seconds(nb: Any) -> float | None:
    """Wall time from the first cell's start to the last cell's reply (nbclient's timing metadata)."""
    starts, ends = [], []
    for cell in nb.cells:
        timing = cell.get("metadata", {}).get("execution", {})
        s, e = timing.get("iopub.execute_input"), timing.get("shell.execute_reply")
        try:
            if s and e:
                starts.append(datetime.fromisoformat(s.replace("Z", "+00:00")))
                ends.append(datetime.fromisoformat(e.replace("Z", "+00:00")))
        except ValueError:
            continue
    if not starts:
        return None
    return (max(ends) - min(starts)).total_seconds()


def _live_widgets(nb: Any) -> list[str]:
    """``ModelName (module)`` of each widget shown in an output, in page order."""
    state = nb.metadata.get("widgets", {}).get(WIDGET_STATE_MIME, {}).get("state", {})
    names = []
    for cell in nb.cells:
        for output in cell.get("outputs", []):
            view = output.get("data", {}).get("application/vnd.jupyter.widget-view+json")
            if view and view.get("model_id") in state:
                model = state[view["model_id"]]
                names.append(f"{model.get('model_name', '?')} ({model.get('model_module', '?')})")
    return names


def page_facts(nb: Any, bundles: Bundles | None, seconds: float | None = None) -> str:
    """The HTML box at the top of the page: versions, kernel, execution time, widget state, scripts."""
    kernel = nb.metadata.get("kernelspec", {}).get("name") or "not recorded"
    how = "measured while publishing"
    if seconds is None:
        seconds, how = _execution_seconds(nb), "from the cells' timing metadata"
    ran = f"{seconds:.2f} s ({how})" if seconds is not None else "not recorded"
    live = _live_widgets(nb)
    if bundles is None:
        state = ("<p class=\"fxnet-no-state\">This notebook was saved without widget state: its widgets "
                 "cannot render here. Publish with <code>--execute</code> to store it.</p>")  # fmt: skip
    else:
        mode = ("offline: every script is inlined in this file (no MathJax or Mermaid: formulas and diagrams "
                "stay as source)" if bundles.offline
                else "require.js and the widget manager from public CDNs (bqplot's inlined)")  # fmt: skip
        which = ", ".join(live) if live else "none shown in an output"
        state = (f'<p class="fxnet-live">Live widgets (rendered from the saved state, no kernel: they show '
                 f"the saved values and recompute nothing): {esc(which)}.</p>"
                 f'<p class="fxnet-scripts">JavaScript: {esc(mode)}.</p>')  # fmt: skip
    versions = ", ".join(f"{esc(p)} {esc(v)}" for p, v in _versions())
    return (
        f'{_STYLE}<section class="fxnet-page-facts"><p>Kernel: <code>{esc(kernel)}</code>; execution time: '
        f"{esc(ran)}.</p><p>Versions: {versions}.</p>{state}"
        "<noscript><p>JavaScript is off: each widget shows a static form of its saved state instead "
        "(text, pictures, figures drawn from the saved values).</p></noscript></section>"
    )


class PageExporter(HTMLExporter):
    """nbconvert exporter: one HTML page whose widgets render (``--to fxnet-page``).

    ``--PageExporter.offline_bundles=DIR`` inlines every script (see the module text).
    """

    export_from_notebook = "fxnet page"
    offline_bundles = Unicode(
        None, allow_none=True, help="directory holding @jupyter-widgets/html-manager's dist/embed-amd.js"
    ).tag(config=True)

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.template_name = "lab"
        self.extra_loaders = [DictLoader({"fxnet_page.html.j2": _TEMPLATE})]
        self.template_file = "fxnet_page.html.j2"
        self.execution_seconds: float | None = None

    def from_notebook_node(self, nb: Any, resources: dict[str, Any] | None = None, **kw: Any) -> tuple[str, Any]:
        has_state = bool(nb.metadata.get("widgets", {}).get(WIDGET_STATE_MIME, {}).get("state"))
        bundles = None
        if has_state:
            bundles = _offline_bundles(self.offline_bundles) if self.offline_bundles else cdn_bundles()
        resources = dict(resources or {})
        resources["fxnet_page"] = {
            "has_state": has_state,
            "offline": bool(self.offline_bundles),
            "scripts": bundles.html() if bundles else "",
            "facts": page_facts(nb, bundles, self.execution_seconds),
            "forms": static_forms(nb, VIEW_MIME, WIDGET_STATE_MIME),
        }
        return super().from_notebook_node(nb, resources, **kw)


def publish_notebook(
    path: str | os.PathLike[str],
    out: str | os.PathLike[str],
    *,
    execute: bool = False,
    offline_bundles: str | os.PathLike[str] | None = None,
    no_input: bool = False,
    timeout: int = 600,
) -> Path:
    """Write the notebook at ``path`` as one HTML page at ``out`` (atomically); returns the page's path.

    Parameters
    ----------
    path
        The ``.ipynb`` file.
    out
        The page to write (``.html``), in an existing directory.
    execute
        Run the notebook first in a clean kernel (its own directory as working
        directory), storing the widget state.
    offline_bundles
        None (scripts from public CDNs) or the directory of
        ``@jupyter-widgets/html-manager`` (``dist/embed-amd.js``): every script is inlined.
    no_input
        Leave out the code of the cells (outputs only).
    timeout
        Seconds each cell may run when executing.

    Examples
    --------
    >>> publish_notebook("team.ipynb", "team.html", execute=True)  # doctest: +SKIP
    PosixPath('team.html')
    """
    if not isinstance(timeout, int) or isinstance(timeout, bool) or timeout <= 0:
        raise ValueError(f"timeout must be a positive int of seconds, not {timeout!r}")
    parent = Path(os.path.abspath(out)).parent
    if not parent.is_dir():
        raise ValueError(f"out must be in an existing directory, not {os.fspath(out)!r}")
    if offline_bundles is not None and not os.path.isdir(offline_bundles):
        raise ValueError(f"offline_bundles must be an existing directory, not {os.fspath(offline_bundles)!r}")
    nb = read_notebook(path)
    exporter = PageExporter(exclude_input=no_input, exclude_input_prompt=no_input)
    exporter.offline_bundles = os.fspath(offline_bundles) if offline_bundles is not None else None
    if execute:
        from nbconvert.preprocessors import ExecutePreprocessor

        ep = ExecutePreprocessor(timeout=timeout, store_widget_state=True)
        t0 = time.perf_counter()
        ep.preprocess(nb, {"metadata": {"path": str(Path(os.path.abspath(path)).parent)}})
        exporter.execution_seconds = time.perf_counter() - t0
    # the same resources nbconvert gives a file (the title is the notebook's name), so both routes agree
    html, _ = exporter.from_notebook_node(nb, {"metadata": {"name": Path(path).stem}})
    return atomic_write_text(out, html)
