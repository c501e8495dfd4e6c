"""The report's hardware section: the last synthesis result of the explorer's hardware panel (static HTML).

The report finds the panel through the widget it embeds: ``widget.hardware`` (the
explorer's "hardware" section) or the widget itself when it is a hardware panel.
The section says which plan the figures are for; when the plan has changed since
the run, it is labelled "stale: computed for another plan". No tool is run here.
"""

from __future__ import annotations

from typing import Any

from ._static import esc

__all__ = ["hardware_panel_of", "hardware_section_html"]


def hardware_panel_of(widget: Any) -> Any:
    """The hardware panel of ``widget`` (``widget.hardware``, or the widget if it is one), or None."""
    from ..widgets.hardware import HardwarePanel

    if isinstance(widget, HardwarePanel):
        return widget
    panel = getattr(widget, "hardware", None)
    return panel if isinstance(panel, HardwarePanel) else None


def _resource_table(panel: Any) -> str:
    from ..widgets.hardware_view import bar_html, resource_rows

    out = ['<div class="table-wrap"><table class="hardware">',
           "<caption>resources: calibrated estimate against the tools' count</caption>",
           "<thead><tr><th>resource</th><th>estimated</th><th>measured</th><th>device has</th>"
           "<th>device use</th></tr></thead><tbody>"]  # fmt: skip
    for row in resource_rows(panel.result, panel.estimates()):
        est = "-" if row.estimated is None else str(row.estimated)
        cap = "-" if row.capacity is None else str(row.capacity)
        over = ' class="over"' if row.over else ""
        out.append(f'<tr{over}><td>{esc(row.name)}</td><td>{esc(est)}</td><td>{row.measured}</td><td>{esc(cap)}</td>'
                   f'<td class="text">{bar_html(row.share, row.over)}</td></tr>')  # fmt: skip
    out.append("</tbody></table></div>")
    return "\n".join(out)


def hardware_section_html(widget: Any) -> str:
    """The hardware section of the report of ``widget`` ("" when it has no panel, or the panel was never started)."""
    from ..widgets.status import plan_widths

    panel = hardware_panel_of(widget)
    if panel is None or (panel.result is None and not panel.error and not panel.running):
        return ""
    parts = ['<section id="hardware"><h2>Hardware: synthesis and place and route</h2>']
    if panel.running:
        parts.append('<p class="running">A synthesis was running when this report was saved: the figures below are '
                     "those of the last finished run.</p>")  # fmt: skip
    if panel.error:
        parts.append(f'<p class="error">last synthesis: {esc(panel.error)}</p>')
    r = panel.result
    if r is None:
        parts.append("<p>No finished synthesis result.</p></section>")
        return "\n".join(parts)
    if panel.is_stale:
        if panel.result_plan != panel.session.plan:
            parts.append(f'<p class="stale"><strong>stale: computed for another plan</strong> '
                         f"({esc(plan_widths(panel.result_plan))}), not the plan of this report "
                         f"({esc(plan_widths(panel.session.plan))}).</p>")  # fmt: skip
        else:
            parts.append('<p class="stale"><strong>stale: computed for another network</strong> '
                         "(other weights under this plan), not the network of this report.</p>")
    pipeline = (panel.result_settings or {}).get("pipeline", "auto")
    facts = [f"target {r.target}, device {r.device}", f"clock {r.clock_text()}",
             f"pipeline {pipeline}", f"latency {r.latency} clocks" if r.latency is not None else "latency unknown",
             f"plan {plan_widths(panel.result_plan)}"]  # fmt: skip
    parts.append('<ul class="hardware-facts">' + "".join(f"<li>{esc(f)}</li>" for f in facts) + "</ul>")
    parts.append(_resource_table(panel))
    lines = [] if r.fits else [f"does NOT fit: needs {'; '.join(r.overflows())}"]
    lines.append(f"carry cells: {r.carries}")
    lines.append(f"maximum clock: {r.fmax_mhz:.2f} MHz (nextpnr, seed {r.seed})" if r.fmax_mhz is not None
                 else "maximum clock: not timed")  # fmt: skip
    verdict = r.clock_verdict()
    if verdict is not None:
        lines.append(verdict)
    parts.append('<ul class="hardware-timing">' + "".join(f"<li>{esc(x)}</li>" for x in lines) + "</ul>")
    parts.append('<p class="tools">tools: ' + "; ".join(esc(f"{k}: {v}") for k, v in r.tools.items()) + "</p>")
    parts.append(f'<p class="note caution">{esc(r.caution)}</p></section>')
    return "\n".join(parts)
