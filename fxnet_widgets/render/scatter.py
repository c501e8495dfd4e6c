"""A static cost / error scatter (PNG): the search panel's picture for reports.

>>> png = scatter_png([(1.0, 2.0, "no events"), (3.0, 0.5, "clamps")], front=[(1.0, 2.0), (3.0, 0.5)])
>>> png[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
True
"""

from __future__ import annotations

import io
from collections.abc import Sequence

from PIL import Image, ImageDraw, ImageFont

from .charts import nice_ticks, tick_label

__all__ = ["scatter_png", "CLASS_COLOURS"]

RGB = tuple[int, int, int]
#: point colour per event class (the live panel's colours)
CLASS_COLOURS: dict[str, RGB] = {"no events": (74, 111, 165), "clamps": (230, 159, 0), "overflow": (214, 45, 45)}
_FRONT: RGB = (214, 45, 123)
_PATH: RGB = (45, 106, 45)
_INK: RGB = (20, 24, 34)
_GRID: RGB = (228, 230, 236)


def _font(size: int) -> ImageFont.ImageFont | ImageFont.FreeTypeFont:
    try:
        return ImageFont.load_default(size=size)
    except (TypeError, ValueError, OSError):  # pragma: no cover - pillow without FreeType
        return ImageFont.load_default()


def scatter_png(
    points: Sequence[tuple[float, float, str]],
    *,
    front: Sequence[tuple[float, float]] = (),
    path: Sequence[tuple[float, float]] = (),
    current: tuple[float, float] | None = None,
    x_label: str = "cost",
    y_label: str = "error",
    size: tuple[int, int] = (640, 400),
) -> bytes:
    """Points ``(x, y, event class)``, the front as a line, a tune path, the current plan as a diamond."""
    w, h = size
    left, right, top, bottom = 70, 150, 20, 45
    im = Image.new("RGB", (w, h), (255, 255, 255))
    dr = ImageDraw.Draw(im)
    font = _font(11)
    xs = [p[0] for p in points] + [p[0] for p in path] + ([current[0]] if current else [])
    ys = [p[1] for p in points] + [p[1] for p in path] + ([current[1]] if current else [])
    if not xs:
        xs, ys = [0.0, 1.0], [0.0, 1.0]
    x0, x1 = min(xs), max(xs)
    y0, y1 = min(ys), max(ys)
    pad_x = (x1 - x0) * 0.05 or 1.0
    pad_y = (y1 - y0) * 0.05 or 1.0
    x0, x1, y0, y1 = x0 - pad_x, x1 + pad_x, y0 - pad_y, y1 + pad_y

    def px(x: float, y: float) -> tuple[float, float]:
        u = left + (x - x0) / (x1 - x0) * (w - left - right)
        return u, h - bottom - (y - y0) / (y1 - y0) * (h - top - bottom)

    for axis, (lo, hi) in (("x", (x0, x1)), ("y", (y0, y1))):
        ticks = nice_ticks(lo, hi, 5)
        step = float(ticks[1] - ticks[0]) if ticks.size > 1 else 1.0
        for t in ticks:
            text = tick_label(float(t), step)
            if axis == "x":
                a, _ = px(float(t), y0)
                dr.line([(a, top), (a, h - bottom)], fill=_GRID)
                dr.text((a, h - bottom + 4), text, fill=_INK, font=font, anchor="ma")
            else:
                _, b = px(x0, float(t))
                dr.line([(left, b), (w - right, b)], fill=_GRID)
                dr.text((left - 4, b), text, fill=_INK, font=font, anchor="rm")
    dr.rectangle([left, top, w - right, h - bottom], outline=(90, 90, 90))
    dr.text(((left + w - right) / 2, h - 14), x_label, fill=_INK, font=font, anchor="mm")
    dr.text((4, top - 16), y_label, fill=_INK, font=font)
    if len(front) > 1:
        dr.line([px(x, y) for x, y in front], fill=_FRONT, width=2)
    if len(path) > 1:
        dr.line([px(x, y) for x, y in path], fill=_PATH, width=2)
    for x, y, cls in points:
        a, b = px(x, y)
        dr.ellipse([a - 3, b - 3, a + 3, b + 3], fill=CLASS_COLOURS.get(cls, (120, 120, 120)))
    if current is not None:
        a, b = px(*current)
        dr.polygon([(a, b - 7), (a + 7, b), (a, b + 7), (a - 7, b)], outline=_INK, fill=(255, 255, 255))
    # the legend draws each mark as the plot does: dots, lines, the white diamond
    legend = [("dot", c, k) for k, c in CLASS_COLOURS.items()] + [
        ("line", _FRONT, "Pareto front"), ("line", _PATH, "tune path"), ("diamond", _INK, "explorer's plan")]
    for k, (mark, colour, text) in enumerate(legend):
        a, b = w - right + 15, top + 11 + 16 * k
        if mark == "dot":
            dr.ellipse([a - 3, b - 3, a + 3, b + 3], fill=colour)
        elif mark == "line":
            dr.line([(a - 6, b), (a + 6, b)], fill=colour, width=2)
        else:
            dr.polygon([(a, b - 6), (a + 6, b), (a, b + 6), (a - 6, b)], outline=colour, fill=(255, 255, 255))
        dr.text((a + 11, b), text, fill=_INK, font=font, anchor="lm")
    buf = io.BytesIO()
    im.save(buf, format="PNG", compress_level=6)
    return buf.getvalue()
