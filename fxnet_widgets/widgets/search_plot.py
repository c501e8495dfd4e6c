"""The search panel's figure (bqplot marks for the records, front, tune path, budget and current plan)
and its table of tune moves."""

from __future__ import annotations

import html
from collections.abc import Callable
from typing import Any

import bqplot as bq
import ipywidgets as w
import numpy as np

from ..core.analysis import TuneResult
from .search_run import EVENT_CLASSES

__all__ = ["TradeOffFigure", "moves_html", "EVENT_COLOURS"]

#: point colour per event class (blue: none, orange: clamps, red: overflow)
EVENT_COLOURS = {"no events": "#4a6fa5", "clamps": "#e69f00", "overflow": "#d62d2d"}

Handler = Callable[[str, dict[str, Any]], None]


class TradeOffFigure:
    """One bqplot figure: a scatter per event class, the Pareto front, the tune path, the budget, the current plan.

    ``on_click(event_class, content)`` and ``on_hover(event_class, content)`` get
    bqplot's message content (``content["data"]["index"]`` is the point's index
    within its class's scatter).
    """

    def __init__(self, on_click: Handler, on_hover: Handler, x_label: str, y_label: str) -> None:
        self.xs, self.ys = bq.LinearScale(), bq.LinearScale()
        sc = {"x": self.xs, "y": self.ys}
        self.points: dict[str, bq.Scatter] = {}
        for cls in EVENT_CLASSES:
            m = bq.Scatter(x=[], y=[], scales=sc, colors=[EVENT_COLOURS[cls]], default_size=36, labels=[cls],
                           display_legend=True, names=[], display_names=False,
                           tooltip=bq.Tooltip(fields=["name"], labels=["plan"]),
                           interactions={"hover": "tooltip", "click": "select"})  # fmt: skip
            m.on_element_click(lambda _m, c, cls=cls: on_click(cls, c))
            m.on_hover(lambda _m, c, cls=cls: on_hover(cls, c))
            self.points[cls] = m
        self.front_line = bq.Lines(x=[], y=[], scales=sc, colors=["#d62d7b"], labels=["Pareto front"],
                                   display_legend=True)  # fmt: skip
        self.path_line = bq.Lines(x=[], y=[], scales=sc, colors=["#2d6a2d"], marker="triangle-down",
                                  marker_size=40, labels=["tune path"], display_legend=True)  # fmt: skip
        self.budget_line = bq.Lines(x=[], y=[], scales=sc, colors=["#888888"], line_style="dashed",
                                    labels=["budget"], display_legend=True)  # fmt: skip
        self.current = bq.Scatter(x=[], y=[], scales=sc, colors=["#111111"], marker="diamond", default_size=140,
                                  labels=["explorer's plan"], display_legend=True)  # fmt: skip
        self.x_axis = bq.Axis(scale=self.xs, label=x_label, num_ticks=4, tick_format="~s")
        self.y_axis = bq.Axis(scale=self.ys, side="left", label=y_label, tick_format=".3~f")
        marks = [self.budget_line, self.front_line, self.path_line, *self.points.values(), self.current]
        self.figure = bq.Figure(marks=marks, axes=[self.x_axis, self.y_axis], legend_location="top-right",
                                title="plans: cost against error",
                                fig_margin={"top": 40, "bottom": 50, "left": 70, "right": 20},
                                layout=w.Layout(width="620px", height="380px"))  # fmt: skip

    @staticmethod
    def set_xy(mark: bq.Mark, x: Any, y: Any) -> None:
        """New float64 arrays for a mark, in one message."""
        with mark.hold_sync():
            mark.x = np.asarray(x, dtype=np.float64)
            mark.y = np.asarray(y, dtype=np.float64)


def moves_html(result: TuneResult, codes: np.ndarray) -> str:
    """A small table of a tune's accepted moves (start first), with cost and disagreement after each."""
    n = codes.shape[0] if codes.ndim == 2 else int(np.prod(codes.shape[:-1]))
    start = result.records[0]
    rows = [f"<tr><td>start</td><td></td><td></td><td>{start.cost}</td><td>{start.mismatch}</td></tr>"]
    for k, s in enumerate(result.steps):
        rows.append(f"<tr><td>{k + 1}</td><td>{html.escape(s.move)} by {s.bits}</td><td>{s.layer + 1}</td>"
                    f"<td>{s.cost}</td><td>{s.mismatch}</td></tr>")  # fmt: skip
    head = (f"<b>tune path</b>: {len(result.steps)} accepted moves, {len(result.records)} plans evaluated "
            f"on {n} samples; verified {'yes' if result.verified else 'NO'}")  # fmt: skip
    return (f"<div style='font-size:11px'>{head}<table style='border-collapse:collapse'><thead><tr>"
            f"<th>step</th><th>move (bits down)</th><th>layer</th><th>{html.escape(result.cost_key)}</th>"
            f"<th>differ</th></tr></thead><tbody>{''.join(rows)}</tbody></table></div>")  # fmt: skip
