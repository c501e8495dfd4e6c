"""The part of a report that reads without JavaScript: tables and PNG pictures.

Every figure comes from the session's current result (the arrays the live
views show) and from the core's analysis functions; pictures are drawn in
Python by :mod:`fxnet_widgets.render` and embedded as ``data:`` URLs. Every
piece of user text (class names, input names, notes) goes through
:func:`html.escape`.
"""

from __future__ import annotations

import base64
import dataclasses
import html
import re
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np

from ..core.analysis.cost import HardwareCost, hardware_cost
from ..core.analysis.metrics import ErrorMetrics, error_metrics
from ..core.kernel import EVENT_NAMES, build_integer_network
from ..core.plan import LayerPlan
from ..render import (
    bar_chart_png,
    comparison_codes,
    cube_png,
    decision_mask_png,
    histogram_png,
    overlay_png,
    palette_png,
    png_bytes,
    slice_legend_names,
    slice_palette,
)
from ..render.charts import ACC_RANGE_COLOUR, EVENT_STYLES, NO_EVENTS_TEXT, TABLE_WINDOW_COLOUR
from ..render.palette import hex_colour

__all__ = ["esc", "table_html", "img_html", "plan_cell", "static_sections", "PLAN_FIELDS"]

#: plan fields, in the order of the plan table
PLAN_FIELDS = tuple(f.name for f in dataclasses.fields(LayerPlan))


def esc(value: Any) -> str:
    """``html.escape(str(value))`` (quotes too)."""
    return html.escape(str(value), quote=True)


_NUMBER = re.compile(r"^[-+]?(\d+(\.\d*)?|\.\d+)([eE][-+]?\d+)?( %)?$")


def _cell(value: Any) -> str:
    """One escaped ``<td>``; text (not a number) gets ``class="text"`` (left-aligned, numbers align right)."""
    text = "" if value is None else str(value)
    cls = "" if _NUMBER.match(text) or not text else ' class="text"'
    return f"<td{cls}>{esc(text)}</td>"


def table_html(
    headers: Sequence[Any], rows: Iterable[Sequence[Any]], *, cls: str, caption: str | None = None
) -> str:
    """An HTML table with every cell escaped; ``cls`` names it for readers and tests."""
    out = [f'<div class="table-wrap"><table class="{esc(cls)}">']
    if caption:
        out.append(f"<caption>{esc(caption)}</caption>")
    out.append("<thead><tr>" + "".join(f"<th>{esc(h)}</th>" for h in headers) + "</tr></thead><tbody>")
    for row in rows:
        out.append("<tr>" + "".join(_cell(v) for v in row) + "</tr>")
    out.append("</tbody></table></div>")
    return "\n".join(out)


def img_html(png: bytes, alt: str, caption: str, *, cls: str) -> str:
    """A ``<figure>`` with the PNG as a ``data:`` URL."""
    data = base64.b64encode(png).decode("ascii")
    return (
        f'<figure class="{esc(cls)}"><img alt="{esc(alt)}" src="data:image/png;base64,{data}">'
        f"<figcaption>{esc(caption)}</figcaption></figure>"
    )


def _upscale(index: np.ndarray, target: int = 256) -> np.ndarray:
    f = max(1, target // max(index.shape))
    return np.repeat(np.repeat(index, f, axis=0), f, axis=1)


def _legend(classes: Sequence[str]) -> str:
    pal = slice_palette(len(classes))
    names = slice_legend_names(classes)
    items = [
        f'<span class="swatch" style="background:{hex_colour(c)}"></span>{esc(n)}' for c, n in zip(pal, names)
    ]
    return '<p class="legend">' + " ".join(items) + "</p>"


def _pct(v: float | None) -> str:
    return "" if v is None else f"{100 * v:.3f} %"


def plan_cell(lp: LayerPlan, field: str, layer: Any) -> str:
    """Text of one plan field: its value; a default ``out_frac`` shows the value it takes."""
    v = getattr(lp, field)
    if v is None:
        return f"default ({layer.out_frac})" if field == "out_frac" else "none"
    return str(v)


def _plan_section(result: Any, network: Any) -> str:
    rows = []
    intnet = build_integer_network(network, result.plan)
    for i, (lp, L, K) in enumerate(zip(result.plan.layers, network.layers, intnet.layers)):
        rows.append([i + 1, L.activation, f"{L.n_in}->{L.n_out}", *(plan_cell(lp, f, K) for f in PLAN_FIELDS)])
    table = table_html(["layer", "activation", "shape", *PLAN_FIELDS], rows, cls="plan", caption="fixed-point plan")
    desc = "\n".join(f"<li>{esc(d)}; safe accumulator {s} b</li>"
                     for d, s in zip(result.descriptions, result.layer_safe_acc_bits))  # fmt: skip
    return f'<section id="plan"><h2>Plan</h2>\n{table}\n<ul class="formats">{desc}</ul></section>'


def _cost_section(cost: HardwareCost) -> str:
    keys = ("nonzero_weights", "csd_digits", "adders", "multipliers", "acc_bits", "adder_bits", "table_bits",
            "table_blocks", "register_bits")  # fmt: skip
    rows = [[L.layer, L.activation, *(getattr(L, k) for k in keys)] for L in cost.layers]
    t = cost.totals()
    rows.append(["total", "", "", "", t["adders"], t["multipliers"], "", t["adder_bits"], t["table_bits"],
                 t["table_blocks"], t["register_bits"]])  # fmt: skip
    table = table_html(["layer", "activation", *keys], rows, cls="cost", caption="hardware cost")
    tot = table_html(["total", "value"], list(t.items()), cls="cost-totals", caption="totals")
    return f'<section id="cost"><h2>Hardware cost</h2>\n<pre>{esc(cost.summary())}</pre>\n{table}\n{tot}</section>'


def _metrics_section(metrics: list[tuple[str, ErrorMetrics]]) -> str:
    rows = []
    parts = []
    for name, m in metrics:
        rows.append([
            name, m.n, m.mismatch, _pct(m.mismatch_fraction),
            ", ".join(f"{v:.3f}" for v in m.max_abs_error_lsb), ", ".join(f"{v:.3f}" for v in m.mean_abs_error_lsb),
            _pct(m.accuracy), _pct(m.float_accuracy),
        ])  # fmt: skip
        if m.confusion is not None:
            crow = [[c, *row] for c, row in zip(m.classes, m.confusion)]
            parts.append(table_html(["label \\ fixed-point decision", *m.classes], crow, cls="confusion",
                                    caption=f"confusion on {name}"))  # fmt: skip
    table = table_html(
        ["data", "samples", "differ from float", "fraction", "max |error| (LSB)", "mean |error| (LSB)",
         "fixed-point accuracy", "float accuracy"],
        rows, cls="metrics", caption="fixed point against float (and against the labels)",
    )  # fmt: skip
    return '<section id="metrics"><h2>Metrics</h2>\n' + "\n".join([table, *parts]) + "</section>"


def _histogram_figure(nr: Any, data_name: str) -> str:
    """One neuron's histogram of exact sums in real pre-activation values (``code / 2**acc_frac``)."""
    real = nr.real
    table = (float(real(nr.table_edges[0])), float(real(nr.table_edges[1])))
    acc = (float(real(nr.acc_edges[0])), float(real(nr.acc_edges[1])))
    edges = real(nr.edges)
    marks = {"table window": table, "accumulator range": acc}
    png = histogram_png(
        edges, nr.counts, marks, title=f"{nr.label}: exact accumulator sums",
        mark_colours={"table window": TABLE_WINDOW_COLOUR, "accumulator range": ACC_RANGE_COLOUR},
        x_label=f"pre-activation value (sum code / 2^{nr.acc_frac})",
    )  # fmt: skip
    shown = edges[0] <= acc[0] and acc[1] <= edges[-1]
    caption = (
        f"{nr.label} on {data_name}: sums {real(nr.observed_min):.6g} .. {real(nr.observed_max):.6g}; "
        f"table window {table[0]:.6g} .. {table[1]:.6g} (teal dashes); accumulator range "
        f"{acc[0]:.6g} .. {acc[1]:.6g} ({'red dashes' if shown else 'off scale'}"
        f"{'; the same as the table window' if acc == table else ''}); what lies outside is cut off"
    )
    alt = (f"histogram {nr.label}: table window {table[0]:.6g} .. {table[1]:.6g}, accumulator range "
           f"{acc[0]:.6g} .. {acc[1]:.6g}")  # fmt: skip
    return img_html(png, alt, caption, cls="histogram")


def _events_section(result: Any) -> tuple[str, list[str]]:
    rows = []
    for nr in result.neurons:
        rows.append([nr.label, *(nr.events[k] for k in EVENT_NAMES), nr.safe_acc_bits, nr.observed_min,
                     nr.observed_max, str(float(nr.real(nr.observed_min))),
                     str(float(nr.real(nr.observed_max)))])  # fmt: skip
    table = table_html(
        ["neuron", *EVENT_NAMES, "safe accumulator (b)", "smallest sum (LSB)", "largest sum (LSB)",
         "smallest value", "largest value"], rows,
        cls="events", caption=f"events on {result.data_name}",
    )  # fmt: skip
    figs = []
    labels = [nr.label for nr in result.neurons]
    series = {text: [nr.events[k] for nr in result.neurons] for k, (text, _) in EVENT_STYLES.items()}
    colours = [c for _, c in EVENT_STYLES.values()]
    quiet = not any(any(v) for v in series.values())
    chart = bar_chart_png(labels, series, title="events per neuron", colours=colours)
    caption = (f"events per neuron on {result.data_name}: none (every count is 0)" if quiet
               else f"events per neuron on {result.data_name} (log count axis)")  # fmt: skip
    kinds = ", ".join(f"{text} {sum(v)}" for text, v in series.items())
    alt = f"events per neuron: {NO_EVENTS_TEXT} ({kinds})" if quiet else f"events per neuron, in total: {kinds}"
    figs.append(img_html(chart, alt, caption, cls="events-chart" + (" no-events" if quiet else "")))
    for nr in result.neurons:
        figs.append(_histogram_figure(nr, result.data_name))
    return f'<section id="events"><h2>Overflow and clamps</h2>\n{table}</section>', figs


def _pictures(result: Any, classes: Sequence[str]) -> str:
    n = len(classes)
    figs = []
    if result.image is not None:
        im = result.image
        figs += [
            img_html(png_bytes(im.codes, 6), "input image", f"input ({im.note})", cls="preview"),
            img_html(decision_mask_png(im.float_, n, 6), "float decisions", "float decisions", cls="preview"),
            img_html(decision_mask_png(im.fixed, n, 6), "fixed-point decisions", "fixed-point decisions",
                     cls="preview"),
            img_html(overlay_png(im.codes, im.fixed, im.float_, n, 6), "disagreement overlay",
                     f"where they differ: {im.mismatch} pixels", cls="preview"),
        ]  # fmt: skip
    slices = []
    if result.slices is not None:
        names = ("red", "green", "blue")
        for sl in result.slices:
            idx = comparison_codes(sl.fixed, sl.float_, n)[::-1]  # row 0 at the top: largest y first
            png = palette_png(_upscale(idx), slice_palette(n), 6)
            slices.append(img_html(
                png, f"slice {sl.name}",
                f"{sl.name} slice at {names[sl.fixed_input]} {sl.position}: {sl.mismatch} cells differ "
                f"(x: {names[sl.x_input]}, y: {names[sl.y_input]}, origin bottom left)", cls="slice",
            ))  # fmt: skip
    if result.cube is not None:
        slices.append(img_html(cube_png(result.cube.fixed, result.cube.float_, 256, n, 6), "cube",
                               f"whole cube grid: {result.cube.mismatch} points differ", cls="cube"))  # fmt: skip
    out = []
    if figs:
        out.append('<section id="preview"><h2>Image</h2>\n<div class="figures">' + "\n".join(figs) + "</div></section>")
    if slices:
        out.append('<section id="boundary"><h2>Decision boundary</h2>\n' + _legend(classes)
                   + '<div class="figures">' + "\n".join(slices) + "</div></section>")  # fmt: skip
    return "\n".join(out)


def static_sections(session: Any, summary: str) -> str:
    """All static sections of the report of ``session`` (HTML)."""
    r = session.result
    net = session.network
    cost = hardware_cost(net, r.plan)
    metrics: list[tuple[str, ErrorMetrics]] = []
    if r.image is not None:
        metrics.append((f"image ({r.image.note})", error_metrics(r.image.emulation, r.image.labels)))
    if r.samples is not None:
        metrics.append(("samples", error_metrics(r.samples.emulation, r.samples.labels)))
    events, charts = _events_section(r)
    parts = [
        f'<section id="summary"><h2>Summary</h2>\n<pre class="summary">{esc(summary)}</pre></section>',
        _plan_section(r, net),
        _cost_section(cost),
        _metrics_section(metrics) if metrics else "",
        events,
        '<section id="histograms"><h2>Charts</h2>\n<div class="figures">' + "\n".join(charts) + "</div></section>",
        _pictures(r, net.classes),
    ]
    return "\n".join(p for p in parts if p)
