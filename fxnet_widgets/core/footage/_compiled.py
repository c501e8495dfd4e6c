"""Fused loops over 8-bit RGB frames (numba), compiled on first use.

Compiled code is cached on disk by numba (``cache=True``: beside this file, or in the
user's cache directory when the package folder is read-only), so only the first run on a
machine pays for compiling.

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

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def decide_packed(rgb: np.ndarray, packed: np.ndarray, out: np.ndarray) -> None:  # pragma: no cover
            for i in range(rgb.shape[0]):
                c = (np.int32(rgb[i, 0]) << 16) | (np.int32(rgb[i, 1]) << 8) | np.int32(rgb[i, 2])
                out[i] = (packed[c >> 3] >> (c & 7)) & 1

        @numba.njit(cache=True, nogil=True, boundscheck=False)
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

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def both(rgb: np.ndarray, fixed: np.ndarray, flt: np.ndarray, out_fx: np.ndarray,
                 out_fl: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            for i in range(rgb.shape[0]):
                c = (np.int32(rgb[i, 0]) << 16) | (np.int32(rgb[i, 1]) << 8) | np.int32(rgb[i, 2])
                out_fx[i] = fixed[c]
                out_fl[i] = flt[c]

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def frame_codes(rgb: np.ndarray, blocks: np.ndarray, table: np.ndarray, lg: int, escape: np.ndarray,
                        hist: np.ndarray, sums: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            # blocks (2^18, or length 1: none): the code of a 4 x 4 x 4 colour block, 255 when mixed;
            # table: dense codes, 1 << lg per byte (see _coded); with 2-bit codes and an escape table
            # (same length as the colours), code 3 means: read the colour's code from the escape table
            width = np.int32(8 >> lg)
            low = np.int32((1 << lg) - 1)
            mask = np.int32((1 << (8 >> lg)) - 1)
            escaping = escape.shape[0] > 1
            blocked = blocks.shape[0] > 1
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
                if blocked:
                    v = np.int32(blocks[((r >> 2) << 12) | ((g >> 2) << 6) | (b >> 2)])
                    if v != 255:
                        hist[v] += 1
                        continue
                c = (r << 16) | (g << 8) | b
                v = (np.int32(table[c >> lg]) >> ((c & low) * width)) & mask
                if escaping and v == 3:
                    v = np.int32(escape[c])
                hist[v] += 1
            sums[0] += s0
            sums[1] += s1
            sums[2] += s2

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def combine(fixed: np.ndarray, flt: np.ndarray, events: np.ndarray, out: np.ndarray,
                    hist: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            # out = fixed | float << 1 | events << 2 per colour (events of length 1: none), and how often each
            with_events = events.shape[0] == out.shape[0]
            for i in range(out.shape[0]):
                v = np.uint64(fixed[i]) | (np.uint64(flt[i]) << np.uint64(1))
                if with_events:
                    v |= np.uint64(events[i]) << np.uint64(2)
                out[i] = v
                hist[v] += 1

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def blocks(codes: np.ndarray, out: np.ndarray) -> int:  # pragma: no cover
            # codes: 2^24 colour codes (r << 16 | g << 8 | b); out[block of 4 x 4 x 4]: the shared code or 255
            for k in range(out.shape[0]):
                out[k] = 254  # not seen yet
            for c in range(codes.shape[0]):
                k = ((c >> 18) << 12) | (((c >> 10) & 63) << 6) | ((c >> 2) & 63)
                v = codes[c]
                o = out[k]
                if o == 254:
                    out[k] = v
                elif o != v:
                    out[k] = 255
            uniform = 0
            for k in range(out.shape[0]):
                uniform += out[k] != 255
            return uniform

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def build(low_sum: np.ndarray, const: np.ndarray, h0: int, h1: int, weights: np.ndarray,
                  biases: np.ndarray, sizes: np.ndarray, woff: np.ndarray, goff: np.ndarray, lo: np.ndarray,
                  toff: np.ndarray, tab_codes: np.ndarray, tab_bits: np.ndarray, thr: int,
                  decisions: np.ndarray, keep_codes: bool, codes_out: np.ndarray, keep_events: bool,
                  events: np.ndarray, seen: np.ndarray, pos: np.ndarray) -> None:  # pragma: no cover
            # pos[3 g + b]: the bit of event b of neuron g in ``events`` (only events its interval can reach)
            # the integer network per colour: exact int64 sums (step 3), steps 4-7 read from the
            # per-neuron tables that post_accumulate made over each sum interval, step 8
            n_layers = sizes.shape[0]
            width = 1
            n_all = 0
            for k in range(n_layers):
                width = max(width, sizes[k])
                n_all += sizes[k]
            # evm[8 g + e]: the bits in ``events`` of neuron g's event set e (no branch per event)
            evm = np.zeros(8 * n_all, dtype=np.uint64)
            for g in range(n_all):
                for e in range(8):
                    m = np.uint64(0)
                    for b in range(3):
                        if (e >> b) & 1:
                            m |= np.uint64(1) << np.uint64(pos[3 * g + b])
                    evm[8 * g + e] = m
            seen_or = np.zeros(n_all, dtype=np.uint8)
            # layer at a time over the n_low colours of one value h of the high inputs: tight loops
            n_low = low_sum.shape[0]  # low_sum: (colours of the low inputs, n1), const: (combinations, n1)
            n1 = sizes[0]
            cur = np.zeros((width, n_low), dtype=np.int32)  # codes: at most 16 bits
            nxt = np.zeros((width, n_low), dtype=np.int32)
            evs = np.zeros(n_low, dtype=np.uint64)
            acc = np.zeros(n_low, dtype=np.int64)
            for h in range(h0, h1):
                for l in range(n_low):
                    evs[l] = 0
                for j in range(n1):
                    base = const[h, j] - lo[j] + toff[j]
                    m = np.uint8(0)
                    for l in range(n_low):
                        d = low_sum[l, j] + base
                        cur[j, l] = tab_codes[d]
                        e = tab_bits[d]
                        m |= e
                        evs[l] |= evm[8 * j + e]
                    seen_or[j] |= m
                n_prev = n1
                for k in range(1, n_layers):
                    nk = sizes[k]
                    for j in range(nk):
                        g = goff[k] + j
                        wb = woff[k] + j * n_prev
                        bias = biases[g] - lo[g] + toff[g]
                        for l in range(n_low):
                            acc[l] = bias
                        for i in range(n_prev):
                            wi = weights[wb + i]
                            for l in range(n_low):
                                acc[l] += wi * cur[i, l]
                        m = np.uint8(0)
                        for l in range(n_low):
                            d = acc[l]
                            nxt[j, l] = tab_codes[d]
                            e = tab_bits[d]
                            m |= e
                            evs[l] |= evm[8 * g + e]
                        seen_or[g] |= m
                    for j in range(nk):
                        for l in range(n_low):
                            cur[j, l] = nxt[j, l]
                    n_prev = nk
                start = h * n_low
                if n_prev == 1:
                    for l in range(n_low):
                        decisions[start + l] = 1 if cur[0, l] >= thr else 0
                else:
                    for l in range(n_low):
                        best = 0
                        for j in range(1, n_prev):
                            if cur[j, l] > cur[best, l]:
                                best = j
                        decisions[start + l] = best
                if keep_codes:
                    for l in range(n_low):
                        for j in range(n_prev):
                            codes_out[start + l, j] = cur[j, l]
                if keep_events:
                    for l in range(n_low):
                        events[start + l] = evs[l]
            for g in range(n_all):
                seen[g] |= seen_or[g]

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def compact(events: np.ndarray, active: np.ndarray, out: np.ndarray) -> None:  # pragma: no cover
            for i in range(events.shape[0]):
                e = np.uint64(events[i])
                o = np.uint64(0)
                for k in range(active.shape[0]):
                    o |= ((e >> np.uint64(active[k])) & np.uint64(1)) << np.uint64(k)
                out[i] = o

        self.build = build
        self.blocks = blocks
        self.combine = combine
        self.frame_codes = frame_codes
        self.compact = compact
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
