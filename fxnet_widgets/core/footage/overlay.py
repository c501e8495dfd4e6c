"""An overlay video: each frame dimmed to grey, the disagreement coloured, the fixed mask outlined.

Colours (the same as the explorer's preview): magenta where only the fixed-point network
says positive, teal where only the float network does; a white outline around the regions
the fixed-point network calls positive. ``.mkv`` is written losslessly (FFV1, RGB), ``.mp4``
as H.264 (yuv420p, CRF 18; odd sizes are padded by one pixel).
"""

from __future__ import annotations

import os
import tempfile
from fractions import Fraction
from pathlib import Path
from typing import Any

import numpy as np

from ..fileio import remove_stale_temporaries

__all__ = ["overlay_frame", "OverlayWriter", "ONLY_FIXED", "ONLY_FLOAT", "OUTLINE"]

ONLY_FIXED = (230, 40, 200)  # magenta
ONLY_FLOAT = (20, 180, 170)  # teal
OUTLINE = (255, 255, 255)


def overlay_frame(rgb: np.ndarray, fixed: np.ndarray, float_: np.ndarray) -> np.ndarray:
    """H x W x 3 uint8: ``rgb`` as dim grey, disagreement coloured, the fixed mask (class 1) outlined."""
    lum = (rgb[..., 0].astype(np.uint32) * 299 + rgb[..., 1].astype(np.uint32) * 587
           + rgb[..., 2].astype(np.uint32) * 114) // 2000  # ITU-R BT.601 luma weights, halved  # fmt: skip
    out = np.repeat(lum.astype(np.uint8)[..., None], 3, axis=2)
    pos = fixed == 1
    edge = np.zeros_like(pos)
    edge[1:, :] |= pos[1:, :] & ~pos[:-1, :]
    edge[:-1, :] |= pos[:-1, :] & ~pos[1:, :]
    edge[:, 1:] |= pos[:, 1:] & ~pos[:, :-1]
    edge[:, :-1] |= pos[:, :-1] & ~pos[:, 1:]
    out[edge] = OUTLINE
    out[pos & (float_ != 1)] = ONLY_FIXED
    out[~pos & (float_ == 1)] = ONLY_FLOAT
    return out


class OverlayWriter:
    """Writes overlay frames to ``path`` (``.mkv`` or ``.mp4``) at ``rate`` frames per second."""

    def __init__(self, path: str | os.PathLike[str], width: int, height: int, rate: float | None) -> None:
        import av

        p = os.fspath(path)
        if not p.endswith((".mkv", ".mp4")):
            raise ValueError(f"overlay file name must end in .mkv or .mp4, not {p!r}")
        parent = os.path.dirname(os.path.abspath(p))
        if not os.path.isdir(parent):
            raise ValueError(f"{p}: the directory {parent} must exist")
        self.path = p
        name = os.path.basename(p)
        remove_stale_temporaries(Path(parent), name)  # written beside the target, renamed into place (as fileio)
        fd, self._tmp = tempfile.mkstemp(prefix=f".{name}.{os.getpid()}.", suffix=".tmp", dir=parent)
        os.close(fd)
        self._c: Any = av.open(self._tmp, "w", format="matroska" if p.endswith(".mkv") else "mp4")
        r = Fraction(rate).limit_denominator(1001) if rate else Fraction(25)
        if p.endswith(".mkv"):
            self._s = self._c.add_stream("ffv1", rate=r)
            self._s.pix_fmt = "bgr0"
            self._pad = (0, 0)
        else:
            self._s = self._c.add_stream("libx264", rate=r, options={"crf": "18", "preset": "veryfast"})
            self._s.pix_fmt = "yuv420p"
            self._pad = (height % 2, width % 2)
        self._s.width, self._s.height = width + self._pad[1], height + self._pad[0]
        self.frames = 0

    def write(self, rgb: np.ndarray) -> None:
        import av

        if self._pad != (0, 0):
            rgb = np.pad(rgb, ((0, self._pad[0]), (0, self._pad[1]), (0, 0)), mode="edge")
        for pkt in self._s.encode(av.VideoFrame.from_ndarray(np.ascontiguousarray(rgb), format="rgb24")):
            self._c.mux(pkt)
        self.frames += 1

    def close(self, keep: bool = True) -> None:
        """Finish the file and rename it into place (``keep=False``: remove it)."""
        try:
            for pkt in self._s.encode():
                self._c.mux(pkt)
        finally:
            self._c.close()
        if keep:
            os.replace(self._tmp, self.path)
        else:
            os.unlink(self._tmp)
