"""The processed image: input, float mask, fixed-point mask and disagreement overlay.

While a slider moves the kernel runs on a subsampled preview (at most
``preview_width`` pixels wide, every n-th pixel of the input) and a note says
so; the "full resolution" toggle runs the whole image. The PNGs are rendered
by :mod:`fxnet_widgets.render` and decode to exactly the decisions shown.
"""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as w
import numpy as np
import traitlets as t

from ..render.raster import MAX_RINGED, decision_mask_png, overlay_background, overlay_png, png_bytes
from .legend import class_legend_html, difference_legend_html
from .results import SessionResult
from .session import Session

__all__ = ["PreviewPanel"]


class PreviewPanel(w.VBox):
    """Four images side by side and the full-resolution toggle.

    Attributes
    ----------
    input_image, float_image, fixed_image, overlay_image : ipywidgets.Image
        PNG bytes of the input codes, the float decisions, the fixed-point
        decisions and the input dimmed with the disagreeing pixels coloured
        (and, when only a few differ, ringed: see :func:`~fxnet_widgets.render.overlay_png`).
    overlay_caption : ipywidgets.HTML
        How many pixels differ, under the overlay.
    full_resolution : ipywidgets.ToggleButton
        Linked to ``session.full_resolution``.
    note : ipywidgets.HTML
        Says whether the images are a subsampled preview.
    """

    def __init__(self, session: Session, width: int = 300, **kwargs: Any) -> None:
        if not isinstance(session, Session):
            raise TypeError(f"session must be a Session, not {type(session).__name__}")
        if session.image is None:
            raise ValueError("the preview needs a session with an image")
        self.session = session
        h, wd = session.image.shape[:2]
        height = max(1, round(width * h / wd))
        lay = {"width": f"{width}px", "height": f"{height}px"}

        def img() -> w.Image:
            return w.Image(format="png", layout=w.Layout(**lay))

        self.input_image, self.float_image, self.fixed_image, self.overlay_image = img(), img(), img(), img()
        titles = ["input", "float decision", "fixed-point decision", "where they differ"]
        self.overlay_caption = w.HTML(layout=w.Layout(width=f"{width}px"))
        cell_layout = {"flex": "0 0 auto", "margin": "0 12px 6px 0"}
        cells = [
            w.VBox([w.HTML(f"<b>{title}</b>"), im], layout=w.Layout(**cell_layout))
            for title, im in zip(titles, (self.input_image, self.float_image, self.fixed_image, self.overlay_image))
        ]
        cells[3].children = (*cells[3].children, self.overlay_caption)
        self.full_resolution = w.ToggleButton(
            value=session.full_resolution, description="full resolution",
            tooltip="compute every pixel (slower); off: a subsampled live preview",
        )  # fmt: skip
        self._link = t.link((self.full_resolution, "value"), (session, "full_resolution"))
        self.note = w.HTML()
        classes = tuple(session.network.classes)
        #: the class colours of the two decision pictures and the colours of "where they differ", by class name
        self.legend = w.HTML(
            "<div style='display:flex;flex-wrap:wrap;gap:4px 24px'><div><b style='font-size:12px'>decisions:</b>"
            + class_legend_html(classes) + "</div><div><b style='font-size:12px'>where they differ:</b>"
            + difference_legend_html(classes) + "</div></div>"
        )  # fmt: skip
        self._codes: Any = None
        self._digest = ""
        self._background: Any = None
        self._drawn: Any = None  # (classes, decisions) the fixed and overlay pictures show
        self._last: Any = None
        wrap = {"flex_flow": "row wrap", "align_items": "flex-start"}
        rows = [w.HBox(cells, layout=w.Layout(**wrap)), self.legend,
                w.HBox([self.full_resolution, self.note], layout=w.Layout(**wrap))]  # fmt: skip
        super().__init__(rows, **kwargs)
        session.add_view("preview", self._draw)

    def _draw(self, result: SessionResult) -> None:
        im = result.image
        assert im is not None
        if im is self._last:
            return
        self._last = im
        n = result.n_classes
        # the float decisions depend on the codes and the network only; the session keeps each codes array alive
        new_input = im.codes is not self._codes or self.session.network.digest != self._digest
        if new_input:
            self._codes, self._digest = im.codes, self.session.network.digest
            self.input_image.value = png_bytes(im.codes)
            self.float_image.value = decision_mask_png(im.float_, n)
            self._background = overlay_background(im.codes)
        # a plan change that leaves every decision as it was (same input, classes) keeps both pictures
        if new_input or self._drawn is None or self._drawn[0] != n or not np.array_equal(self._drawn[1], im.fixed):
            self._drawn = (n, np.array(im.fixed))
            # stored deflate: level 1 saved 5 bytes of 29 KB on the demo's two-class mask, for 0.3 ms
            self.fixed_image.value = decision_mask_png(im.fixed, n, compress_level=0)
            # redrawn on most plan changes: stored deflate (level 0) sends the same pixels for about a
            # twentieth of the Huffman encode's time (0.1 vs 2 ms at 640x360 here), ~230 KB a picture
            self.overlay_image.value = overlay_png(im.codes, im.fixed, im.float_, n, compress_level=0, rings=True,
                                                   background=self._background)  # fmt: skip
        m = im.mismatch
        if m == 0:
            said = "no pixel differs"
        elif m <= MAX_RINGED:
            said = f"{m} pixel{'s' if m > 1 else ''} differ{'' if m > 1 else 's'}, each ringed in white"
        else:
            said = f"{m} pixels differ"
        self.overlay_caption.value = f"<span style='font-size:12px'>{said}</span>"
        flag = " (downscaled: use full resolution for every pixel)" if im.factor > 1 else ""
        if n == 2:
            colours = f"magenta: only fixed point says {html.escape(result.classes[-1])}, teal: only float"
        else:
            colours = "magenta: fixed point and float choose different classes"
        self.note.value = (
            f"<span style='font-size:12px'>{html.escape(im.note)}{flag}; {im.mismatch} of {im.fixed.size} "
            f"pixels differ ({colours})</span>"
        )
