"""Metrics and cost: disagreement with float, accuracy on labels, events, hardware cost.

Uses :func:`fxnet_widgets.core.analysis.metrics.error_metrics` and
:func:`fxnet_widgets.core.analysis.cost.hardware_cost` on the session's results;
the panel only formats what they return.
"""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as w

from ..core.analysis.cost import hardware_cost
from ..core.analysis.metrics import error_metrics
from .session import Session, SessionResult

__all__ = ["MetricsPanel", "metrics_table_html"]


class MetricsPanel(w.VBox):
    """Text figures of the current plan (updated on every change).

    Attributes
    ----------
    text : str
        The figures as deterministic plain text (also shown in the panel).
    """

    def __init__(self, session: Session, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        self.session = session
        self.html = w.HTML()
        self.text = ""
        super().__init__([w.HTML("<b>metrics and cost</b>"), self.html], **kwargs)
        self.add_class("fxnet-metrics")
        session.add_view("metrics", self._draw)

    def _draw(self, result: SessionResult) -> None:
        lines = []
        if result.image is not None:
            m = error_metrics(result.image.emulation, result.image.labels)
            lines.append(f"image ({result.image.note}):")
            lines += ["  " + ln for ln in m.summary().splitlines()]
        if result.samples is not None:
            m = error_metrics(result.samples.emulation, result.samples.labels)
            lines.append("samples:")
            lines += ["  " + ln for ln in m.summary().splitlines()]
        if result.cube is not None:
            n = result.cube.grid.size
            lines.append(f"whole cube grid ({n}^3 points): {result.cube.mismatch} differ from float")
        lines += hardware_cost(self.session.network, result.plan).summary().splitlines()
        self.text = "\n".join(lines)
        self.html.value = metrics_table_html(lines)


_CELL = "padding:1px 6px 1px 0;vertical-align:top;word-break:normal;overflow-wrap:normal"


def _key_split(body: str) -> tuple[str, str] | None:
    """``"key: value"`` at the first ``": "`` outside parentheses (a confusion heading has one inside), or None."""
    depth = 0
    for i, ch in enumerate(body):
        depth += {"(": 1, ")": -1}.get(ch, 0)
        if depth == 0 and body.startswith(": ", i):
            return body[:i], body[i + 2 :]
    return None


def metrics_table_html(lines: list[str]) -> str:
    """The summary lines as a small HTML table (every text escaped).

    An unindented line is a heading; ``key: value`` lines get two cells (a
    value of ``; ``-separated parts gets one part per line); lines laid out
    with runs of spaces (a confusion matrix) keep their layout in monospace.

    >>> metrics_table_html(["cost", "  layer 1: adders 3; multipliers 0"]).count("<tr>")
    2
    """
    rows = []
    for line in lines:
        body = line.strip()
        if not body:
            continue
        depth = (len(line) - len(line.lstrip(" "))) // 2
        pad = f"padding-left:{8 * depth}px;"
        if depth == 0:
            rows.append(f"<tr><th colspan='2' style='{_CELL};text-align:left;padding-top:4px'>"
                        f"{html.escape(body)}</th></tr>")  # fmt: skip
        elif "  " in body:  # a laid-out block (confusion matrix rows)
            rows.append(f"<tr><td colspan='2' style='{_CELL};font-family:monospace;white-space:pre'>"
                        f"{html.escape(line.rstrip())}</td></tr>")  # fmt: skip
        elif _key_split(body) is not None:
            key, value = _key_split(body)  # type: ignore[misc]
            parts = "<br>".join(html.escape(v) for v in value.split("; "))
            rows.append(f"<tr><td style='{_CELL};{pad}white-space:nowrap;color:#555'>{html.escape(key)}</td>"
                        f"<td style='{_CELL}'>{parts}</td></tr>")  # fmt: skip
        else:
            rows.append(f"<tr><td colspan='2' style='{_CELL};{pad}'>{html.escape(body)}</td></tr>")
    return (
        "<table class='fxnet-metrics-table' style='font-size:11px;line-height:1.3;border-collapse:collapse;"
        "table-layout:auto;width:100%'><tbody>" + "".join(rows) + "</tbody></table>"
    )
