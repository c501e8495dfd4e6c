"""Metrics at a glance: the current plan's figures as bars, coloured n x n grids, event badges and a cost bar.

Formats what the session already computed (each data set's
:class:`~fxnet_widgets.widgets.results.DataFigures`, the result's
:class:`~fxnet_widgets.core.analysis.cost.HardwareCost` and event totals); it
never calls the kernel. Pure HTML, so an exported report shows it as drawn. A
figure of another plan than the session's is never shown without saying so: while
a change waits to be computed, or after a plan the kernel refused, a banner on top
names the plan the figures belong to.

>>> from fxnet_widgets.widgets.glance import bar_html
>>> "width:50.0%" in bar_html("agree", 0.5, "50 %")
True
"""

from __future__ import annotations

import html
from collections.abc import Sequence
from typing import Any

import ipywidgets as w

from ..core.analysis import HardwareCost
from .results import EVENT_LABELS, SessionResult
from .status import plan_widths

__all__ = ["MetricsGlancePanel", "bar_html", "grid_html", "cost_bar_html", "events_html", "shown_kinds",
           "stale_note", "COST_PARTS"]  # fmt: skip

#: the parts of ``total_bits`` in the stacked cost bar: (label, HardwareCost attribute, colour)
COST_PARTS = (("adders", "adder_bits", "#4a6fa5"), ("registers", "register_bits", "#7aa95c"),
              ("tables", "table_bits", "#e69f00"))  # fmt: skip
_EVENT_COLOUR = {"acc_overflow": "#d62d2d", "off": "#6b7a8f"}
_CLAMP = "#e69f00"
_CELL = "font-size:11px;padding:1px 4px"


def bar_html(label: str, fraction: float, text: str, colour: str = "#4a6fa5") -> str:
    """One horizontal bar (0 to 100 %) with its label and number."""
    pct = max(0.0, min(1.0, float(fraction))) * 100
    return (f"<div style='display:flex;align-items:center;gap:6px;{_CELL}'><span style='width:120px'>"
            f"{html.escape(label)}</span><span style='display:inline-block;width:160px;height:10px;"
            f"background:#e6e6e6'><span style='display:block;height:10px;width:{pct:.1f}%;background:{colour}'>"
            f"</span></span><span>{html.escape(text)}</span></div>")  # fmt: skip


def grid_html(title: str, names: Sequence[str], cells: Sequence[Sequence[int]], cls: str = "fxnet-confusion") -> str:
    """An n x n count table as a coloured grid: shade by share of the row, green on the diagonal, red off it.

    >>> grid_html("t", ("a", "b"), ((3, 1), (0, 4))).count("<td")
    4
    """
    head = "".join(f"<th style='{_CELL}'>{html.escape(c)}</th>" for c in names)
    rows = []
    for i, row in enumerate(cells):
        total = max(1, sum(row))
        tds = []
        for j, v in enumerate(row):
            alpha = v / total
            rgb = "45,106,45" if i == j else "214,45,45"
            ink = "white" if alpha > 0.5 else "black"
            shade = f"color:{ink};background:rgba({rgb},{alpha:.2f})"
            tds.append(f"<td style='{_CELL};text-align:right;{shade}'>{v}</td>")
        rows.append(f"<tr><th style='{_CELL};text-align:left'>{html.escape(names[i])}</th>{''.join(tds)}</tr>")
    return (f"<div style='margin:2px 0'><div style='{_CELL};color:#555;white-space:nowrap'>{html.escape(title)}"
            f"</div><table class='{cls}' style='border-collapse:collapse'><thead><tr><th></th>{head}</tr></thead>"
            f"<tbody>{''.join(rows)}</tbody></table></div>")  # fmt: skip


def shown_kinds(result: SessionResult) -> list[str]:
    """The event kinds that can happen in the result's network, as the metrics table names them."""
    kinds = set(result.kinds)
    names = ["acc_overflow"] + (["table_low", "table_high"] if "table" in kinds else [])
    names += (["output_clamp"] if kinds - {"table"} else []) + (["off"] if "relu" in kinds else [])
    return names + ["weight_clip", "bias_clip"]


def events_html(events: dict[str, int]) -> str:
    """One badge per event kind: grey when none, amber for clamps, red for accumulator overflows.

    Keys are :data:`~fxnet_widgets.widgets.results.EVENT_LABELS` keys (relu "off" is slate: not a warning).
    """
    out = []
    for k, v in events.items():
        colour = "#bbbbbb" if not v else _EVENT_COLOUR.get(k, _CLAMP)
        out.append(f"<span class='fxnet-badge' style='{_CELL};margin:0 4px 2px 0;border-radius:8px;color:white;"
                   f"display:inline-block;background:{colour}' title='{html.escape(k)}'>"
                   f"{html.escape(EVENT_LABELS.get(k, k))} {v}</span>")  # fmt: skip
    return "<div style='margin:3px 0'>" + "".join(out) + "</div>"


def cost_bar_html(cost: HardwareCost) -> str:
    """``total_bits`` as a stacked bar by part (adders, registers, tables), a table of the parts and other totals."""
    total = max(1, cost.total_bits)
    segs, rows = [], []
    tables = "; ".join(f"L{L.layer}: {L.tables} table(s) of {L.table_entries} x {L.table_width} b"
                       for L in cost.layers if L.tables)  # fmt: skip
    detail = {"adders": f"{cost.adders} adders, {cost.multipliers} multipliers",
              "registers": f"latency {cost.latency} clocks", "tables": tables or "no table"}  # fmt: skip
    for label, attr, colour in COST_PARTS:
        v = int(getattr(cost, attr))
        segs.append(f"<span title='{label} {v}' style='display:block;height:12px;width:{100 * v / total:.2f}%;"
                    f"background:{colour}'></span>")  # fmt: skip
        rows.append(f"<tr><td style='{_CELL}'><span style='color:{colour}'>&#9632;</span> {label}</td>"
                    f"<td style='{_CELL};text-align:right'>{v}</td><td style='{_CELL}'>"
                    f"{html.escape(detail[label])}</td></tr>")  # fmt: skip
    return (f"<div style='{_CELL}'><b>cost</b> total_bits {cost.total_bits} (table blocks {cost.table_blocks})"
            f"<div style='width:300px;height:12px;display:flex;background:#e6e6e6'>{''.join(segs)}</div>"
            f"<table class='fxnet-cost-parts' style='border-collapse:collapse'>{''.join(rows)}</table></div>")


def stale_note(session: Any, result: SessionResult | None) -> str:
    """Why the figures shown are not those of the session's plan ("" when they are)."""
    if result is None:
        return "pending: nothing computed yet"
    if result.plan == session.plan:
        return ""
    if session.error:
        return (f"error: {session.error}; the figures below are of the last plan that worked "
                f"({plan_widths(result.plan)})")  # fmt: skip
    return f"pending: the figures below are of the previous plan ({plan_widths(result.plan)}), not the sliders'"


class MetricsGlancePanel(w.HTML):
    """The current plan's figures at a glance (updated on every change); ``text`` is the same as plain text.

    Attributes
    ----------
    text : deterministic plain text of what is shown (first line the stale note, when there is one)
    note : why the figures are not of the session's plan ("" when they are; see :func:`stale_note`)
    details : the full figures (each data set's error metrics and the hardware cost), shown collapsed
    """

    def __init__(self, session: Any, *, details: bool = True, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.session = session
        self.text = self.note = self.details = ""
        self._with_details = bool(details)
        self._body, self._lines = "", []
        self._result: SessionResult | None = None
        self.add_class("fxnet-glance")
        session.add_view("glance", self._draw)
        session.observe(lambda _c: self._show(), names=["plan", "error", "version"])

    def _draw(self, result: SessionResult) -> None:
        parts, lines, details = [], [], []
        for f in result.figures:
            m = f.metrics
            agree = 1 - m.mismatch_fraction
            line = f"{f.name}: agree with float {100 * agree:.3f} % ({m.mismatch} of {m.n} differ)"
            grid = ""
            block = [f"<div style='{_CELL}'><b>{html.escape(f.name)}</b></div>",
                     bar_html("agree with float", agree, f"{100 * agree:.3f} % ({m.mismatch} of {m.n} differ)")]
            if m.accuracy is not None and m.float_accuracy is not None and m.confusion is not None:
                line += f"; accuracy fixed {100 * m.accuracy:.3f} %, float {100 * m.float_accuracy:.3f} %"
                block.append(bar_html("accuracy (fixed)", m.accuracy, f"{100 * m.accuracy:.3f} %", "#2d6a2d"))
                block.append(bar_html("accuracy (float)", m.float_accuracy, f"{100 * m.float_accuracy:.3f} %",
                                      "#99aaaa"))  # fmt: skip
                grid = grid_html("confusion (rows label, columns fixed point)", result.classes, m.confusion)
                line += "; confusion " + " / ".join(" ".join(str(v) for v in row) for row in m.confusion)
            elif result.n_classes > 2:  # no labels: which class float said against which fixed point says
                grid = grid_html("rows float, columns fixed point", result.classes, f.agreement,
                                 cls="fxnet-agreement")  # fmt: skip
                line += "; float vs fixed " + " / ".join(" ".join(str(v) for v in row) for row in f.agreement)
            parts.append(f"<div style='display:flex;flex-wrap:wrap;gap:4px 12px;align-items:flex-start'><div>"
                         f"{''.join(block)}</div>{grid}</div>")  # fmt: skip
            lines.append(line)
            details += [f"{f.name}:", *("  " + ln for ln in m.summary().splitlines())]
        tot = result.shown_totals()
        ev = {k: tot[k] for k in shown_kinds(result)}
        lines.append(f"events on the {result.data_name}: " + ", ".join(f"{k} {v}" for k, v in ev.items()))
        cost = result.cost
        lines.append(f"cost: total_bits {cost.total_bits} = " +
                     " + ".join(f"{label} {getattr(cost, attr)}" for label, attr, _ in COST_PARTS))  # fmt: skip
        details += cost.summary().splitlines()
        self.details = "\n".join(details)
        folded = (f"<details style='{_CELL}'><summary>details</summary><pre style='font-size:10px'>"
                  f"{html.escape(self.details)}</pre></details>") if self._with_details else ""  # fmt: skip
        self._body = (f"{''.join(parts)}<div style='{_CELL}'><b>events on the {html.escape(result.data_name)}</b>"
                      f"</div>{events_html(ev)}{cost_bar_html(cost)}{folded}")  # fmt: skip
        self._lines, self._result = lines, result
        self._show()

    def _show(self) -> None:
        self.note = stale_note(self.session, self._result)
        self.text = "\n".join(([self.note] if self.note else []) + self._lines)
        banner = ""
        if self.note:
            colour = "#b00020" if self.note.startswith("error") else "#8a5a00"
            banner = (f"<div class='fxnet-glance-stale' style='{_CELL};color:{colour};background:#fff8e1;"
                      f"border:1px solid #f2b705'>{html.escape(self.note)}</div>")  # fmt: skip
        body = f"<div style='opacity:0.45'>{self._body}</div>" if self.note else self._body
        value = f"<div class='fxnet-glance-body' style='line-height:1.25'>{banner}{body}</div>"
        if value != self.value:
            self.value = value
