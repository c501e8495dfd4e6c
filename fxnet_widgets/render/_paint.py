"""The cube picture's voxel painter, compiled (numba) once the kernel's compiled loops are loaded.

The numpy painter (the reference) writes the faint dots, then the squares one depth level at a
time (a fancy-index store per level, nearer levels later). The compiled loop writes the dots,
then the squares nearest first, each pixel once and no square whose footprint a nearer one took
whole: every pixel gets the value the numpy painter writes last, so the pictures are the same
(the tests compare both on random grids). Used only when the kernel has already imported numba
(:func:`..core.kernel._compiled.use_compiled`), so a picture drawn on its own costs no import.
"""

from __future__ import annotations

import threading
from typing import Any

import numpy as np

from ..core.kernel import _compiled

__all__ = ["compiled", "paint_numpy"]

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

            @numba.njit(cache=True, nogil=True, boundscheck=False)
            def voxels(img, size, fx, fl, faint, dot_pixel, dot_ok, voxel, side, base, sq_y, sq_x, oy, ox, edge,
                       inner, rim, binary):  # type: ignore[no-untyped-def]  # fmt: skip # pragma: no cover
                # img: the picture's size x size x 3 bytes, flat; voxel, base, sq_y, sq_x, inner and rim
                # in painting order (depth level, then voxel index)
                nv = fx.shape[0]
                for v in range(nv):  # faint dots: agreeing voxels of a non-zero class
                    if fx[v] == fl[v] and fx[v] != 0 and dot_ok[v]:
                        p = 3 * np.int64(dot_pixel[v])
                        img[p], img[p + 1], img[p + 2] = faint[0], faint[1], faint[2]
                # the squares nearest first, each pixel written once: the pixel the numpy painter
                # writes last (nearest level, then highest voxel index) is the one written here first;
                # a square whose footprint (base) a nearer square took is skipped whole
                painted = np.zeros(size * size, dtype=np.bool_)
                covered = np.zeros(side * side, dtype=np.bool_)
                for t in range(nv - 1, -1, -1):
                    v = voxel[t]
                    if fx[v] == fl[v] or covered[base[t]]:
                        continue
                    covered[base[t]] = True
                    kind = 2 if not binary else (0 if fx[v] > fl[v] else 1)
                    ci, cr = inner[kind, t], rim[kind, t]
                    cy, cx = np.int64(sq_y[t]), np.int64(sq_x[t])
                    for o in range(oy.shape[0]):
                        y, x = cy + oy[o], cx + ox[o]
                        if 0 <= y < size and 0 <= x < size:
                            q = y * size + x
                            if painted[q]:
                                continue
                            painted[q] = True
                            c = cr if edge[o] else ci
                            img[3 * q] = (c >> 16) & 255
                            img[3 * q + 1] = (c >> 8) & 255
                            img[3 * q + 2] = c & 255

            _LOOP = voxels
    return _LOOP


def compiled() -> Any:
    """The compiled voxel painter (dots, then squares) when the kernel's loops are loaded, else None."""
    return _loop() if _compiled.use_compiled(_compiled.MIN_SAMPLES) else None
