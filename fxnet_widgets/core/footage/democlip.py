"""A short generated belt clip (our own scene generator): moving fruit, a lighting drift, glare.

One wide belt scene from :func:`~fxnet_widgets.core.scenes.make_scene` is viewed
through a window that moves with the belt; over the clip the light drifts from the
training lamp towards a dimmer, cooler light, and a few frames in the middle carry
a glare spot (a bright reflection that saturates the sensor). Everything is numpy,
driven by one seed, so the frames are the same on every machine; the clip file is
FFV1 (lossless, RGB ``bgr0``) in Matroska, so decoding gives the frames back exactly,
and it is written byte for byte the same each time (``fxnet demo`` writes it as
:data:`~fxnet_widgets.core.demo.DEMO_CLIP`: 40 frames of 160 x 96, about 0.9 MB).

>>> frames = demo_frames(n_frames=4, width=64, height=40)
>>> len(frames), frames[0].shape, frames[0].dtype
(4, (40, 64, 3), dtype('uint8'))
"""

from __future__ import annotations

import os
from fractions import Fraction

import numpy as np

from ..fileio import atomic_writer
from ..scenes import make_scene

__all__ = ["demo_frames", "write_demo_clip", "DEMO_RATE", "GLARE_FRAMES"]

#: frames per second of the demo clip
DEMO_RATE = 25
#: the frames (as a fraction of the clip, from..to) that carry glare
GLARE_FRAMES = (0.5, 0.6)


def demo_frames(n_frames: int = 40, width: int = 160, height: int = 96, *, seed: int = 6,
                speed: int = 4) -> list[np.ndarray]:  # fmt: skip
    """The clip's frames as H x W x 3 uint8 arrays (deterministic)."""
    for name, v, lo in (("n_frames", n_frames, 1), ("width", width, 32), ("height", height, 32), ("speed", speed, 0)):
        if not isinstance(v, int) or isinstance(v, bool) or v < lo:
            raise ValueError(f"{name} must be an integer of at least {lo}, not {v!r}")
    wide = min(4096, width + speed * (n_frames - 1))
    n_fruit = max(2, int(round(60 * wide * height / (640 * 360))))  # a busy belt: about 3x the still scenes
    scene = make_scene(seed=seed, lighting="train", width=wide, height=height, n_fruit=n_fruit).image.astype(np.float64)
    yy, xx = np.mgrid[0:height, 0:width].astype(np.float64)
    g0, g1 = int(GLARE_FRAMES[0] * n_frames), max(int(GLARE_FRAMES[0] * n_frames) + 1, int(GLARE_FRAMES[1] * n_frames))
    out = []
    for i in range(n_frames):
        t = i / max(1, n_frames - 1)
        x0 = min(wide - width, i * speed)
        img = scene[:, x0 : x0 + width].copy()
        # lighting drift: dimmer and cooler (red down 30 %, green down 12 %, blue up 6 %)
        img *= np.array([1.0 - 0.30 * t, 1.0 - 0.12 * t, 1.0 + 0.06 * t])
        if g0 <= i < g1:  # glare: a bright reflection spot, saturating at its centre
            cx, cy, r = width * 0.62, height * 0.4, 0.16 * min(width, height) * 2
            img += 330.0 * np.exp(-((xx - cx) ** 2 + (yy - cy) ** 2) / (r * r))[..., None]
        out.append(np.clip(np.rint(img), 0, 255).astype(np.uint8))
    return out


def write_demo_clip(path: str | os.PathLike[str], n_frames: int = 40, width: int = 160, height: int = 96, *,
                    seed: int = 6) -> str:  # fmt: skip
    """Write the demo clip (FFV1 ``bgr0`` in Matroska, :data:`DEMO_RATE` frames/s); returns the path.

    Written with FFmpeg's bitexact flags: the same arguments give the same bytes (with the same
    FFmpeg libraries: PyAV's wheel ships them; tests write it twice and compare).
    """
    import av

    frames = demo_frames(n_frames, width, height, seed=seed)
    p = os.fspath(path)

    def write(fh: object) -> None:
        # bitexact: no random segment id, no library version strings, so the same frames give the same bytes
        with av.open(fh, mode="w", format="matroska", options={"fflags": "+bitexact"}) as c:
            s = c.add_stream("ffv1", rate=Fraction(DEMO_RATE), options={"g": "1"})
            s.width, s.height, s.pix_fmt = width, height, "bgr0"
            s.codec_context.flags |= av.codec.context.Flags.bitexact
            for f in frames:
                for pkt in s.encode(av.VideoFrame.from_ndarray(f, format="rgb24")):
                    c.mux(pkt)
            for pkt in s.encode():
                c.mux(pkt)

    atomic_writer(p, write)
    return p
