"""Overflow and saturation: per-neuron event bars and pre-activation histograms.

:class:`EventsPlot` shows, per neuron, grouped bars of accumulator overflows,
clamps and clipped weights on the session's data, by honest names: table clamps
(low, high) for sigmoid/tanh layers; output clamps for the top of a relu and
either end of identity; "off" for a relu's negative pre-activation (the
activation itself, not a warning). With several outputs its caption counts the
argmax ties per class pair.
:class:`HistogramPlot` shows one neuron's histogram of exact accumulator sums
(real pre-activation values) with the accumulator range and the table window
marked as vertical lines, so what falls outside them is what gets cut off.
Both use log count axes (a single event stays visible next to thousands).
"""

from __future__ import annotations

import html
from typing import Any

import bqplot as bq
import ipywidgets as w
import numpy as np

from .results import EVENT_LABELS, NeuronResult, SessionResult, layer_kind
from .session import Session
from .text import ties_text

__all__ = [
    "EventsPlot", "HistogramPlot", "HistogramsPanel", "BAR_EVENTS", "NO_TABLE_EVENTS", "bar_events", "log_heights",
]  # fmt: skip

#: event -> (legend text, colour), for a network whose layers all have tables
BAR_EVENTS: dict[str, tuple[str, str]] = {
    "acc_overflow": (EVENT_LABELS["acc_overflow"], "#d62d7b"),
    "table_low": (EVENT_LABELS["table_low"], "#1aaabe"),
    "table_high": (EVENT_LABELS["table_high"], "#0b5f73"),
    "weight_clip": (EVENT_LABELS["weight_clip"], "#f2b705"),
}
#: the bars added for relu/identity layers
NO_TABLE_EVENTS: dict[str, tuple[str, str]] = {
    "output_clamp": (EVENT_LABELS["output_clamp"], "#7a5ac8"),
    "off": (EVENT_LABELS["off"], "#9a9a9a"),
}


def bar_events(kinds: tuple[str, ...]) -> dict[str, tuple[str, str]]:
    """The bars for a network with these layer kinds (:func:`~fxnet_widgets.widgets.results.layer_kind`)."""
    out = {"acc_overflow": BAR_EVENTS["acc_overflow"]}
    if "table" in kinds:
        out.update(table_low=BAR_EVENTS["table_low"], table_high=BAR_EVENTS["table_high"])
    if any(k != "table" for k in kinds):
        out["output_clamp"] = NO_TABLE_EVENTS["output_clamp"]
    if "relu" in kinds:
        out["off"] = NO_TABLE_EVENTS["off"]
    out["weight_clip"] = BAR_EVENTS["weight_clip"]
    return out
_BASE = 0.5  # log axes start here; a count of 0 is drawn with zero height


def log_ticks(top: float, most: int = 5) -> np.ndarray:
    """Powers of ten from 1 up to ``top`` (float32), at most ``most`` of them: readable log-axis ticks.

    With more decades than ``most``, every second (third...) decade is kept, always from 1.

    >>> log_ticks(500).tolist(), log_ticks(2e6).tolist()
    ([1.0, 10.0, 100.0], [1.0, 100.0, 10000.0, 1000000.0])
    """
    n = max(0, int(np.floor(np.log10(max(top, 1.0)))))
    step = -(-(n + 1) // most)
    return (10.0 ** np.arange(0, n + 1, step)).astype(np.float32)


def log_heights(counts: np.ndarray) -> np.ndarray:
    """Bar tops on a log axis (float32): the count, or the base for zero."""
    c = np.asarray(counts)
    return np.where(c > 0, c, _BASE).astype(np.float32)


class EventsPlot(w.VBox):
    """Grouped bars, one group per neuron: overflows, clamps, relu "off", clipped weights.

    Attributes
    ----------
    shown : dict
        The bars, :func:`bar_events` of the network's layer kinds (for sigmoid/tanh
        only networks: :data:`BAR_EVENTS`).
    counts : numpy.ndarray
        (bars, neurons) int64, rows in the order of ``shown``: exactly the
        kernel's event counts on the session's data, under their honest names
        (:attr:`~fxnet_widgets.widgets.results.NeuronResult.shown`; 0 where a
        layer has no such event).
    bars : bqplot.Bars
        ``y`` is :func:`log_heights` of ``counts``.
    """

    def __init__(self, session: Session, width: int = 620, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        self.session = session
        self.shown = bar_events(tuple(layer_kind(L.activation) for L in session.network.layers))
        self.xs = bq.OrdinalScale()
        self.ys = bq.LogScale(min=_BASE)
        colours = [c for _, c in self.shown.values()]
        self.y_axis = bq.Axis(scale=self.ys, side="left", label="count (log)", tick_format="~s")
        self.bars = bq.Bars(
            scales={"x": self.xs, "y": self.ys}, type="grouped", colors=colours, base=_BASE,
            labels=[d for d, _ in self.shown.values()], display_legend=False, padding=0.2,
        )  # fmt: skip
        self.figure = bq.Figure(
            marks=[self.bars],
            axes=[bq.Axis(scale=self.xs, label="neuron"), self.y_axis],
            title="events per neuron",
            fig_margin={"top": 40, "bottom": 40, "left": 55, "right": 10},
            layout=w.Layout(width=f"{width}px", height="260px"),
        )  # fmt: skip
        self.caption = w.HTML()
        self.legend = w.HTML(
            "<div style='font-size:12px'>"
            + "".join(
                f"<span style='display:inline-block;width:12px;height:12px;background:{c};margin:0 4px 0 12px;"
                f"vertical-align:middle'></span>{d}"
                for d, c in self.shown.values()
            )
            + "</div>"
        )
        self.counts = np.zeros((len(self.shown), 0), dtype=np.int64)
        self.labels: list[str] = []
        super().__init__([self.legend, self.figure, self.caption], **kwargs)
        session.add_view("events", self._draw)

    def _draw(self, result: SessionResult) -> None:
        labels = [nr.label for nr in result.neurons]
        counts = np.array([[nr.shown.get(k, 0) for nr in result.neurons] for k in self.shown], dtype=np.int64)
        self.counts, self.labels = counts, labels
        with self.bars.hold_sync():
            self.bars.x = np.array(labels)
            self.bars.y = log_heights(counts)
        top = float(max(1.0, counts.max(initial=0)) * 2.0)
        self.ys.max = top
        self.y_axis.tick_values = log_ticks(top)
        tot = result.shown_totals()
        ties = "".join(
            f"; argmax ties on the {html.escape(f.name)} (lower index wins): "
            + html.escape(ties_text(f.ties, result.classes))
            for f in result.figures if f.ties
        )  # fmt: skip
        self.caption.value = (
            f"<span style='font-size:12px'>on the {result.data_name}: "
            + ", ".join(f"{self.shown[k][0]} {tot[k]}" for k in self.shown)
            + f", clipped biases {tot['bias_clip']}{ties}</span>"
        )


class HistogramPlot(w.VBox):
    """One neuron's histogram of exact accumulator sums with the range marks.

    Attributes
    ----------
    bars : bqplot.Bars
        ``x``: bin centres as real pre-activation values; ``y``: :func:`log_heights`.
    marks : bqplot.Lines
        Vertical lines: accumulator range (low, high) and table window (low, high),
        in real pre-activation values.
    neuron : NeuronResult
        The arrays drawn now (``counts`` are exact integers).
    """

    def __init__(self, session: Session, index: int, width: int = 300, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        n = len(session.result.neurons)
        if not isinstance(index, int) or not 0 <= index < n:
            raise ValueError(f"index must be a neuron index between 0 and {n - 1}, not {index!r}")
        self.session = session
        self.index = index
        self.xs = bq.LinearScale()
        self.ys = bq.LogScale(min=_BASE)
        self.bars = bq.Bars(scales={"x": self.xs, "y": self.ys}, colors=["#4a6fa5"], base=_BASE, padding=0.0)
        self.y_axis = bq.Axis(scale=self.ys, side="left", tick_format="~s")
        self.marks = bq.Lines(
            scales={"x": self.xs, "y": self.ys}, colors=["#d62d7b", "#d62d7b", "#1aaabe", "#1aaabe"],
            line_style="dashed", stroke_width=2,
        )  # fmt: skip
        self.figure = bq.Figure(
            marks=[self.bars, self.marks],
            axes=[bq.Axis(scale=self.xs, label="pre-activation value", num_ticks=5), self.y_axis],
            fig_margin={"top": 30, "bottom": 40, "left": 50, "right": 10},
            layout=w.Layout(width=f"{width}px", height="210px"),
        )  # fmt: skip
        self.caption = w.HTML()
        super().__init__([self.figure, self.caption], **kwargs)
        self.neuron: NeuronResult | None = None
        session.add_view(f"histogram {index}", self._draw)

    def _draw(self, result: SessionResult) -> None:
        nr = result.neurons[self.index]
        if nr is self.neuron:
            return
        self.neuron = nr
        e = nr.edges
        centres = nr.real((e[:-1] + e[1:]) / 2.0)
        lo, hi = float(nr.real(e[0])), float(nr.real(e[-1]))
        top = float(max(1.0, nr.counts.max(initial=0)) * 2.0)
        xs = [float(v) for v in nr.real(np.array(nr.acc_edges + nr.table_edges))]
        with self.bars.hold_sync():
            self.bars.x = centres.astype(np.float32)
            self.bars.y = log_heights(nr.counts)
        with self.marks.hold_sync():
            self.marks.x = np.array([[v, v] for v in xs], dtype=np.float32)
            self.marks.y = np.array([[_BASE, top]] * 4, dtype=np.float32)
        with self.xs.hold_sync():
            self.xs.min, self.xs.max = lo, hi
        self.ys.max = top
        self.y_axis.tick_values = log_ticks(top)
        shown = [v for v in xs[:2] if lo <= v <= hi]
        acc_note = "accumulator range off scale" if not shown else "accumulator range: red dashes"
        self.figure.title = f"{nr.label}"
        window = "table window" if nr.kind == "table" else "output range"
        self.caption.value = (
            f"<span style='font-size:11px'>{nr.label}: sums "
            f"{nr.real(nr.observed_min):.4g}..{nr.real(nr.observed_max):.4g}; "
            f"{window} {xs[2]:.4g}..{xs[3]:.4g} (teal); {acc_note} ({xs[0]:.4g}..{xs[1]:.4g}); "
            f"{_neuron_events(nr)}; safe width {nr.safe_acc_bits} b</span>"
        )


def _neuron_events(nr: NeuronResult) -> str:
    """One neuron's events in words: overflows, then clamps (or relu "off") by kind."""
    ev = nr.shown
    words = f"overflows {ev['acc_overflow']}, "
    if nr.kind == "table":
        return words + f"table clamps {ev['table_low']} low / {ev['table_high']} high"
    if nr.kind == "relu":
        return words + f"output clamps {ev['output_clamp']} (top), off {ev['off']} (negative input)"
    return words + f"output clamps {ev['output_clamp']}"


class HistogramsPanel(w.VBox):
    """One :class:`HistogramPlot` per neuron (up to ``max_plots``), in a row that wraps (three a line when wide)."""

    def __init__(self, session: Session, max_plots: int = 12, width: int = 300, **kwargs: Any) -> None:
        n = len(session.result.neurons)
        self.plots = [HistogramPlot(session, i, width) for i in range(min(n, max_plots))]
        for hp in self.plots:  # keep their size; the row wraps in a narrow notebook
            hp.layout = w.Layout(flex="0 0 auto", margin="0 12px 8px 0", width=f"{width + 10}px")
        rows = [w.HBox(self.plots, layout=w.Layout(flex_flow="row wrap", align_items="flex-start"))]
        head = w.HTML(
            "<b>exact accumulator sums on the data</b> <span style='font-size:12px'>(per neuron; dashed: "
            "accumulator range in red, table window (relu/identity: output range) in teal; what lies outside "
            "is cut off; below a relu's range it is off)</span>"
            + (f" <i>first {max_plots} of {n} neurons</i>" if n > max_plots else "")
        )
        super().__init__([head, *rows], **kwargs)
