"""Metrics at a glance: the current plan's figures as bars, a coloured confusion grid, event badges and a cost bar.

Formats what the session already computed (its results' emulations, through
:func:`~fxnet_widgets.core.analysis.metrics.error_metrics` and
:func:`~fxnet_widgets.core.analysis.cost.hardware_cost`); the full text stays in
a collapsed "details" area. Pure HTML, so an exported report shows it as drawn.

>>> from fxnet_widgets.widgets.glance import bar_html
>>> "width:50.0%" in bar_html("agree", 0.5, "50 %")
True
"""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as w

from ..core.analysis import ErrorMetrics, HardwareCost, error_metrics, hardware_cost

__all__ = ["MetricsGlancePanel", "bar_html", "confusion_html", "cost_bar_html", "events_html", "COST_PARTS"]

#: the parts of ``total_bits`` in the stacked cost bar: (label, HardwareCost attribute, colour)
COST_PARTS = (("adders", "adder_bits", "#4a6fa5"), ("registers", "register_bits", "#7aa95c"),
              ("tables", "table_bits", "#e69f00"))  # fmt: skip
_EVENT_COLOUR = {"acc_overflow": "#d62d2d"}
_CLAMP = "#e69f00"
_CELL = "font-size:11px;padding:1px 4px"


def bar_html(label: str, fraction: float, text: str, colour: str = "#4a6fa5") -> str:
    """One horizontal bar (0 to 100 %) with its label and number."""
    pct = max(0.0, min(1.0, float(fraction))) * 100
    return (f"<div style='display:flex;align-items:center;gap:6px;{_CELL}'><span style='width:120px'>"
            f"{html.escape(label)}</span><span style='display:inline-block;width:160px;height:10px;"
            f"background:#e6e6e6'><span style='display:block;height:10px;width:{pct:.1f}%;background:{colour}'>"
            f"</span></span><span>{html.escape(text)}</span></div>")  # fmt: skip


def confusion_html(m: ErrorMetrics) -> str:
    """The confusion matrix as a grid: rows the label, columns the fixed-point decision, shade by row share."""
    if m.confusion is None:
        return ""
    head = "".join(f"<th style='{_CELL}'>{html.escape(c)}</th>" for c in m.classes)
    rows = []
    for i, row in enumerate(m.confusion):
        total = max(1, sum(row))
        cells = []
        for j, v in enumerate(row):
            alpha = v / total
            rgb = "45,106,45" if i == j else "214,45,45"
            ink = "white" if alpha > 0.5 else "black"
            shade = f"color:{ink};background:rgba({rgb},{alpha:.2f})"
            cells.append(f"<td style='{_CELL};text-align:right;{shade}'>{v}</td>")
        rows.append(f"<tr><th style='{_CELL};text-align:left'>{html.escape(m.classes[i])}</th>{''.join(cells)}</tr>")
    return (f"<table class='fxnet-confusion' style='border-collapse:collapse;margin:2px 0'><thead><tr>"
            f"<th style='{_CELL}'>label \\ fixed</th>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>")


def events_html(events: dict[str, int]) -> str:
    """One badge per event kind: grey when none, amber for clamps, red for accumulator overflows."""
    out = []
    for k, v in events.items():
        colour = "#bbbbbb" if not v else _EVENT_COLOUR.get(k, _CLAMP)
        out.append(f"<span class='fxnet-badge' style='{_CELL};margin-right:4px;border-radius:8px;color:white;"
                   f"background:{colour}'>{html.escape(k)} {v}</span>")  # fmt: skip
    return "<div style='margin:3px 0'>" + "".join(out) + "</div>"


def cost_bar_html(cost: HardwareCost) -> str:
    """``total_bits`` as a stacked bar by part (adders, registers, tables), with the numbers and other totals."""
    total = max(1, cost.total_bits)
    segs, keys = [], []
    for label, attr, colour in COST_PARTS:
        v = int(getattr(cost, attr))
        segs.append(f"<span title='{label} {v}' style='display:block;height:12px;width:{100 * v / total:.2f}%;"
                    f"background:{colour}'></span>")  # fmt: skip
        keys.append(f"<span style='color:{colour}'>&#9632;</span> {label} {v}")
    extra = f"adders {cost.adders}, multipliers {cost.multipliers}, table blocks {cost.table_blocks}, " \
            f"latency {cost.latency} cycles"  # fmt: skip
    return (f"<div style='{_CELL}'><b>cost</b> total_bits {cost.total_bits}<div style='width:300px;"
            f"height:12px;display:flex;background:#e6e6e6'>{''.join(segs)}</div>{' &nbsp; '.join(keys)}"
            f"<br>{extra}</div>")


class MetricsGlancePanel(w.HTML):
    """The current plan's figures at a glance (updated on every change); ``text`` is the same as plain text.

    Attributes
    ----------
    text : deterministic plain text of what is shown
    details : the full figures (error metrics and hardware cost summaries), shown collapsed
    """

    def __init__(self, session: Any, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.session = session
        self.text = ""
        self.details = ""
        self.add_class("fxnet-glance")
        session.add_view("glance", self._draw)

    def _draw(self, result: Any) -> None:
        parts, lines, details = [], [], []
        for what, part in (("image", result.image), ("samples", result.samples)):
            if part is None:
                continue
            m = error_metrics(part.emulation, part.labels)
            agree = 1 - m.mismatch_fraction
            line = f"{what}: agree with float {100 * agree:.3f} % ({m.mismatch} of {m.n} differ)"
            block = [f"<div style='{_CELL}'><b>{what}</b></div>",
                     bar_html("agree with float", agree, f"{100 * agree:.3f} % ({m.mismatch} of {m.n} differ)")]
            if m.accuracy is not None and m.float_accuracy is not None:
                line += f"; accuracy fixed {100 * m.accuracy:.3f} %, float {100 * m.float_accuracy:.3f} %"
                block.append(bar_html("accuracy (fixed)", m.accuracy, f"{100 * m.accuracy:.3f} %", "#2d6a2d"))
                block.append(bar_html("accuracy (float)", m.float_accuracy, f"{100 * m.float_accuracy:.3f} %",
                                      "#9aa"))  # fmt: skip
                block.append(confusion_html(m))
                line += "; confusion " + " / ".join(" ".join(str(v) for v in row) for row in m.confusion or ())
            parts.append("".join(block))
            lines.append(line)
            details += [f"{what}:", *("  " + ln for ln in m.summary().splitlines())]
        ev = result.event_totals()
        lines.append("events: " + ", ".join(f"{k} {v}" for k, v in ev.items()))
        cost = hardware_cost(self.session.network, result.plan)
        lines.append(f"cost: total_bits {cost.total_bits} = " +
                     " + ".join(f"{label} {getattr(cost, attr)}" for label, attr, _ in COST_PARTS))  # fmt: skip
        details += cost.summary().splitlines()
        self.text = "\n".join(lines)
        self.details = "\n".join(details)
        self.value = ("<div class='fxnet-glance-body'>" + "".join(parts) + events_html(ev) + cost_bar_html(cost) +
                      f"<details style='{_CELL}'><summary>details</summary><pre style='font-size:10px'>"
                      f"{html.escape(self.details)}</pre></details></div>")  # fmt: skip
