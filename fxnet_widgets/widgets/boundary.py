"""Decision boundary in RGB space: three slice heat maps and a whole-cube picture.

:class:`SlicePlot` draws one slice of the input cube (R-G at a chosen blue, R-B
at a chosen green, G-B at a chosen red) as a bqplot canvas ``HeatMap`` whose
cells say, per grid point, whether fixed point and float agree (and on which
class) or which of them alone says "target"; labelled samples near the slice are
drawn on top as points. :class:`BoundaryPanel` puts the three slices side by
side with their position sliders and a legend; :class:`CubePanel` shows the
isometric picture of every disagreeing grid point of the whole cube.
"""

from __future__ import annotations

import contextlib
import html
from typing import Any

import bqplot as bq
import ipywidgets as w
import numpy as np
import traitlets as t

from ..render.cube import cube_png
from ..render.palette import class_colours, hex_colour, slice_legend_names, slice_palette
from ..render.raster import comparison_codes, decision_mask_png
from .legend import class_legend_html, difference_legend_html
from .page import PageIntSlider, from_page
from .results import SLICES, SessionResult
from .session import Session

__all__ = ["SlicePlot", "BoundaryPanel", "CubePanel", "MODES", "boundary_points"]

#: what a slice shows: both decisions compared, or one of them
MODES = ("fixed vs float", "fixed point", "float")
_POSITION_TRAIT = {2: "slice_blue", 1: "slice_green", 0: "slice_red"}


def _legend(classes: tuple[str, ...]) -> str:
    pal = slice_palette(len(classes))
    names = slice_legend_names(classes)
    items = [
        f'<span style="white-space:nowrap;margin-right:14px"><span style="display:inline-block;width:12px;'
        f'height:12px;background:{hex_colour(c)};margin-right:4px;vertical-align:middle;border:1px solid #999">'
        f"</span>{html.escape(n)}</span>"
        for c, n in zip(pal, names)
    ]
    cols = class_colours(len(classes))
    dots = [
        f'<span style="white-space:nowrap;margin-right:14px">{_marker_svg(_marker(i), cols[i])}&nbsp;'
        f"labelled {html.escape(c)}</span>"
        for i, c in enumerate(classes)
    ]
    return (
        "<div style='font-size:12px;line-height:20px;display:flex;flex-wrap:wrap'>" + "".join(items) + "</div>"
        "<div style='font-size:12px;line-height:20px;display:flex;flex-wrap:wrap;align-items:center'>"
        "<span style='margin-right:10px'>samples near each slice:</span>" + "".join(dots) + "</div>"
    )


def _marker_svg(marker: str, rgb: Any) -> str:
    """A 12 px picture of a sample marker (fill and outline as on the slices) for the legend."""
    shapes = {
        "circle": "<circle cx='6' cy='6' r='4.5'/>",
        "diamond": "<polygon points='6,0.8 11.2,6 6,11.2 0.8,6'/>",
        "square": "<rect x='1.5' y='1.5' width='9' height='9'/>",
        "triangle-up": "<polygon points='6,1 11,11 1,11'/>",
        "triangle-down": "<polygon points='1,1 11,1 6,11'/>",
    }
    shape = shapes.get(marker, "<polygon points='6,0.8 11.2,6 6,11.2 0.8,6'/>")
    return (
        f"<svg width='12' height='12' style='vertical-align:middle;background:#888'>"
        f"<g fill='{hex_colour(rgb)}' stroke='{_outline(rgb)}' stroke-width='1.5'>{shape}</g></svg>"
    )


#: one marker shape per class, so that classes differ by shape as well as colour
_MARKERS = ("circle", "diamond", "square", "triangle-up", "triangle-down")


def _marker(cls: int) -> str:
    return _MARKERS[cls % len(_MARKERS)]


def _outline(rgb: Any) -> str:
    """Black around a light fill, white around a dark one (ITU-R BT.601 luma), so a dot shows on any cell."""
    r, g, b = (int(v) for v in rgb)
    return "#000000" if (299 * r + 587 * g + 114 * b) // 1000 >= 128 else "#ffffff"


def boundary_points(x: np.ndarray, y: np.ndarray, decisions: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Points on the edges between neighbouring grid cells whose decisions differ (a dotted outline).

    ``decisions[iy, ix]`` is the class at (``x[ix]``, ``y[iy]``); each pair of
    neighbours (along x, then along y) with different classes gives the point halfway between them.

    >>> px, py = boundary_points(np.array([0, 2, 4]), np.array([0, 2]), np.array([[0, 0, 1], [0, 1, 1]]))
    >>> px.tolist(), py.tolist()
    ([3.0, 1.0, 2.0], [0.0, 2.0, 1.0])
    """
    d = np.asarray(decisions)
    xf, yf = np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
    iy, ix = np.nonzero(d[:, 1:] != d[:, :-1])
    jy, jx = np.nonzero(d[1:, :] != d[:-1, :])
    px = np.concatenate([(xf[ix] + xf[ix + 1]) / 2, xf[jx]])
    py = np.concatenate([yf[iy], (yf[jy] + yf[jy + 1]) / 2])
    return px, py


class SlicePlot(w.VBox):
    """One slice of the input cube as a canvas heat map, with its position slider.

    Parameters
    ----------
    session
        The shared session.
    which
        0 (R-G at blue), 1 (R-B at green) or 2 (G-B at red).
    size
        Figure width and height in pixels.

    Attributes
    ----------
    heatmap : bqplot.HeatMap
        ``color[iy, ix]`` (float32) is the value shown at (``x[ix]``, ``y[iy]``):
        :func:`~fxnet_widgets.render.comparison_codes` of the fixed and float
        decisions, or one decision (see ``mode``).
    points : list of bqplot.Scatter
        Per class, the samples within a few codes of the slice with that label
        (or, without labels, that fixed-point decision): one marker shape per
        class, filled with the class colour and outlined in black or white,
        whichever contrasts with the fill.
    outline : bqplot.Scatter
        Small dark dots on another network's fixed-point boundary (see :meth:`set_outline`;
        empty unless the explorer's refine panel has a second network to show).
    position : ipywidgets.IntSlider
        The third input's code (linked to the session's slice trait).
    """

    mode = t.Enum(MODES, default_value=MODES[0])

    def __init__(self, session: Session, which: int = 0, size: int = 300, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        if which not in (0, 1, 2):
            raise ValueError(f"which must be 0, 1 or 2, not {which!r}")
        if not session.cube_ok:
            raise ValueError("slices need a network with 3 inputs")
        self.session = session
        self.which = which
        name, xi, yi, fi = SLICES[which]
        names = session.network.input_names
        n_cls = len(session.network.classes)
        self._n_classes = n_cls
        hi = float((1 << session.network.input_bits) - 1)
        self.xs = bq.LinearScale(min=0.0, max=hi)
        self.ys = bq.LinearScale(min=0.0, max=hi)
        n_col = n_cls + 2 if n_cls == 2 else n_cls + 1
        self.cs = bq.ColorScale(colors=[hex_colour(c) for c in slice_palette(n_cls)], min=0.0, max=float(n_col - 1))
        c = session.slice_codes.astype(np.float32)
        self.heatmap = bq.HeatMap(
            x=c,
            y=c,
            color=np.zeros((c.size, c.size), np.float32),
            scales={"x": self.xs, "y": self.ys, "color": self.cs},
        )
        self.points = [
            bq.Scatter(
                x=np.zeros(0, np.float32), y=np.zeros(0, np.float32), scales={"x": self.xs, "y": self.ys},
                colors=[hex_colour(col)], stroke=_outline(col), stroke_width=1.5, default_size=40,
                marker=_marker(k), opacities=[0.95],
            )
            for k, col in enumerate(class_colours(n_cls))
        ]  # fmt: skip
        self.outline = bq.Scatter(x=np.zeros(0, np.float32), y=np.zeros(0, np.float32),
                                  scales={"x": self.xs, "y": self.ys}, colors=["#111111"], default_size=5,
                                  marker="circle", opacities=[0.9])  # fmt: skip
        ticks = np.array([0, hi * 0.25, hi * 0.5, hi * 0.75, hi], dtype=np.float32).round()
        ax_x = bq.Axis(scale=self.xs, label=names[xi], tick_values=ticks, tick_format="d")
        ax_y = bq.Axis(scale=self.ys, label=names[yi], side="left", tick_values=ticks, tick_format="d")
        self.figure = bq.Figure(
            marks=[self.heatmap, self.outline, *self.points], axes=[ax_x, ax_y], title=name,
            fig_margin={"top": 30, "bottom": 40, "left": 45, "right": 10},
            layout=w.Layout(width=f"{size}px", height=f"{size}px"), padding_x=0, padding_y=0,
        )  # fmt: skip
        trait = _POSITION_TRAIT[fi]
        self.position = PageIntSlider(
            value=getattr(session, trait), min=0, max=int(hi), description=f"{names[fi]} code",
            continuous_update=True, layout=w.Layout(width=f"{size}px"), style={"description_width": "80px"},
        )  # fmt: skip
        self._trait = trait
        self.position.observe(self._moved, names="value")
        session.observe(lambda c: setattr(self.position, "value", c["new"]), names=trait)
        self.caption = w.HTML(layout=w.Layout(width=f"{size}px"))
        kwargs.setdefault("layout", w.Layout(width=f"{size}px", flex="0 0 auto", margin="0 10px 8px 0"))
        super().__init__([self.figure, self.position, self.caption], **kwargs)
        self._last: Any = None
        self.observe(lambda _c: self._draw(self.session.result, force=True), names="mode")
        session.add_view(f"slice {name}", self._draw)

    def _moved(self, change: Any) -> None:
        if getattr(self.session, self._trait) == change["new"]:
            return
        # a drag in the browser: coalesce (latest value wins); from code: compute now
        ctx = self.session.deferred() if from_page(self.position) else contextlib.nullcontext()
        with ctx:
            setattr(self.session, self._trait, change["new"])

    def set_outline(self, x: np.ndarray, y: np.ndarray) -> None:
        """Draw the dotted outline at points (``x``, ``y``) (empty arrays: none)."""
        with self.outline.hold_sync():
            self.outline.x = np.asarray(x, dtype=np.float32)
            self.outline.y = np.asarray(y, dtype=np.float32)

    def values(self, result: SessionResult) -> np.ndarray:
        """The array this plot shows for ``result`` (uint8; see ``mode``)."""
        assert result.slices is not None
        sl = result.slices[self.which]
        if self.mode == "fixed point":
            return np.asarray(sl.fixed, dtype=np.uint8)
        if self.mode == "float":
            return np.asarray(sl.float_, dtype=np.uint8)
        return comparison_codes(sl.fixed, sl.float_, result.n_classes)

    def _draw(self, result: SessionResult, force: bool = False) -> None:
        assert result.slices is not None
        sl = result.slices[self.which]
        if sl is self._last and not force:
            return
        self._last = sl
        color = self.values(result).astype(np.float32)
        with self.heatmap.hold_sync():
            self.heatmap.x = sl.x.astype(np.float32)
            self.heatmap.y = sl.y.astype(np.float32)
            self.heatmap.color = color
        for k, mark in enumerate(self.points):
            mine = sl.points_class == k
            with mark.hold_sync():
                mark.x = sl.points_x[mine].astype(np.float32)
                mark.y = sl.points_y[mine].astype(np.float32)
        self.caption.value = (
            f"<span style='font-size:12px'>{sl.mismatch} of {sl.fixed.size} grid points differ; "
            f"{sl.points_x.size} samples within {sl.tolerance} codes</span>"
        )


class BoundaryPanel(w.VBox):
    """The three slices side by side, a mode choice and the legend."""

    def __init__(self, session: Session, size: int = 300, **kwargs: Any) -> None:
        self.session = session
        self.slices = [SlicePlot(session, i, size) for i in range(3)]
        self.mode = w.ToggleButtons(options=list(MODES), value=MODES[0], description="show",
                                    style={"button_width": "110px", "description_width": "40px"})  # fmt: skip
        for sp in self.slices:
            t.link((self.mode, "value"), (sp, "mode"))
        self.legend = w.HTML(_legend(tuple(session.network.classes)))
        #: what the dotted outline on the slices is ("" while there is none)
        self.outline_note = w.HTML("")
        row = w.HBox(self.slices, layout=w.Layout(flex_flow="row wrap", align_items="flex-start"))
        super().__init__([self.mode, self.legend, self.outline_note, row], **kwargs)

    def show_outline(self, decisions: Any, note: str) -> None:
        """Outline, per slice, the boundary of ``decisions[i]`` (fixed-point classes on slice i's grid).

        ``decisions`` None clears the outline; ``note`` says what it is (shown above the slices).
        """
        for i, sp in enumerate(self.slices):
            if decisions is None:
                sp.set_outline(np.zeros(0), np.zeros(0))
            else:
                c = self.session.slice_codes
                sp.set_outline(*boundary_points(c, c, decisions[i]))
        text = (f"<span style='font-size:12px'><span style='display:inline-block;width:6px;height:6px;"
                f"border-radius:3px;background:#111;margin-right:6px;vertical-align:middle'></span>"
                f"{html.escape(note)}</span>") if decisions is not None and note else ""  # fmt: skip
        self.outline_note.value = text


def cube_class_tiles(fixed: np.ndarray, levels: int = 4) -> np.ndarray:
    """The (n, levels * n) class map of an (n, n, n) [red, green, blue] grid: one red-green tile per blue level.

    Tile ``k`` is the grid at blue index ``(2k + 1) n / (2 levels)``, red across and green up (row 0 at the top).

    >>> cube_class_tiles(np.arange(8).reshape(2, 2, 2), levels=2).tolist()
    [[2, 6, 3, 7], [0, 4, 1, 5]]
    """
    n = fixed.shape[0]
    tiles = [fixed[:, ::-1, min(n - 1, (2 * k + 1) * n // (2 * levels))].T for k in range(levels)]
    return np.concatenate(tiles, axis=1)


class CubePanel(w.VBox):
    """An isometric picture of the disagreeing points of the whole input cube."""

    def __init__(self, session: Session, size: int = 256, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        if not session.cube_ok:
            raise ValueError("the cube picture needs a network with 3 inputs")
        self.session = session
        self.size = size
        self.image = w.Image(format="png", layout=w.Layout(width=f"{size}px", height=f"{size}px"))
        self.caption = w.HTML()
        self.caption.layout = w.Layout(width=f"{size}px")
        classes = tuple(session.network.classes)
        self.legend = w.HTML(difference_legend_html(classes), layout=w.Layout(width=f"{size}px"))
        parts: list[w.Widget] = [w.HTML("<b>whole RGB cube: where they differ</b>"), self.image, self.legend,
                                 self.caption]  # fmt: skip
        #: several classes: the fixed-point class map of the cube grid, red-green tiles at four blue levels
        self.class_map: w.Image | None = None
        if len(classes) > 2:
            self.class_map = w.Image(format="png", layout=w.Layout(width=f"{size}px"))
            parts += [w.HTML("<b>fixed-point classes</b> <span style='font-size:12px'>(red across, green up; "
                             "tiles at four blue levels)</span>"), self.class_map,
                      w.HTML(class_legend_html(classes), layout=w.Layout(width=f"{size}px"))]  # fmt: skip
        kwargs.setdefault("layout", w.Layout(flex="0 0 auto"))
        super().__init__(parts, **kwargs)
        self._last: Any = None
        self._drawn: Any = None  # what the picture shows: (classes, grid, fixed, float bytes)
        session.add_view("cube", self._draw)

    def _draw(self, result: SessionResult) -> None:
        cube = result.cube
        assert cube is not None
        if cube is self._last:
            return
        self._last = cube
        key = (result.n_classes, cube.grid.tobytes(), cube.fixed.tobytes(), cube.float_.tobytes())
        if key != self._drawn:  # a plan change that leaves every grid decision as it was keeps the picture
            self._drawn = key
            # redrawn on every change that moves a grid decision: stored deflate (level 0), the same
            # pixels for about a fifth of level 1's encode time (0.2 vs 0.9 ms here), ~200 KB a picture
            self.image.value = cube_png(cube.fixed, cube.float_, self.size, result.n_classes, compress_level=0)
        n = cube.grid.size
        if self.class_map is not None:
            self.class_map.value = decision_mask_png(cube_class_tiles(cube.fixed), result.n_classes)
        self.caption.value = (
            f"<span style='font-size:12px'>{cube.mismatch} of {n**3} grid points differ "
            f"(grid {n}x{n}x{n}, codes {int(cube.grid[0])}..{int(cube.grid[-1])})</span>"
        )
