"""Small static charts (PNG) for reports: grouped event bars and histograms with range marks.

Drawn with pillow so a report reads without JavaScript; the live widgets use
bqplot instead (:mod:`fxnet_widgets.widgets.events`), and these charts use the
same colours and meanings: accumulator overflows and the accumulator range in
magenta-red (``#d62d7b``), low table clamps and the table window in teal
(``#1aaabe``), high clamps in dark teal, clipped weights in amber. Both count
axes are logarithmic (ticks at powers of ten) so one event still shows next to
thousands. Every name goes in a legend above the plot, never into the plot,
so labels cannot pile up.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from .palette import AGREE_POSITIVE, FIXED_ONLY, FLOAT_ONLY

__all__ = [
    "bar_chart_png",
    "histogram_png",
    "nice_ticks",
    "tick_label",
    "EVENT_STYLES",
    "ACC_RANGE_COLOUR",
    "TABLE_WINDOW_COLOUR",
    "HISTOGRAM_COLOUR",
    "NO_EVENTS_TEXT",
]

RGB = tuple[int, int, int]

#: the accumulator range marks (the live histogram's red dashes, ``#d62d7b``)
ACC_RANGE_COLOUR: RGB = FIXED_ONLY
#: the table window marks (the live histogram's teal dashes, ``#1aaabe``)
TABLE_WINDOW_COLOUR: RGB = FLOAT_ONLY
#: histogram bars (the live histogram's ``#4a6fa5``)
HISTOGRAM_COLOUR: RGB = (74, 111, 165)
#: event -> (legend text, colour): the live event bars' texts and colours
EVENT_STYLES: dict[str, tuple[str, RGB]] = {
    "acc_overflow": ("accumulator overflows", FIXED_ONLY),
    "table_low": ("table clamps low", FLOAT_ONLY),
    "table_high": ("table clamps high", (11, 95, 115)),
    "weight_clip": ("clipped weights", AGREE_POSITIVE),
}
#: what an event chart says when every count is zero
NO_EVENTS_TEXT = "no events on this data"

_BG = (255, 255, 255)
_AXIS = (90, 90, 90)
_GRID = (228, 230, 236)
_INK = (20, 24, 34)
_SERIES: list[RGB] = [c for _, c in EVENT_STYLES.values()] + [(87, 148, 74), (122, 90, 200)]
_BASE = 0.5  # log count axes start here, as in the live widgets: a count of 1 still has height


def _font(size: int) -> Any:
    """Pillow's bundled scalable font (the same on every machine); the bitmap one without FreeType."""
    try:
        return ImageFont.load_default(size=size)
    except (TypeError, ValueError, OSError):  # pragma: no cover - pillow built without FreeType
        return ImageFont.load_default()


_TEXT = _font(11)
_TITLE = _font(12)


def _png(im: Image.Image) -> bytes:
    buf = io.BytesIO()
    im.save(buf, format="PNG", compress_level=6)
    return buf.getvalue()


def _width(dr: ImageDraw.ImageDraw, text: str, font: Any = _TEXT) -> float:
    return float(dr.textlength(text, font=font))


def nice_ticks(lo: float, hi: float, n: int = 5) -> np.ndarray:
    """About ``n`` round tick values (1, 2 or 5 times a power of ten apart) inside ``[lo, hi]``.

    The classic "nice numbers" choice for chart axes (P. Heckbert, Graphics Gems, 1990).

    Examples
    --------
    >>> nice_ticks(-3.2, 7.9).tolist()
    [-2.0, 0.0, 2.0, 4.0, 6.0]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return np.array([lo], dtype=np.float64)
    raw = (hi - lo) / max(n, 1)
    mag = 10.0 ** math.floor(math.log10(raw))
    q = raw / mag  # Heckbert's "nice numbers" rounding (Graphics Gems, 1990)
    step = (1.0 if q < 1.5 else 2.0 if q < 3.0 else 5.0 if q < 7.0 else 10.0) * mag
    first = math.ceil(lo / step - 1e-9)
    last = math.floor(hi / step + 1e-9)
    return np.arange(first, last + 1, dtype=np.float64) * step


def tick_label(value: float, step: float) -> str:
    """``value`` with as many decimals as ``step`` needs, no exponent for everyday magnitudes.

    Examples
    --------
    >>> tick_label(-2.5, 0.5), tick_label(1024.0, 256.0), tick_label(0.0, 0.25)
    ('-2.5', '1024', '0')
    """
    if step <= 0 or not math.isfinite(step):
        return f"{value:g}"
    if abs(value) >= 1e7:
        return f"{value:.3g}"
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    text = f"{value:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _count_label(v: float) -> str:
    for div, suffix in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
        if v >= div:
            return f"{v / div:g}{suffix}"
    return f"{v:g}"


def _log_axis(top_count: float) -> tuple[float, np.ndarray]:
    """Top of a log count axis (twice the largest count, at least 2) and its ticks (powers of ten)."""
    top = max(1.0, top_count) * 2.0
    ticks = 10.0 ** np.arange(int(math.floor(math.log10(top))) + 1)
    return top, ticks


def _log_y(v: Any, top: float, y_top: float, y_bottom: float) -> np.ndarray:
    """Screen y of counts on the log axis from ``_BASE`` to ``top`` (zero counts at the bottom)."""
    c = np.asarray(v, dtype=np.float64)
    frac = (np.log10(np.maximum(c, _BASE)) - math.log10(_BASE)) / (math.log10(top) - math.log10(_BASE))
    return y_bottom - np.where(c > 0, frac, 0.0) * (y_bottom - y_top)


def _legend(dr: ImageDraw.ImageDraw, items: Sequence[tuple[str, RGB, str]], x0: float, y0: float, x1: float) -> float:
    """Legend entries ``(text, colour, "box" | "dash")`` in rows from ``(x0, y0)``; returns the bottom y."""
    x, y, row_h = x0, y0, 14
    for text, colour, kind in items:
        w = 16 + _width(dr, text) + 12
        if x > x0 and x + w > x1:
            x, y = x0, y + row_h
        if kind == "box":
            dr.rectangle([x, y + 2, x + 9, y + 11], fill=colour)
        else:
            for s in range(0, 12, 6):
                dr.line([(x + s, y + 7), (x + s + 3, y + 7)], fill=colour, width=2)
        dr.text((x + 16, y), text, fill=_INK, font=_TEXT)
        x += w
    return y + row_h


def _y_axis(dr: ImageDraw.ImageDraw, ticks: np.ndarray, top: float, box: tuple[float, float, float, float]) -> None:
    left, y_top, right, y_bottom = box
    for t in ticks:
        y = float(_log_y(t, top, y_top, y_bottom))
        dr.line([(left, y), (right, y)], fill=_GRID)
        label = _count_label(float(t))
        dr.text((left - 4 - _width(dr, label), y - 6), label, fill=_AXIS, font=_TEXT)
    dr.line([(left, y_top), (left, y_bottom)], fill=_AXIS)


def bar_chart_png(
    labels: Sequence[str],
    series: Mapping[str, Any],
    title: str = "",
    size: tuple[int, int] = (480, 220),
    log: bool = True,
    colours: Sequence[RGB] | None = None,
    empty_text: str = NO_EVENTS_TEXT,
) -> bytes:
    """Grouped bars: one group per label, one bar per series (counts), a legend above the plot.

    With ``log`` the count axis is logarithmic (ticks at powers of ten; a count
    of 1 still shows). When every count is zero the plot says ``empty_text``
    instead of drawing an empty frame; the legend still lists every series.
    ``colours`` (one RGB per series) defaults to the event colours in order.
    """
    w, h = size
    names = list(series)
    data = np.array([np.asarray(series[k], dtype=np.float64) for k in names])
    if data.ndim != 2 or data.shape[1] != len(labels):
        raise ValueError(f"every series must have {len(labels)} counts (one per label)")
    cols = list(colours) if colours is not None else [_SERIES[i % len(_SERIES)] for i in range(len(names))]
    if len(cols) != len(names):
        raise ValueError(f"colours must have one colour per series ({len(names)}), not {len(cols)}")
    im = Image.new("RGB", (w, h), _BG)
    dr = ImageDraw.Draw(im)
    dr.text((6, 4), title, fill=_INK, font=_TITLE)
    legend_bottom = _legend(dr, [(n, c, "box") for n, c in zip(names, cols)], 8, 22, w - 8)
    top_count = float(data.max()) if data.size else 0.0
    left, right, y_top, y_bottom = 44, w - 10, legend_bottom + 8, h - 22
    n = max(len(labels), 1)
    gw = (right - left) / n
    # neuron labels under the groups, thinned out so that they never touch
    widest = max((_width(dr, str(lab)) for lab in labels), default=0.0)
    every = max(1, math.ceil((widest + 6) / max(gw, 1e-9)))
    for li, lab in enumerate(labels):
        if li % every == 0:
            cx = left + (li + 0.5) * gw
            dr.text((cx - _width(dr, str(lab)) / 2, y_bottom + 5), str(lab), fill=_AXIS, font=_TEXT)
    if top_count <= 0:
        dr.rectangle([left, y_top, right, y_bottom], outline=_GRID)
        tw = _width(dr, empty_text, _TITLE)
        dr.text(((left + right - tw) / 2, (y_top + y_bottom) / 2 - 14), empty_text, fill=_INK, font=_TITLE)
        sub = "every count is 0"
        dr.text(((left + right - _width(dr, sub)) / 2, (y_top + y_bottom) / 2 + 4), sub, fill=_AXIS, font=_TEXT)
        dr.line([(left, y_bottom), (right, y_bottom)], fill=_AXIS)
        return _png(im)
    if log:
        top, ticks = _log_axis(top_count)
        tops = _log_y(data, top, y_top, y_bottom)
        _y_axis(dr, ticks, top, (left, y_top, right, y_bottom))
    else:
        top = top_count
        tops = y_bottom - data / top * (y_bottom - y_top)
        dr.line([(left, y_top), (left, y_bottom)], fill=_AXIS)
        label = _count_label(top)
        dr.text((left - 4 - _width(dr, label), y_top - 6), label, fill=_AXIS, font=_TEXT)
    bw = max(1.0, gw * 0.8 / max(len(names), 1))
    for li in range(len(labels)):
        x0 = left + li * gw + gw * 0.1
        for si in range(len(names)):
            yy = float(tops[si, li])
            if data[si, li] > 0 and yy < y_bottom:
                dr.rectangle([x0 + si * bw, yy, x0 + (si + 1) * bw - 1, y_bottom], fill=cols[si])
    dr.line([(left, y_bottom), (right, y_bottom)], fill=_AXIS)
    return _png(im)


def _mark_values(v: Any) -> tuple[float, ...]:
    vals = tuple(float(x) for x in (v if isinstance(v, (tuple, list, np.ndarray)) else (v,)))
    if not vals or not all(math.isfinite(x) for x in vals):
        raise ValueError(f"a mark must be a finite number or a (low, high) pair, not {v!r}")
    return vals


def histogram_png(
    edges: Any,
    counts: Any,
    marks: Mapping[str, Any] | None = None,
    title: str = "",
    size: tuple[int, int] = (480, 220),
    log: bool = True,
    mark_colours: Mapping[str, RGB] | None = None,
    x_label: str = "",
) -> bytes:
    """A histogram (``len(edges) == len(counts) + 1``) with dashed vertical marks and a legend.

    ``marks`` maps a legend text to a value or a ``(low, high)`` pair (two
    lines, e.g. a table window); ``mark_colours`` gives each its colour. The
    x axis spans the edges, with round ticks labelled in the edges' own unit
    (pass real values to get real ticks). A mark outside the edges is not
    drawn and its legend entry says "off scale". Texts sit in the legend above
    the plot, so they never overlap however close the marks are.
    """
    e = np.asarray(edges, dtype=np.float64)
    c = np.asarray(counts, dtype=np.float64)
    if e.ndim != 1 or c.ndim != 1 or e.size != c.size + 1 or c.size == 0:
        raise ValueError(f"edges must have one entry more than counts, not {e.size} and {c.size}")
    w, h = size
    im = Image.new("RGB", (w, h), _BG)
    dr = ImageDraw.Draw(im)
    lo, hi = float(e[0]), float(e[-1])
    if hi <= lo:
        hi = lo + 1.0
    marks = dict(marks or {})
    colours = dict(mark_colours or {})
    items: list[tuple[str, RGB, str]] = [("count of sums", HISTOGRAM_COLOUR, "box")]
    lines: list[tuple[float, RGB]] = []
    for mi, (name, v) in enumerate(marks.items()):
        vals = _mark_values(v)
        col = colours.get(name, _SERIES[mi % len(_SERIES)])
        inside = all(lo <= x <= hi for x in vals)
        text = f"{name} " + " .. ".join(f"{x:.6g}" for x in vals)
        items.append((text + ("" if inside else " (off scale)"), col, "dash"))
        if inside:
            lines += [(x, col) for x in vals]
    dr.text((6, 4), title, fill=_INK, font=_TITLE)
    legend_bottom = _legend(dr, items, 8, 22, w - 8)
    left, right, y_top, y_bottom = 44, w - 14, legend_bottom + 8, h - 18 - (14 if x_label else 0)

    def sx(v: Any) -> Any:
        return left + (np.asarray(v, dtype=np.float64) - lo) / (hi - lo) * (right - left)

    top_count = float(c.max())
    if log:
        top, ticks = _log_axis(top_count)
        tops = _log_y(c, top, y_top, y_bottom)
        _y_axis(dr, ticks, top, (left, y_top, right, y_bottom))
    else:
        top = max(top_count, 1.0)
        tops = y_bottom - c / top * (y_bottom - y_top)
        dr.line([(left, y_top), (left, y_bottom)], fill=_AXIS)
    xs = sx(e)
    for i in range(c.size):
        if c[i] > 0:
            x0, x1 = float(xs[i]), max(float(xs[i + 1]) - 1, float(xs[i]))
            dr.rectangle([x0, float(tops[i]), x1, y_bottom], fill=HISTOGRAM_COLOUR)
    drawn: dict[int, int] = {}
    for x, col in lines:
        px = float(sx(x))
        # marks on the same pixel column (e.g. a table window equal to the accumulator range)
        # interleave their dashes, so every colour stays visible
        phase = 4 * drawn.get(round(px), 0) % 8
        drawn[round(px)] = drawn.get(round(px), 0) + 1
        for y in range(int(y_top) + phase, int(y_bottom), 8):
            dr.line([(px, y), (px, min(y + 3, y_bottom))], fill=col, width=2)
    dr.line([(left, y_bottom), (right, y_bottom)], fill=_AXIS)
    ticks_x = nice_ticks(lo, hi, max(2, int((right - left) // 55)))
    step = float(ticks_x[1] - ticks_x[0]) if ticks_x.size > 1 else (hi - lo)
    last_end = -1e9
    for t in ticks_x:
        px = float(sx(t))
        label = tick_label(float(t), step)
        tw = _width(dr, label)
        x0 = min(max(px - tw / 2, 0), w - tw - 1)
        if x0 <= last_end + 4:
            continue
        dr.line([(px, y_bottom), (px, y_bottom + 3)], fill=_AXIS)
        dr.text((x0, y_bottom + 4), label, fill=_AXIS, font=_TEXT)
        last_end = x0 + tw
    if x_label:
        dr.text(((left + right - _width(dr, x_label)) / 2, h - 15), x_label, fill=_AXIS, font=_TEXT)
    return _png(im)
