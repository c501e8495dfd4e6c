"""Metrics and cost: disagreement with float, accuracy, confusion, ties, events, hardware cost.

:class:`MetricsPanel` (the explorer's "metrics and cost") shows them at a glance
(:class:`~fxnet_widgets.widgets.glance.MetricsGlancePanel`: bars, coloured grids,
event badges, a stacked cost bar) above a collapsed "details" area holding every
figure as a table. The session computes every figure (:class:`~fxnet_widgets.widgets.results.DataFigures`,
:class:`~fxnet_widgets.core.analysis.cost.HardwareCost`); this panel only lays
them out: :func:`metrics_rows` turns a result into rows (headings, ``key: value``
lines, n x n matrices), :func:`rows_html` into an HTML table and
:func:`rows_text` into deterministic text.
"""

from __future__ import annotations

import html
from dataclasses import dataclass
from typing import Any

import ipywidgets as w

from .glance import MetricsGlancePanel
from .results import EVENT_LABELS, DataFigures, SessionResult
from .session import Session
from .text import ties_text

__all__ = ["MetricsPanel", "Row", "Matrix", "metrics_rows", "rows_html", "rows_text"]


@dataclass(frozen=True)
class Matrix:
    """An n x n count table: ``cells[i][j]`` at row name ``names[i]``, column name ``names[j]``."""

    title: str
    names: tuple[str, ...]
    cells: tuple[tuple[int, ...], ...]


@dataclass(frozen=True)
class Row:
    """One line of the panel: a heading (``key`` only), a ``key: value`` line (value parts), or a matrix."""

    key: str
    parts: tuple[str, ...] = ()
    matrix: Matrix | None = None
    depth: int = 1


def _pct(v: float | None) -> str:
    return "-" if v is None else f"{100 * v:.3f} %"


def _data_rows(f: DataFigures, classes: tuple[str, ...]) -> list[Row]:
    m = f.metrics
    rows = [Row(f"{f.name}:", depth=0),
            Row("differ from float", (f"{m.mismatch} of {m.n} decisions ({100 * m.mismatch_fraction:.3f} %)",))]
    for i, (mx, mn, mxl, mnl) in enumerate(zip(m.max_abs_error, m.mean_abs_error, m.max_abs_error_lsb,
                                                m.mean_abs_error_lsb)):  # fmt: skip
        rows.append(Row(f"output {i}", (f"max |error| {mx:.6g} ({mxl:.3f} LSB)",
                                        f"mean |error| {mn:.6g} ({mnl:.3f} LSB)")))  # fmt: skip
    if m.accuracy is not None:
        rows.append(Row("accuracy against labels", (f"fixed {m.accuracy:.5f}", f"float {m.float_accuracy:.5f}")))
        assert m.confusion is not None
        rows.append(Row("confusion", matrix=Matrix("rows: label, columns: fixed-point decision", classes,
                                                   tuple(tuple(r) for r in m.confusion))))  # fmt: skip
    rows.append(Row("agreement per class", tuple(f"{c} {_pct(a)}" for c, a in zip(classes, f.per_class_agreement))))
    if len(classes) > 2:
        rows.append(Row("float vs fixed", matrix=Matrix("rows: float decision, columns: fixed-point decision",
                                                        classes, f.agreement)))  # fmt: skip
    if f.ties:
        rows.append(Row("argmax ties (lower index wins)", (ties_text(f.ties, classes),)))
    return rows


def metrics_rows(result: SessionResult) -> list[Row]:
    """The panel's rows for ``result``: per data set its figures, the cube, then the hardware cost."""
    rows: list[Row] = []
    for f in result.figures:
        rows += _data_rows(f, result.classes)
    if result.cube is not None:
        n = result.cube.grid.size
        rows.append(Row(f"whole cube grid ({n}^3 points): {result.cube.mismatch} differ from float", depth=0))
    tot = result.shown_totals()
    kinds = set(result.kinds)
    names = ["acc_overflow"] + (["table_low", "table_high"] if "table" in kinds else [])
    names += (["output_clamp"] if kinds - {"table"} else []) + (["off"] if "relu" in kinds else [])
    names += ["weight_clip", "bias_clip"]
    rows.append(Row(f"events on the {result.data_name}:", depth=0))
    rows.append(Row("warnings", tuple(f"{EVENT_LABELS[k]} {tot[k]}" for k in names if k != "off")))
    if "relu" in kinds:
        rows.append(Row("relu off (not a warning)", (str(tot["off"]),)))
    c = result.cost
    mode = ("constant weights as CSD shift-and-add" if c.multipliers_mode == "csd"
            else f"hard multipliers of {c.multiplier_size[0]}x{c.multiplier_size[1]} bits")  # fmt: skip
    rows.append(Row(f"hardware cost ({mode}; memory blocks of {c.block_bits} bits; "
                    f"{c.pipeline_stages} pipeline stage(s) per layer)", depth=0))  # fmt: skip
    for L in c.layers:
        table = (f"{L.tables} table(s) of {L.table_entries} x {L.table_width} b = {L.table_bits} bits "
                 f"in {L.table_blocks} block(s)" if L.tables else "no table")  # fmt: skip
        rows.append(Row(f"layer {L.layer} ({L.activation}, {L.n_in}->{L.n_out})", (
            f"{L.nonzero_weights} nonzero weights, {L.csd_digits} CSD digits",
            f"adders {L.adders} ({L.product_adders} in products, {L.tree_adders} in trees, {L.tree_width} b wide)",
            f"multipliers {L.multipliers}", f"accumulator {L.acc_bits} b", table,
            f"registers {L.register_bits} bits")))  # fmt: skip
    t = c.totals()
    rows.append(Row("total", (
        f"adders {t['adders']} ({t['adder_bits']} adder bits), multipliers {t['multipliers']}",
        f"table bits {t['table_bits']} in {t['table_blocks']} block(s), register bits {t['register_bits']}",
        f"latency {t['latency']} clocks", f"total bits {t['total_bits']}")))  # fmt: skip
    return rows


_CELL = "padding:1px 6px 1px 0;vertical-align:top;word-break:normal;overflow-wrap:normal"


def _matrix_html(m: Matrix) -> str:
    e = html.escape
    head = "".join(f"<th style='{_CELL};text-align:right'>{e(n)}</th>" for n in m.names)
    body = "".join(
        f"<tr><th style='{_CELL};text-align:right'>{e(n)}</th>"
        + "".join(f"<td style='{_CELL};text-align:right'>{v}</td>" for v in row) + "</tr>"
        for n, row in zip(m.names, m.cells)
    )  # fmt: skip
    return (f"<div style='color:#555'>{e(m.title)}</div><table class='fxnet-matrix' style='border-collapse:collapse;"
            f"font-family:monospace'><tr><th></th>{head}</tr>{body}</table>")  # fmt: skip


def rows_html(rows: list[Row]) -> str:
    """The rows as a small HTML table (every text escaped; a matrix as a nested table).

    >>> rows_html([Row("cost", depth=0), Row("layer 1", ("adders 3", "multipliers 0"))]).count("<tr>")
    2
    """
    out = []
    for r in rows:
        pad = f"padding-left:{8 * r.depth}px;"
        if r.depth == 0:
            out.append(f"<tr><th colspan='2' style='{_CELL};text-align:left;padding-top:4px'>"
                       f"{html.escape(r.key)}</th></tr>")  # fmt: skip
            continue
        value = _matrix_html(r.matrix) if r.matrix is not None else "<br>".join(html.escape(p) for p in r.parts)
        out.append(f"<tr><td style='{_CELL};{pad}white-space:nowrap;color:#555'>{html.escape(r.key)}</td>"
                   f"<td style='{_CELL}'>{value}</td></tr>")  # fmt: skip
    return (
        "<table class='fxnet-metrics-table' style='font-size:11px;line-height:1.3;border-collapse:collapse;"
        "table-layout:auto;width:100%'><tbody>" + "".join(out) + "</tbody></table>"
    )


def rows_text(rows: list[Row]) -> str:
    """The rows as deterministic plain text (a matrix laid out in columns)."""
    lines = []
    for r in rows:
        ind = "  " * r.depth
        if r.depth == 0:
            lines.append(r.key)
        elif r.matrix is not None:
            m = r.matrix
            wd = max(8, *(len(n) for n in m.names))
            lines.append(f"{ind}{r.key} ({m.title}):")
            lines.append(f"{ind}  {'':>{wd}} " + " ".join(f"{n:>{wd}}" for n in m.names))
            lines += [f"{ind}  {n:>{wd}} " + " ".join(f"{v:>{wd}d}" for v in row) for n, row in zip(m.names, m.cells)]
        else:
            lines.append(f"{ind}{r.key}: " + "; ".join(r.parts))
    return "\n".join(lines)


class MetricsPanel(w.VBox):
    """The figures of the current plan (updated on every change): at a glance, every figure under "details".

    Parameters
    ----------
    session
        The :class:`~fxnet_widgets.widgets.session.Session` whose results it shows.
    glance
        Show the glance view on top (True) or only the table (False).

    Attributes
    ----------
    glance : MetricsGlancePanel or None
        The figures at a glance (its ``text`` and ``note``: see the class).
    details : ipywidgets.VBox
        The "details" area: :attr:`details_button` and :attr:`html`, shown while the button is down
        (collapsed at first; ``details_button.value = True`` opens it).
    rows : list of Row
        Every figure (:func:`metrics_rows`), the table in :attr:`html`.
    text : str
        The same as deterministic plain text (:func:`rows_text`); also :meth:`summary`.
    """

    def __init__(self, session: Session, *, glance: bool = True, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        self.session = session
        self.html = w.HTML()
        self.rows: list[Row] = []
        self.text = ""
        self.glance = MetricsGlancePanel(session, details=False) if glance else None
        title = w.HTML("<b>metrics and cost</b>")
        #: shows or hides :attr:`html` (every figure); collapsed at first beside the glance. No accordion:
        #: the explorer has no hidden pages (a figure in one is drawn at zero size)
        self.details_button = w.ToggleButton(value=not glance, description="details: every figure",
                                             icon="chevron-right", layout=w.Layout(width="auto"))  # fmt: skip
        self.details_button.observe(lambda _c: self._fold(), names="value")
        self.details = w.VBox([self.details_button, self.html])
        self._fold()
        top = [title] if self.glance is None else [title, self.glance]
        super().__init__([*top, self.details], **kwargs)
        self.add_class("fxnet-metrics")
        session.add_view("metrics", self._draw)

    def _fold(self) -> None:
        shown = bool(self.details_button.value)
        self.html.layout.display = "" if shown else "none"
        self.details_button.icon = "chevron-down" if shown else "chevron-right"

    def summary(self) -> str:
        """Every figure as deterministic text (:attr:`text`, what "details" shows)."""
        return self.text

    def _draw(self, result: SessionResult) -> None:
        self.rows = metrics_rows(result)
        self.text = rows_text(self.rows)
        self.html.value = rows_html(self.rows)
