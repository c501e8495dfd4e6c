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

            @numba.njit(cache=True, nogil=True)
            def voxels(img, fx, fl, faint, dot_x, dot_y, dot_ok, order, pad, side, base, offsets, edge, inner, rim,
                       binary):  # type: ignore[no-untyped-def]  # fmt: skip # pragma: no cover
                size = img.shape[0]
                nv = fx.shape[0]
                for v in range(nv):  # faint dots: agreeing voxels of a non-zero class
                    if fx[v] == fl[v] and fx[v] != 0 and dot_ok[v]:
                        for ch in range(3):
                            img[dot_y[v], dot_x[v], ch] = faint[ch]
                # the squares nearest first, each pixel written once: the pixel the numpy painter
                # writes last (nearest level, then highest voxel index) is the one written here first
                painted = np.zeros(side * side, dtype=np.bool_)
                covered = np.zeros(side * side, dtype=np.bool_)  # footprints a nearer square took whole
                for t in range(nv - 1, -1, -1):
                    v = order[t]
                    if fx[v] == fl[v] or covered[base[v]]:
                        continue
                    covered[base[v]] = True
                    kind = 2 if not binary else (0 if fx[v] > fl[v] else 1)
                    ci, cr = inner[kind, v], rim[kind, v]
                    for o in range(offsets.shape[0]):
                        q = base[v] + offsets[o]
                        if painted[q]:
                            continue
                        painted[q] = True
                        y, x = q // side - pad, q % side - pad
                        if 0 <= y < size and 0 <= x < size:
                            c = cr if edge[o] else ci
                            img[y, x, 0] = (c >> 16) & 255
                            img[y, x, 1] = (c >> 8) & 255
                            img[y, x, 2] = c & 255

            _LOOP = voxels
    return _LOOP


def compiled() -> Any:
    """The compiled voxel painter (dots, then squares) when the kernel's loops are loaded, else None."""
    return _loop() if _compiled.use_compiled(_compiled.MIN_SAMPLES) else None
