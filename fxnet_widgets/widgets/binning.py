"""Histogram binning of exact accumulator sums: integer edges, counts, and each session's count cache.

The edges are integers (accumulator LSBs) of a power-of-two width whose first
edge is a multiple of it, so the accumulator range and the table window fall
exactly on edges and the counts outside them equal the kernel's event counts.
"""

from __future__ import annotations

import math
import weakref
from collections import OrderedDict

import numpy as np

from ..core.formats import signed_range
from ..core.kernel import Emulation, IntegerLayer, _compiled
from .results import NeuronResult, layer_kind

__all__ = ["histogram_edges", "table_edges", "exact_sums", "BinCounter", "neuron_results"]

_CHUNK = 1 << 20  # samples per bincount step


def exact_sums(emulation: Emulation, layer: int) -> np.ndarray:
    """The exact sums ``s`` (before the accumulator, N x n_out int64) of one layer.

    Where no accumulator overflow happened, ``s`` equals the kernel's ``s_A``;
    otherwise it differs by the wrap or the clamp (the kernel keeps the exact
    sums: :meth:`~fxnet_widgets.core.kernel.Emulation.neuron_sums`).
    """
    n_out = emulation.integer_network.layers[layer].n_out
    out = np.empty((emulation.n, n_out), dtype=np.int64)
    for j in range(n_out):
        out[:, j] = emulation.neuron_sums(layer, j)
    return out


def table_edges(L: IntegerLayer) -> tuple[int, int]:
    """Sums whose index is not clamped: ``[lo, hi)`` in accumulator LSBs (floor index)."""
    k = L.shift
    if k >= 0:
        return L.index_min << k, (L.index_max + 1) << k
    m = -k
    return -((-L.index_min) >> m), (L.index_max >> m) + 1


def histogram_edges(lo: int, hi: int, marks: tuple[int, ...], bins: int = 64) -> np.ndarray:
    """Integer bin edges (int64, a power-of-two width) over ``[lo, hi]`` and the marks.

    The width is a power of two and the first edge a multiple of it, so any mark
    that is a multiple of the width is exactly an edge.

    >>> histogram_edges(0, 9, (), 4).tolist()
    [0, 4, 8, 12]
    """
    span_lo = min(lo, *marks) if marks else lo
    span_hi = max(hi + 1, *marks) if marks else hi + 1
    width = max(1, span_hi - span_lo)
    shift = max(0, math.ceil(math.log2(width / bins))) if width > bins else 0
    w = 1 << shift
    origin = (span_lo >> shift) << shift
    n = -(-(span_hi - origin) // w)
    return origin + w * np.arange(n + 1, dtype=np.int64)


class BinCounter:
    """Histogram counts of neurons' exact sums, with a small cache owned by one session.

    The kernel hands out the same read-only first-layer sums while the weights
    stay, and the bins often stay too, so counts are kept by (sums array, offset,
    shift, bins) for the ``size`` most recent uses. The cache holds weak
    references: an entry never keeps a sums array alive, and it goes with its session.
    """

    def __init__(self, size: int = 32) -> None:
        self.size = size
        self._cache: OrderedDict[tuple[int, int, int, int], tuple[weakref.ref, np.ndarray]] = OrderedDict()

    def __len__(self) -> int:
        return len(self._cache)

    def counts(self, emulation: Emulation, layer: int, neuron: int, origin: int, shift: int, n_bins: int) -> np.ndarray:
        """Counts of ``(s - origin) >> shift`` over one neuron's exact sums ``s`` (all inside the bins)."""
        d, offset = emulation.neuron_shifted(layer, neuron)
        off = offset - origin  # s - origin = d + off >= 0
        key = (id(d), off, shift, n_bins)
        hit = self._cache.get(key)
        if hit is not None and hit[0]() is d and not d.flags.writeable:
            self._cache.move_to_end(key)
            return hit[1]
        counts = np.zeros(n_bins, dtype=np.int64)
        if _compiled.use_compiled(d.shape[0]):  # one pass, the same counts (FXNET_KERNEL=numpy: below)
            _compiled.kernels().shifted_counts(d, off, shift, counts)
        else:
            for a in range(0, d.shape[0], _CHUNK):  # bincount copies to intp: bounded temporaries on a large frame
                idx = d[a : a + _CHUNK].astype(np.int64)
                if off:
                    idx += np.int64(off)
                if shift:
                    idx >>= shift
                counts += np.bincount(idx, minlength=n_bins)[:n_bins]
        if not d.flags.writeable:  # read-only: the values behind this identity cannot change
            counts.setflags(write=False)
            self._cache[key] = (weakref.ref(d), counts)
            while len(self._cache) > self.size:
                self._cache.popitem(last=False)
        return counts


def neuron_results(emus: list[Emulation], bins: int, counter: BinCounter) -> tuple[NeuronResult, ...]:
    """Per neuron of every layer: events summed over ``emus`` and the histogram of exact sums."""
    intnet = emus[0].integer_network
    out = []
    live = [e for e in emus if e.n]
    for li, L in enumerate(intnet.layers):
        alo, ahi = signed_range(L.plan.acc_bits)
        acc_edges = (alo, ahi + 1)
        t_edges = table_edges(L)
        kind = layer_kind(intnet.network.layers[li].activation)
        for j in range(L.n_out):
            dmin = min(int(e.observed_min[li][j]) for e in live) if live else 0
            dmax = max(int(e.observed_max[li][j]) for e in live) if live else 0
            marks = t_edges
            span = max(t_edges[1], dmax + 1) - min(t_edges[0], dmin)
            if acc_edges[1] - acc_edges[0] <= 4 * span:
                marks = marks + acc_edges
            edges = histogram_edges(dmin, dmax, marks, bins)
            shift = int(edges[1] - edges[0]).bit_length() - 1
            counts = np.zeros(edges.size - 1, dtype=np.int64)
            for e in live:
                counts += counter.counts(e, li, j, int(edges[0]), shift, counts.size)
            ev = {
                name: int(sum(int(e.events[li][name][j]) for e in emus))
                for name in ("acc_overflow", "table_low", "table_high")
            }
            ev["weight_clip"] = int(L.weight_clip[j])
            ev["bias_clip"] = int(L.bias_clip[j])
            out.append(
                NeuronResult(
                    layer=li, neuron=j, label=f"L{li + 1} n{j + 1}", kind=kind, events=ev, edges=edges,
                    counts=counts, acc_frac=L.acc_frac, acc_edges=acc_edges, table_edges=t_edges,
                    safe_acc_bits=int(L.safe_acc_bits[j]), observed_min=dmin, observed_max=dmax,
                )
            )  # fmt: skip
    return tuple(out)
