"""The cube picture's painter loop, compiled (numba) once the kernel's compiled loops are loaded.

The numpy painter writes one depth level at a time (a fancy-index store per level); with
many differing voxels (a narrow plan) that is a few ms a picture, most of a refresh's
drawing. The loop writes the same squares in the same order, so the last write of each
pixel, what the picture shows, is the same: the tests compare both on random grids.
Used only when the kernel has already imported numba (:func:`..core.kernel._compiled.use_compiled`),
so a picture drawn on its own costs no import.
"""

from __future__ import annotations

import threading
from typing import Any

import numpy as np

from ..core.kernel import _compiled

__all__ = ["paint", "paint_numpy"]

_LOCK = threading.Lock()
_LOOP: Any = None


def paint_numpy(img: np.ndarray, pad: int, side: int, bases: np.ndarray, levels: np.ndarray, offsets: np.ndarray,
                edge: np.ndarray, inner: np.ndarray, rim: np.ndarray) -> None:  # fmt: skip
    """Squares ``bases + offsets`` on a ``side`` x ``side`` canvas padded by ``pad`` around ``img``, in the
    given order (rim colour where ``edge``; colours packed ``0xRRGGBB``), level by level."""
    canvas = np.full(side * side, 0xFFFFFFFF, dtype=np.uint32)  # "nothing drawn"
    bounds = np.flatnonzero(np.diff(levels)) + 1
    for a, b in zip(np.r_[0, bounds], np.r_[bounds, len(bases)]):
        idx = (bases[a:b, None] + offsets[None, :]).reshape(-1)
        canvas[idx] = np.where(edge[None, :], rim[a:b, None], inner[a:b, None]).reshape(-1)
    size = img.shape[0]
    view = canvas.reshape(side, side)[pad : pad + size, pad : pad + size]
    drawn = view != 0xFFFFFFFF
    v = view[drawn]
    img[drawn] = np.stack([(v >> 16) & 255, (v >> 8) & 255, v & 255], axis=1).astype(np.uint8)


def _loop() -> Any:
    global _LOOP
    with _LOCK:
        if _LOOP is None:
            import numba  # noqa: PLC0415 - only once the kernel has loaded it

            @numba.njit(cache=True, nogil=True)
            def loop(img, pad, side, bases, offsets, edge, inner, rim):  # type: ignore[no-untyped-def]  # pragma: no cover
                size = img.shape[0]
                for v in range(bases.shape[0]):
                    for o in range(offsets.shape[0]):
                        q = bases[v] + offsets[o]
                        y, x = q // side - pad, q % side - pad
                        if 0 <= y < size and 0 <= x < size:
                            c = rim[v] if edge[o] else inner[v]
                            img[y, x, 0] = (c >> 16) & 255
                            img[y, x, 1] = (c >> 8) & 255
                            img[y, x, 2] = c & 255

            _LOOP = loop
    return _LOOP


def paint(img: np.ndarray, pad: int, side: int, bases: np.ndarray, levels: np.ndarray, offsets: np.ndarray,
          edge: np.ndarray, inner: np.ndarray, rim: np.ndarray) -> None:  # fmt: skip
    """:func:`paint_numpy`, by the compiled loop when the kernel's loops are loaded."""
    if _compiled.use_compiled(_compiled.MIN_SAMPLES):
        _loop()(img, pad, side, bases, offsets, edge, inner, rim)
    else:
        paint_numpy(img, pad, side, bases, levels, offsets, edge, inner, rim)
