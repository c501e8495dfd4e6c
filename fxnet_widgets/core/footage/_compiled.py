"""Fused loops over 8-bit RGB frames (numba), compiled on first use.

Each loop reads a pixel's three codes, forms ``r << 16 | g << 8 | b`` and reads
the tables at that index: no index array, no second pass. The results are the
same gathers as the numpy path (tests compare them), only fused.
"""

from __future__ import annotations

import threading
from typing import Any

import numpy as np

__all__ = ["kernels"]

_LOCK = threading.Lock()
_KERNELS: Any = None


class _Kernels:
    def __init__(self) -> None:
        import numba

        @numba.njit(cache=False, nogil=True, boundscheck=False)
        def decide_packed(rgb: np.ndarray, packed: np.ndarray, out: np.ndarray) -> None:  # pragma: no cover
            for i in range(rgb.shape[0]):
                c = (np.int32(rgb[i, 0]) << 16) | (np.int32(rgb[i, 1]) << 8) | np.int32(rgb[i, 2])
                out[i] = (packed[c >> 3] >> (c & 7)) & 1

        @numba.njit(cache=False, nogil=True, boundscheck=False)
        def frame_stats(rgb: np.ndarray, fixed: np.ndarray, flt: np.ndarray, events: np.ndarray, n_slots: int,
                        slot_counts: np.ndarray, sums: np.ndarray) -> tuple[int, int, int]:  # pragma: no cover
            # fixed/flt: byte tables of class indices; counts positives (class 1) and disagreements
            pos_fx = 0
            pos_fl = 0
            differ = 0
            s0 = 0
            s1 = 0
            s2 = 0
            for i in range(rgb.shape[0]):
                r = np.int32(rgb[i, 0])
                g = np.int32(rgb[i, 1])
                b = np.int32(rgb[i, 2])
                s0 += r
                s1 += g
                s2 += b
                c = (r << 16) | (g << 8) | b
                a = fixed[c]
                f = flt[c]
                pos_fx += a == 1
                pos_fl += f == 1
                differ += a != f
                if n_slots:
                    e = events[c]
                    if e:
                        for k in range(n_slots):
                            if (e >> k) & 1:
                                slot_counts[k] += 1
            sums[0] += s0
            sums[1] += s1
            sums[2] += s2
            return pos_fx, pos_fl, differ

        @numba.njit(cache=False, nogil=True, boundscheck=False)
        def both(rgb: np.ndarray, fixed: np.ndarray, flt: np.ndarray, out_fx: np.ndarray,
                 out_fl: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            for i in range(rgb.shape[0]):
                c = (np.int32(rgb[i, 0]) << 16) | (np.int32(rgb[i, 1]) << 8) | np.int32(rgb[i, 2])
                out_fx[i] = fixed[c]
                out_fl[i] = flt[c]

        self.decide_packed = decide_packed
        self.frame_stats = frame_stats
        self.both = both


def kernels() -> Any:
    """The compiled loops, or None when numba is not available."""
    global _KERNELS
    with _LOCK:
        if _KERNELS is None:
            try:
                _KERNELS = _Kernels()
            except ImportError:  # pragma: no cover - numba is a dependency
                _KERNELS = False
    return _KERNELS or None
