"""Report sections for the search panel (scatter and front) and a pinned plan comparison (static HTML).

The report module can add :func:`extra_sections` of the explorer: a panel
registers itself as ``explorer.last_search`` and a comparison as
``explorer.pinned_comparison`` (see ``widgets/search_panel.py`` and ``widgets/compare.py``).
"""

from __future__ import annotations

from typing import Any

from ..render.scatter import scatter_png
from ._static import esc, img_html, table_html

__all__ = ["search_section_html", "compare_section_html", "extra_sections"]


def search_section_html(panel: Any) -> str:
    """The last run's scatter (a PNG), its Pareto front as a table and its summary; "" before any run."""
    from ..widgets.search_run import event_class

    recs = panel.records
    if not recs:
        return ""
    key = recs[0].cost_key
    relu = any(L.activation == "relu" for L in panel.network.layers)
    pct = [100.0 * float(r.mismatch_fraction or 0.0) for r in recs]
    points = [(float(r.cost), p, event_class(r, relu)) for r, p in zip(recs, pct) if r.ok]
    front = panel.front
    path = [(float(r.cost), 100.0 * float(r.mismatch_fraction or 0.0)) for r in panel.path]
    current = panel.current_point() if panel.cost_box.value == key and panel.y_box.value == "mismatch" else None
    png = scatter_png(points, front=[(float(r.cost), 100.0 * float(r.mismatch_fraction or 0.0)) for r in front],
                      path=path, current=current, x_label=key,
                      y_label="decisions differing from float (%)")  # fmt: skip
    rows = [(recs.index(r), ", ".join(f"{k}={v}" for k, v in r.settings), r.cost, r.mismatch,
             f"{100 * float(r.mismatch_fraction or 0.0):.3f} %",
             "" if r.accuracy is None else f"{100 * r.accuracy:.2f} %", event_class(r, relu))
            for r in front]  # fmt: skip
    table = table_html(["record", "settings", key, "differ", "differ %", "accuracy", "events"], rows,
                       cls="search-front", caption="Pareto front (cheapest first)")  # fmt: skip
    fig = img_html(png, "cost against disagreement of every plan", f"{len(points)} plans: {key} against "
                   "disagreement with float; line: Pareto front", cls="search-scatter")  # fmt: skip
    return (f'<section id="search"><h2>Search</h2>\n{fig}\n{table}\n<pre class="summary">{esc(panel.summary())}</pre>'
            "</section>")


def compare_section_html(comparison: Any) -> str:
    """A against B: the table of rows (A, B, change) and the pictures of A against B the panel shows."""
    cmp = comparison.comparison
    from ..widgets.compare import _change, _fmt

    rows = [(label, _fmt(a), _fmt(b), _change(a, b)) for label, a, b in cmp.rows]
    table = table_html(["", "A", "B", "change"], rows, cls="compare", caption="plan A against plan B")
    table += f'\n<p class="compare-note">{esc(cmp.estimate_note)}</p>'
    figs = []
    if comparison.image.value:
        figs.append(img_html(comparison.image.value, "image: A against B", "image: magenta only B says the target "
                             "class, teal only A", cls="compare-image"))  # fmt: skip
    for im, lab in zip(comparison.slice_images, comparison.slice_labels):
        if im.value:
            figs.append(img_html(im.value, "slice: A against B", lab.value.replace("<b>", "").replace("</b>", ""),
                                 cls="compare-slice"))  # fmt: skip
    plans = f"<p>A: {esc(repr(cmp.plan_a))}<br>B: {esc(repr(cmp.plan_b))}</p>"
    return (f'<section id="compare"><h2>Plan A against plan B</h2>\n{plans}\n{table}\n<div class="figures">'
            + "\n".join(figs) + "</div></section>")


def extra_sections(explorer: Any) -> str:
    """The search and comparison sections of what the explorer has registered (each "" when absent)."""
    out = []
    panel = getattr(explorer, "last_search", None)
    if panel is not None:
        out.append(search_section_html(panel))
    cmp = getattr(explorer, "pinned_comparison", None)
    if cmp is not None:
        out.append(compare_section_html(cmp))
    return "\n".join(s for s in out if s)
