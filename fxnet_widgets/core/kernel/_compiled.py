"""Fused per-sample loops of the kernel (numba), compiled on first use, cached on disk.

The loops are exact integer multiply-adds, gathers and comparisons (no rounding, no overflow
mode: those stay in :mod:`..formats`, applied by :func:`.accumulate.post_accumulate`
to the look-up domain):

``dense_sums``  every neuron's exact sum minus ``sum_min`` (bias minus ``sum_min`` plus weight
                times code, in int64), and each neuron's observed min and max, in one pass
                (numpy: product tables gathered by code, two passes per input and neuron);
                the first layer reads the per-input code columns stacked
``lut_apply``   a neuron's codes read from its steps 4-7 look-up table and the
                histogram of its event bits, in one pass (numpy: three)
``stepped_apply`` the same from a table over buckets of ``2**b`` sums (:func:`.steps.stepped`,
                for a layer whose steps 4-7 are monotone in the sum): a bucket without a step
                inside holds one code and events throughout; the others have exact rows
``shifted_counts`` a histogram of ``(sum - origin) >> shift`` (a view's neuron histogram), one pass
``abs_error``   ``|value[code] - float|`` per sample in float64, the numpy path's operations
                fused (a search's output error; numpy's own ``max`` and ``mean`` follow)

``FXNET_KERNEL`` (read at every call) chooses: ``numpy`` the numpy reference path, ``numba``
the compiled loops; unset (auto), the loops run once they are loaded (:func:`kernels`), which
a search does in each worker, since importing numba costs a fixed ~0.1 GB of memory and
~0.5 s that a single emulation of one frame does not win back. The tests run both paths on
the same cases and require identical results.
"""

from __future__ import annotations

import os
import threading
from typing import Any

import numpy as np

__all__ = ["MIN_SAMPLES", "kernels", "load_for", "use_compiled"]

#: below this many samples the numpy path is used (a call's fixed cost dominates)
MIN_SAMPLES = 2048

_LOCK = threading.Lock()
_KERNELS: Any = None


def use_compiled(n: int) -> bool:
    """Whether the compiled loops run for ``n`` samples (see ``FXNET_KERNEL`` above)."""
    if n < MIN_SAMPLES:
        return False
    mode = os.environ.get("FXNET_KERNEL", "").strip().lower()
    if mode == "numpy":
        return False
    return mode == "numba" or _KERNELS is not None


def load_for(n: int) -> None:
    """Load the loops for work on ``n`` samples, unless ``FXNET_KERNEL=numpy`` (a search calls this)."""
    if n >= MIN_SAMPLES and os.environ.get("FXNET_KERNEL", "").strip().lower() != "numpy":
        kernels()


class _Kernels:
    def __init__(self) -> None:
        import numba

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def dense_sums(x: np.ndarray, w: np.ndarray, base: np.ndarray, out: np.ndarray, mins: np.ndarray,
                       maxs: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            # out[j] = base[j] + sum_r w[j, r] * x[r] in int64 (exact: the int64 proof bounds every
            # product and sum), neuron by neuron: multiply-adds over contiguous codes, which the compiler
            # turns into vector instructions (measured 12x a gather from product tables a term)
            n_out, n_in, n = w.shape[0], w.shape[1], x.shape[1]
            if n_in == 3:  # the demo networks' width: one pass a neuron
                x0, x1, x2 = x[0], x[1], x[2]
                for j in range(n_out):
                    row = out[j]
                    w0, w1, w2, b = w[j, 0], w[j, 1], w[j, 2], base[j]
                    lo = np.int64(1) << 62
                    hi = -lo
                    for i in range(n):
                        v = b + w0 * np.int64(x0[i]) + w1 * np.int64(x1[i]) + w2 * np.int64(x2[i])
                        row[i] = v
                        lo = min(lo, v)
                        hi = max(hi, v)
                    mins[j] = lo
                    maxs[j] = hi
                return
            acc = np.empty(n, dtype=np.int64)
            for j in range(n_out):  # a pass an input: each a vector multiply-add
                acc[:] = base[j]
                for r in range(n_in):
                    wr = w[j, r]
                    xr = x[r]
                    for i in range(n):
                        acc[i] += wr * np.int64(xr[i])
                row = out[j]
                lo = np.int64(1) << 62
                hi = -lo
                for i in range(n):
                    v = acc[i]
                    row[i] = v
                    lo = min(lo, v)
                    hi = max(hi, v)
                mins[j] = lo if n else 0
                maxs[j] = hi if n else 0

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def lut_apply(sp: np.ndarray, m0: int, codes_lut: np.ndarray, ev_lut: np.ndarray, out: np.ndarray,
                      hist: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            if ev_lut.shape[0]:
                for i in range(sp.shape[0]):
                    a = np.int64(sp[i]) - m0
                    out[i] = codes_lut[a]
                    e = ev_lut[a]
                    if e:  # bin 0 (no event) is never read
                        hist[e] += 1
            else:
                for i in range(sp.shape[0]):
                    out[i] = codes_lut[np.int64(sp[i]) - m0]

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def stepped_apply(sp: np.ndarray, off: int, b: int, codes_q: np.ndarray, ev_q: np.ndarray,
                          slot: np.ndarray, exact_codes: np.ndarray, exact_ev: np.ndarray, out: np.ndarray,
                          hist: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            # d = sp + off, bucket q = d >> b; ev_q: the bucket's event bits, bit 7 set where a step
            # lies inside: then the code and events are row slot[q] of the exact tables at d's low bits
            mask = (np.int64(1) << b) - 1
            for i in range(sp.shape[0]):
                d = np.int64(sp[i]) + off
                q = d >> b
                e = ev_q[q]
                if e & 128:
                    r = slot[q]
                    out[i] = exact_codes[r, d & mask]
                    e = exact_ev[r, d & mask]
                else:
                    out[i] = codes_q[q]
                if e:  # rare: no histogram store (and its store-to-load stall) on a quiet sample
                    hist[e] += 1

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def minmax(sp: np.ndarray) -> tuple[int, int]:  # pragma: no cover
            lo = np.int64(sp[0])
            hi = lo
            for i in range(1, sp.shape[0]):
                v = np.int64(sp[i])
                if v < lo:
                    lo = v
                elif v > hi:
                    hi = v
            return lo, hi

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def abs_error(codes: np.ndarray, lo: int, values: np.ndarray, ref: np.ndarray,
                      out: np.ndarray) -> None:  # fmt: skip # pragma: no cover
            # |values[code - lo] - ref| per sample: the float64 operations of the numpy path, fused
            for i in range(codes.shape[0]):
                out[i] = abs(values[np.int64(codes[i]) - lo] - ref[i])

        @numba.njit(cache=True, nogil=True, boundscheck=False)
        def shifted_counts(d: np.ndarray, off: int, shift: int, counts: np.ndarray) -> None:  # pragma: no cover
            # counts[(d + off) >> shift] += 1 for the values in 0..len(counts)-1 (the numpy path's bincount, cut);
            # four interleaved part counts: neighbouring pixels often share a bin, and one count's
            # increments would wait on each other (store to load)
            nb = counts.shape[0]
            part = np.zeros((4, nb), dtype=np.int64)
            n = d.shape[0]
            for i in range(0, n - 3, 4):
                for r in range(4):
                    q = (np.int64(d[i + r]) + off) >> shift
                    if 0 <= q < nb:
                        part[r, q] += 1
            for i in range(n - n % 4, n):
                q = (np.int64(d[i]) + off) >> shift
                if 0 <= q < nb:
                    part[0, q] += 1
            for q in range(nb):
                counts[q] += part[0, q] + part[1, q] + part[2, q] + part[3, q]

        self.shifted_counts = shifted_counts
        self.abs_error = abs_error
        self.dense_sums = dense_sums
        self.lut_apply = lut_apply
        self.stepped_apply = stepped_apply
        self.minmax = minmax


def kernels() -> _Kernels:
    """The compiled loops (imported and compiled on first use)."""
    global _KERNELS
    with _LOCK:
        if _KERNELS is None:
            _KERNELS = _Kernels()
        return _KERNELS
