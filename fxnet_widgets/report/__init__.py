"""One-file HTML reports of a session: static tables and pictures, plus the live widgets.

The report reads a :class:`~fxnet_widgets.widgets.session.Session` (its result)
and embeds the widget it is given (the explorer passes itself); it never
imports the explorer. A report has two layers:

* static content that reads without JavaScript (and prints): the session's
  summary, the plan, the hardware cost, the metrics, the event table, and PNG
  pictures (preview, decision masks, the disagreement overlay, the three
  boundary slices, the cube, the event chart and one histogram per neuron),
  drawn in Python, and the last synthesis result of the explorer's hardware
  section (see :mod:`._hardware`);
* the widgets themselves, embedded with their state by the standard Jupyter
  widgets embedding (``application/vnd.jupyter.widget-state+json``). There is
  no kernel in a report, so the page says which controls still work (the
  browser-side links, ``jslink``, if the widget has any; the explorer's
  controls have none, so that no browser-side copy is ever sent back to a
  kernel) and that everything that recomputes needs a kernel.

By default the page loads require.js and the widget manager from public CDNs
(bqplot's bundle is inlined from the installed wheel: its JavaScript 0.6.x is
not on npm). With ``offline_bundles`` every script is inlined and the single
file opens from ``file://`` with no network (see :mod:`._bundles`).

Examples
--------
>>> from fxnet_widgets import Explorer                      # doctest: +SKIP
>>> from fxnet_widgets.report import save_report            # doctest: +SKIP
>>> ex = Explorer.demo()                                    # doctest: +SKIP
>>> save_report(ex.session, "report.html", widget=ex)       # doctest: +SKIP
>>> ex.save_report("offline.html", offline_bundles="widget-bundles/html-manager")  # doctest: +SKIP
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from ..core.fileio import atomic_write_text
from ._bundles import Bundles, cdn_bundles
from ._bundles import offline_bundles as _offline_bundles
from ._hardware import hardware_section_html
from ._static import esc, static_sections

__all__ = ["save_report", "report_html", "embedded_state", "kernel_note", "WIDGET_STATE_MIME", "WIDGET_VIEW_MIME"]

WIDGET_STATE_MIME = "application/vnd.jupyter.widget-state+json"
WIDGET_VIEW_MIME = "application/vnd.jupyter.widget-view+json"

_STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; margin: 24px; color: #1d2230; max-width: 1400px; }
h1 { font-size: 1.6em; } h2 { font-size: 1.2em; border-bottom: 1px solid #ccd; padding-bottom: 2px; margin-top: 28px; }
table { border-collapse: collapse; margin: 8px 0 14px 0; font-size: 13px; }
th, td { border: 1px solid #ccd; padding: 2px 7px; text-align: right; }
th { background: #eef0f5; text-align: center; } td:first-child, td.text { text-align: left; }
caption { text-align: left; font-weight: 600; padding: 2px 0; }
td { font-variant-numeric: tabular-nums; white-space: nowrap; }
pre { background: #f6f7f9; border: 1px solid #e3e6ec; padding: 8px 10px; font-size: 12px; line-height: 1.45;
      white-space: pre-wrap; overflow-wrap: anywhere; max-width: 100%; box-sizing: border-box; }
.table-wrap { max-width: 100%; overflow-x: auto; }
ul.formats { font-size: 13px; font-family: ui-monospace, "DejaVu Sans Mono", monospace; }
.figures { display: flex; flex-wrap: wrap; gap: 12px; align-items: flex-start; }
figure { margin: 0; display: table; } figure img { border: 1px solid #ccd; max-width: 100%; display: block; }
figure.preview img, figure.slice img, figure.cube img { image-rendering: pixelated; }
figcaption { font-size: 12px; display: table-caption; caption-side: bottom; padding-top: 3px; line-height: 1.35; }
.legend .swatch { display: inline-block; width: 12px; height: 12px; margin: 0 4px 0 12px; vertical-align: middle; }
.note { background: #fff8e1; border: 1px solid #f2b705; padding: 8px 12px; font-size: 14px; }
.note li { margin: 2px 0; }
"""


def _widget_label(widget: Any) -> str:
    d = getattr(widget, "description", "") or ""
    if d:
        return d
    kind = type(widget).__name__
    return "its number box" if kind.endswith("Text") else kind


def embedded_state(widget: Any) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """``(manager_state, view_specs)`` of the widget and everything it depends on.

    Uses :func:`ipywidgets.embed.dependency_state` (so only the widget's
    widgets and the ``jslink`` s between them are embedded, not every widget
    alive in the kernel) and :func:`ipywidgets.embed.embed_data`.
    """
    from ipywidgets.embed import dependency_state, embed_data

    state = dependency_state([widget], drop_defaults=True)
    data = embed_data(views=[widget], drop_defaults=True, state=state)
    return data["manager_state"], data["view_specs"]


def _widgets_by_id(root: Any) -> dict[str, Any]:
    """Every widget reachable from ``root`` through its synced traits (children, links...), by model id."""
    from ipywidgets import Widget

    found: dict[str, Any] = {}
    todo = [root]
    while todo:
        wd = todo.pop()
        if not isinstance(wd, Widget) or wd.model_id in found:
            continue
        found[wd.model_id] = wd
        for key in wd.keys:
            v = getattr(wd, key, None)
            items = v if isinstance(v, (list, tuple)) else [v]
            for item in items:
                if isinstance(item, (list, tuple)):  # jslink ends: (widget, "value")
                    todo += [x for x in item if isinstance(x, Widget)]
                elif isinstance(item, Widget):
                    todo.append(item)
    return found


def kernel_note(manager_state: dict[str, Any], root: Any = None) -> str:
    """HTML saying which embedded controls work without a kernel (``jslink`` s) and which need one.

    ``root`` (the embedded widget) lets the note name the linked controls by their descriptions.
    """
    known = _widgets_by_id(root) if root is not None else {}
    models = manager_state.get("state", {})
    linked: list[str] = []
    for entry in models.values():
        if entry.get("model_name") not in ("LinkModel", "DirectionalLinkModel"):
            continue
        names = []
        for end in ("source", "target"):
            ref = entry.get("state", {}).get(end) or [None, None]
            mid = str(ref[0]).removeprefix("IPY_MODEL_")
            wid = known.get(mid)
            names.append(_widget_label(wid) if wid is not None else mid)
        linked.append(f"{names[0]} \u2194 {names[1]}")
    items = "".join(f"<li>{esc(x)}</li>" for x in sorted(set(linked)))
    return (
        '<div class="note" id="kernel-note"><p><strong>This page has no Python kernel.</strong> The widgets below '
        "show the state they had when the report was saved. What still works here: the controls "
        "linked in the browser (<code>jslink</code>), which move together but recompute nothing:</p>"
        f'<ul class="linked">{items or "<li>(none)</li>"}</ul>'
        "<p>What needs a kernel (open the notebook, or run <code>fxnet</code> again): every change of the plan "
        "(moving a width slider here moves only that slider), the layer and mode choices, the "
        "<em>safe</em> button, the slice positions, full resolution, and every picture, chart and number, which "
        "stay those of the saved plan.</p></div>"
    )


def _json_script(obj: Any, mime: str) -> str:
    text = json.dumps(obj, allow_nan=False, separators=(",", ":"), sort_keys=False)
    text = text.replace("</", "<\\/").replace("<!--", "<\\u0021--")  # still valid JSON, parser-safe
    return f'<script type="{mime}">\n{text}\n</script>'


def report_html(
    session: Any,
    *,
    widget: Any = None,
    summary: str | None = None,
    offline_bundles: str | os.PathLike[str] | None = None,
    title: str | None = None,
) -> str:
    """The report page of ``session`` as one HTML string (see the module text).

    Parameters
    ----------
    session
        A :class:`~fxnet_widgets.widgets.session.Session` (the report reads its result).
    widget
        The ipywidgets widget to embed live (for example the explorer showing the
        session); None: the report has tables and pictures only.
    summary
        The text of the summary section (default: ``session.summary()``).
    offline_bundles
        None (scripts from public CDNs) or the directory of the
        ``@jupyter-widgets/html-manager`` package (``dist/embed-amd.js``; from
        ``scripts/fetch_widget_bundles.sh``): every script is then inlined.
    title
        Page title (default: "fxnet report: <network shape>").
    """
    from ..widgets.session import Session

    if not isinstance(session, Session):
        raise TypeError(f"session must be a Session, not {type(session).__name__}")
    if widget is not None:
        from ipywidgets import Widget

        if not isinstance(widget, Widget):
            raise TypeError(f"widget must be an ipywidgets Widget or None, not {type(widget).__name__}")
    if summary is not None and not isinstance(summary, str):
        raise TypeError(f"summary must be a str or None, not {type(summary).__name__}")
    if title is not None and not isinstance(title, str):
        raise TypeError(f"title must be a str, not {type(title).__name__}")
    if offline_bundles is not None and not isinstance(offline_bundles, (str, os.PathLike)):
        raise TypeError(f"offline_bundles must be a directory path, not {type(offline_bundles).__name__}")
    net = session.network
    shape = "-".join(map(str, net.shape))
    acts = ", ".join(L.activation for L in net.layers)
    page_title = title if title is not None else f"fxnet report: {shape} network"
    bundles: Bundles = _offline_bundles(offline_bundles) if offline_bundles is not None else cdn_bundles()
    static = static_sections(session, summary if summary is not None else session.summary())
    if widget is not None:  # the explorer's last sweep (scatter, front) and pinned A/B comparison, when it has them
        from ._search import extra_sections

        static = "\n".join(p for p in (static, extra_sections(widget)) if p)
    manager_state, views = embedded_state(widget) if widget is not None else ({}, [])
    view_html = "\n".join(_json_script(v, WIDGET_VIEW_MIME) for v in views)
    mode = ("offline: every script is inlined in this file" if bundles.offline
            else "scripts from public CDNs (bqplot's inlined)")  # fmt: skip
    head = (
        f"<h1>{esc(page_title)}</h1>\n"
        f'<p class="about">network {esc(shape)} ({esc(acts)}); inputs {esc(", ".join(net.input_names))} '
        f"({net.input_bits} b); classes {esc(', '.join(net.classes))}; data: {esc(session.result.data_name)}"
        + (f" ({esc(session.image_note)})" if session.image_note else "")
        + "</p>"
    )
    live = (
        f'<section id="live"><h2>Live widgets</h2>\n{kernel_note(manager_state, widget)}\n'
        f'<p class="scripts">JavaScript: {esc(mode)}.</p>\n'
        '<noscript><p>JavaScript is off: the tables and pictures above are the whole report.</p></noscript>\n'
        f'<div class="widgets">\n{view_html}\n</div></section>'
    )
    return "\n".join([
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        '<meta name="generator" content="fxnet-widgets 0.1.0">',
        f"<title>{esc(page_title)}</title>",
        f"<style>{_STYLE}</style>",
        "</head>",
        "<body>",
        head,
        static,
        hardware_section_html(widget),  # the explorer's last synthesis result ("" when none)
        live,
        _json_script(manager_state, WIDGET_STATE_MIME),
        bundles.html(),
        "</body>",
        "</html>",
        "",
    ])  # fmt: skip



def save_report(
    session: Any,
    path: str | os.PathLike[str],
    *,
    widget: Any = None,
    summary: str | None = None,
    offline_bundles: str | os.PathLike[str] | None = None,
    title: str | None = None,
) -> Path:
    """Write :func:`report_html` of ``session`` to ``path`` atomically; returns the path.

    Examples
    --------
    >>> save_report(explorer.session, "report.html", widget=explorer)  # doctest: +SKIP
    PosixPath('report.html')
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a file path, not {type(path).__name__}")
    parent = Path(os.path.abspath(path)).parent
    if not parent.is_dir():
        raise ValueError(f"path must be in an existing directory, not {os.fspath(path)!r}")
    text = report_html(session, widget=widget, summary=summary, offline_bundles=offline_bundles, title=title)
    return atomic_write_text(path, text)
