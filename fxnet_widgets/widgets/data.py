"""The data a session shows: checked when the session is made, read-only afterwards.

:class:`SessionData` holds the image (and its live preview), the samples, the
labels of either, and the fixed grids of the slices and the whole cube.
:func:`replace_image` gives a session another image (a clip's current frame, see
:class:`~fxnet_widgets.widgets.footage.FootagePanel`): a new, checked ``SessionData``
and one update through the session's own loop.
"""

from __future__ import annotations

import copy
import os
from typing import Any

import numpy as np

from ..core.images import RGBImage, read_image
from ..core.network import Network, as_codes
from ..render.raster import MAX_PREVIEW_WIDTH, DownscaledImage, downscale

__all__ = ["SessionData", "replace_image", "IMAGE_PARTS"]

#: the parts of a session's result computed from its image (recomputed when the image changes)
IMAGE_PARTS = ("image", "neurons", "figures")


def _as_image(image: Any) -> tuple[np.ndarray, str]:
    if isinstance(image, RGBImage):
        return image.codes, image.note
    if isinstance(image, (str, os.PathLike)):
        img = read_image(image)
        return img.codes, img.note
    arr = np.asarray(image)
    if arr.dtype.kind not in "iu" or arr.dtype == np.bool_:
        raise TypeError(f"image must be an H x W x 3 array of unsigned integer codes, not {arr.dtype}")
    if arr.ndim != 3:
        raise ValueError(f"image must be an H x W x channels array, not shape {arr.shape}")
    return arr, ""


def _class_indices(lab: np.ndarray, n_cls: int, what: str) -> np.ndarray:
    if lab.dtype.kind not in "iub":
        raise TypeError(f"{what} must be integer class indices, not {lab.dtype}")
    if lab.size and (int(lab.min()) < 0 or int(lab.max()) >= n_cls):
        bad = int(lab.min()) if int(lab.min()) < 0 else int(lab.max())
        raise ValueError(f"{what} must be between 0 and {n_cls - 1} (class indices), not {bad}")
    out = lab.astype(np.int64)
    out.setflags(write=False)
    return out


class SessionData:
    """The checked, read-only data of one session (see :class:`~fxnet_widgets.widgets.session.Session`)."""

    def __init__(
        self,
        network: Network,
        image: Any = None,
        samples: Any = None,
        labels: Any = None,
        *,
        image_labels: Any = None,
        slice_points: int = 128,
        cube_points: int = 32,
        preview_width: int = MAX_PREVIEW_WIDTH,
    ) -> None:
        for name, v, lo, hi in (("slice_points", slice_points, 2, 1024), ("cube_points", cube_points, 2, 128)):
            if not isinstance(v, int) or isinstance(v, bool) or not lo <= v <= hi:
                raise ValueError(f"{name} must be an integer between {lo} and {hi}, not {v!r}")
        self.network = network
        #: the network whose float pass every view calls "float" (stays the original when another is swapped in)
        self.reference = network
        n_codes = 1 << network.input_bits
        n_cls = len(network.classes)
        self.preview_width = preview_width
        self.image_note = ""
        self.image: np.ndarray | None = None
        self.preview: DownscaledImage | None = None
        self.image_labels: np.ndarray | None = None
        if image is not None:
            self._take_image(image)
        self.samples: np.ndarray | None = None
        self.labels: np.ndarray | None = None
        if samples is not None:
            flat, _ = as_codes(np.asarray(samples), network.input_bits, network.n_in, what="samples")
            self.samples = np.array(flat)
        if labels is not None:
            self._take_labels(np.asarray(labels), n_cls)
        if image_labels is not None:
            self._take_image_labels(image_labels)
        self.cube_ok = network.n_in == 3
        step = max(1, n_codes // slice_points)
        self.slice_codes = np.arange(0, n_codes, step, dtype=np.int64)[:slice_points]
        cstep = max(1, n_codes // cube_points)
        self.cube_codes = (np.arange(cube_points, dtype=np.int64) * cstep + cstep // 2).clip(0, n_codes - 1)
        self.cube_input: np.ndarray | None = None
        if self.cube_ok:
            g = np.stack(np.meshgrid(self.cube_codes, self.cube_codes, self.cube_codes, indexing="ij"), -1)
            dt = np.uint8 if n_codes <= 256 else np.uint16
            self.cube_input = np.ascontiguousarray(g.reshape(-1, 3).astype(dt))

    def _take_image(self, image: Any) -> None:
        codes, self.image_note = _as_image(image)
        as_codes(codes, self.network.input_bits, self.network.n_in, what="image")
        codes = np.ascontiguousarray(codes)
        codes.setflags(write=False)
        self.image = codes
        self.preview = downscale(codes, self.preview_width)

    def _take_image_labels(self, image_labels: Any) -> None:
        if self.image is None:
            raise ValueError("image_labels need an image")
        lab = np.asarray(image_labels)
        if lab.dtype.kind in "iub" and lab.shape != self.image.shape[:2]:
            raise ValueError(f"image_labels must have the image's shape {self.image.shape[:2]}, not {lab.shape}")
        self.image_labels = _class_indices(lab, len(self.network.classes), "image_labels")

    def with_image(self, image: Any, image_labels: Any = None, note: str | None = None) -> SessionData:
        """A copy with another image (checked as the constructor checks it) and its labels (or none);
        ``note`` names the image (default: the image's own note)."""
        new = copy.copy(self)
        new.image_labels = None
        new._take_image(image)
        if image_labels is not None:
            new._take_image_labels(image_labels)
        if note is not None:
            new.image_note = note
        return new

    def _take_labels(self, lab: np.ndarray, n_cls: int) -> None:
        if lab.dtype.kind not in "iub":
            raise TypeError(f"labels must be integer class indices, not {lab.dtype}")
        if self.image is not None and lab.shape == self.image.shape[:2]:
            self.image_labels = _class_indices(lab, n_cls, "labels")
        elif self.samples is not None and lab.shape == (self.samples.shape[0],):
            self.labels = _class_indices(lab, n_cls, "labels")
        else:
            want = []
            if self.samples is not None:
                want.append(f"({self.samples.shape[0]},) for the samples")
            if self.image is not None:
                want.append(f"{self.image.shape[:2]} for the image")
            raise ValueError(f"labels must have shape {' or '.join(want) or '(N,) with samples'}, not {lab.shape}")


def replace_image(session: Any, image: Any, image_labels: Any = None, note: str | None = None) -> None:
    """Give ``session`` another image (H x W x n_in codes, an ``RGBImage`` or a path) and its H x W
    class labels (or none), named by ``note``; the samples, plan and slices stay. A
    :class:`SessionData` (one the session had before) is taken as it is.

    The image is checked first (a bad one leaves the session as it was); the parts computed
    from the old image are dropped and the session's normal update loop computes the new
    state (inside ``session.deferred()`` it is coalesced, latest image wins).
    """
    data = image if isinstance(image, SessionData) else session.data.with_image(image, image_labels, note)
    session.data = data
    session.image_note = data.image_note
    for name in IMAGE_PARTS:
        session._parts.pop(name, None)
    session._request()
