"""Small static charts (PNG) for reports: grouped bars and histograms with marks.

Drawn with pillow so a report reads without JavaScript; the live widgets use
bqplot instead.
"""

from __future__ import annotations

import io
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from PIL import Image, ImageDraw

__all__ = ["bar_chart_png", "histogram_png"]

_BG = (255, 255, 255)
_AXIS = (90, 90, 90)
_SERIES = [(214, 45, 123), (26, 170, 190), (242, 183, 5), (87, 148, 74), (122, 90, 200)]


def _png(im: Image.Image) -> bytes:
    buf = io.BytesIO()
    im.save(buf, format="PNG", compress_level=6)
    return buf.getvalue()


def _log_height(v: np.ndarray, top: float, span: float) -> np.ndarray:
    return np.where(v > 0, np.log10(np.maximum(v, 1)) + 1, 0) / (np.log10(max(top, 1)) + 1) * span


def bar_chart_png(
    labels: Sequence[str],
    series: Mapping[str, Any],
    title: str = "",
    size: tuple[int, int] = (480, 220),
    log: bool = True,
) -> bytes:
    """Grouped bars: one group per label, one bar per series (counts).

    With ``log`` a count of 1 still shows (height ``log10(c) + 1``).
    """
    w, h = size
    names = list(series)
    data = np.array([np.asarray(series[k], dtype=np.float64) for k in names])
    if data.ndim != 2 or data.shape[1] != len(labels):
        raise ValueError(f"every series must have {len(labels)} counts (one per label)")
    im = Image.new("RGB", (w, h), _BG)
    dr = ImageDraw.Draw(im)
    left, right, top, bottom = 40, 10, 20 + 12 * len(names), h - 24
    top_v = float(data.max()) if data.size else 0.0
    span = bottom - top
    dr.line([(left, bottom), (w - right, bottom)], fill=_AXIS)
    dr.text((4, 2), title, fill=(0, 0, 0))
    for si, name in enumerate(names):
        dr.rectangle([w - 150, 16 + 12 * si, w - 142, 24 + 12 * si], fill=_SERIES[si % len(_SERIES)])
        dr.text((w - 138, 14 + 12 * si), name, fill=(0, 0, 0))
    dr.text((4, top - 6), f"{int(top_v)}", fill=_AXIS)
    n = max(len(labels), 1)
    gw = (w - left - right) / n
    bw = max(1.0, gw * 0.8 / max(len(names), 1))
    heights = _log_height(data, top_v, span) if log else (data / top_v * span if top_v else data * 0)
    for li, lab in enumerate(labels):
        x0 = left + li * gw + gw * 0.1
        for si in range(len(names)):
            hh = float(heights[si, li])
            if hh > 0:
                dr.rectangle(
                    [x0 + si * bw, bottom - hh, x0 + (si + 1) * bw - 1, bottom],
                    fill=_SERIES[si % len(_SERIES)],
                )
        dr.text((x0, bottom + 4), str(lab), fill=_AXIS)
    return _png(im)


def histogram_png(
    edges: Any,
    counts: Any,
    marks: Mapping[str, float] | None = None,
    title: str = "",
    size: tuple[int, int] = (480, 200),
    log: bool = True,
) -> bytes:
    """A histogram (``len(edges) == len(counts) + 1``) with labelled vertical marks."""
    e = np.asarray(edges, dtype=np.float64)
    c = np.asarray(counts, dtype=np.float64)
    if e.ndim != 1 or c.ndim != 1 or e.size != c.size + 1 or c.size == 0:
        raise ValueError(f"edges must have one entry more than counts, not {e.size} and {c.size}")
    w, h = size
    im = Image.new("RGB", (w, h), _BG)
    dr = ImageDraw.Draw(im)
    left, right, top, bottom = 10, 10, 20, h - 28
    lo, hi = float(e[0]), float(e[-1])
    marks = dict(marks or {})
    for v in marks.values():
        lo, hi = min(lo, v), max(hi, v)
    if hi <= lo:
        hi = lo + 1.0

    def sx(v: Any) -> Any:
        return left + (np.asarray(v) - lo) / (hi - lo) * (w - left - right)

    top_v = float(c.max())
    heights = _log_height(c, top_v, bottom - top) if log else (c / top_v * (bottom - top) if top_v else c * 0)
    xs = sx(e)
    for i in range(c.size):
        if heights[i] > 0:
            dr.rectangle(
                [
                    float(xs[i]),
                    bottom - float(heights[i]),
                    max(float(xs[i + 1]) - 1, float(xs[i])),
                    bottom,
                ],
                fill=(70, 110, 160),
            )
    dr.line([(left, bottom), (w - right, bottom)], fill=_AXIS)
    dr.text((4, 2), title, fill=(0, 0, 0))
    dr.text((left, bottom + 16), f"{lo:.4g}", fill=_AXIS)
    dr.text((w - right - 48, bottom + 16), f"{hi:.4g}", fill=_AXIS)
    dr.text((w - right - 150, 2), f"max count {int(top_v)} ({'log' if log else 'linear'})", fill=_AXIS)
    for mi, (name, v) in enumerate(marks.items()):
        x = float(sx(v))
        col = _SERIES[mi // 2 % len(_SERIES)]
        dr.line([(x, top), (x, bottom)], fill=col, width=2)
        dr.text((min(max(x - 20, 0), w - 60), bottom + 4 + 10 * (mi % 2)), name, fill=col)
    return _png(im)
