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

__all__ = ["MetricsPanel"]


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
        self.html.value = (
            "<pre style='font-size:11px;line-height:1.25;margin:0;white-space:pre-wrap'>"
            + html.escape(self.text)
            + "</pre>"
        )
