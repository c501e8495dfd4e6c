"""The fast evaluation paths: the per-image decomposition, the exact sums, one layer's run.

* the exact sum ``s`` is a sum of integer *product tables* gathered by input code
  (``T_i[u] = q_w,i * u``, with the bias folded into the first); for 8-bit inputs two
  inputs share one 65536-entry table indexed by ``u0 << 8 | u1``;
* sums are offset by the lower end of their interval, held in the smallest dtype the
  interval analysis allows, and all neurons of a layer are processed as one block;
* steps 4-7 run once per distinct sum through a look-up table when that is cheaper
  than running them per sample (the same function, :func:`.accumulate.post_accumulate`).
"""

from __future__ import annotations

import functools
import hashlib
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..formats import signed_range
from ..network import as_codes
from . import _compiled, steps
from .accumulate import post_accumulate, smallest_int
from .caches import INPUT_CACHE
from .layers import DATA_EVENTS, IntegerLayer
from .steps import LUT_MAX as _LUT_MAX
from .steps import event_bits

__all__ = ["Prepared", "prepare", "layer_sums", "sums_and_bounds", "LayerOut", "run_layer", "frozen"]


@dataclass(frozen=True, eq=False)
class Prepared:
    key: str
    flat: np.ndarray  # N x n_in original codes (validated)
    shape: tuple[int, ...] | None
    columns: tuple[np.ndarray, ...]  # contiguous per-input codes, smallest unsigned dtype
    pairs: tuple[tuple[int, int, np.ndarray], ...]  # (i, j, index = u_i << bits | u_j)
    singles: tuple[int, ...]
    n: int
    bits: int = 0  # the input width the codes were checked against


def _input_key(arr: np.ndarray, bits: int, n_in: int) -> str:
    h = hashlib.blake2b(digest_size=16)
    h.update(f"{arr.shape}|{arr.dtype.str}|{bits}|{n_in}|".encode())
    h.update(np.ascontiguousarray(arr).data)
    return h.hexdigest()


_PAIR_MIN_SAMPLES = 4096


def prepare(codes: Any, bits: int, n_in: int) -> Prepared:
    arr = np.asarray(codes)
    if arr.dtype == np.bool_ or arr.dtype.kind not in "iu":
        as_codes(arr, bits, n_in)  # raises the documented TypeError
    key = _input_key(arr, bits, n_in)

    def make() -> Prepared:
        flat, shape = as_codes(arr, bits, n_in)
        cdt = np.uint8 if bits <= 8 else np.uint16
        cols = tuple(np.ascontiguousarray(flat[:, i]).astype(cdt, copy=False) for i in range(n_in))
        pairs = []
        singles = list(range(n_in))
        if bits <= 8 and n_in >= 2 and flat.shape[0] >= _PAIR_MIN_SAMPLES:
            singles = []
            for i in range(0, n_in - 1, 2):
                idx = cols[i].astype(np.uint16)
                idx <<= np.uint16(bits)
                idx |= cols[i + 1]
                pairs.append((i, i + 1, idx))
            if n_in % 2:
                singles.append(n_in - 1)
        if flat.base is None:
            flat.setflags(write=False)
        return Prepared(key, flat, shape, cols, tuple(pairs), tuple(singles), int(flat.shape[0]), bits)

    return INPUT_CACHE.get(key, make)


# The exact sums are offset by the lower end of their interval (folded into the
# first product table), so they are non-negative and index the per-neuron
# look-up table of steps 4-7 directly.
_LUT_FRACTION = 1.0  # a table over more sums than samples costs more than it saves


_CHUNK = 1 << 20  # samples per gather: numpy's take copies a small-dtype index to intp (8 bytes a sample)


def gather(table: np.ndarray, index: np.ndarray, out: np.ndarray | None = None, add: bool = False) -> np.ndarray:
    """``table[index]`` (into ``out``, or added to it), chunk by chunk: no index-sized temporaries."""
    n = index.shape[0]
    if out is None:
        out = np.empty(n, dtype=table.dtype)
    for a in range(0, n, _CHUNK):
        b = min(a + _CHUNK, n)
        if add:
            out[a:b] += table.take(index[a:b])
        else:
            out[a:b] = table.take(index[a:b])
    return out


def _bincount8(table: np.ndarray, index: np.ndarray) -> np.ndarray:
    """``bincount(table[index], minlength=8)``, chunk by chunk."""
    hist = np.zeros(8, dtype=np.int64)
    for a in range(0, index.shape[0], _CHUNK):
        hist += np.bincount(table.take(index[a : a + _CHUNK]), minlength=8)[:8]
    return hist


def _offset_dtype(span: int) -> type:
    return np.int32 if span < (1 << 31) else np.int64


def layer_sums(
    layer: IntegerLayer, prep: Prepared | None, prev_codes: np.ndarray | None, bits: int
) -> list[np.ndarray]:
    """Per neuron, the exact sum minus ``sum_min`` (1-D arrays, non-negative)."""
    sums = []
    q_w = layer.q_w
    if prev_codes is None:
        assert prep is not None
        inputs = prep.columns
        u = np.arange(1 << bits, dtype=np.int64)
        n = prep.n
    else:
        inputs = tuple(prev_codes)
        u = np.arange(layer.inputs.lo, layer.inputs.hi + 1, dtype=np.int64)
        n = prev_codes.shape[1]
    span_in = len(u)
    use_tables = span_in * layer.n_in <= (1 << 22) and (n >= 2 * span_in or n >= 65536)
    if not use_tables:
        mat = np.stack(inputs, axis=1).astype(np.int64) if inputs else np.zeros((n, layer.n_in), np.int64)
        s = mat @ q_w.T + layer.q_b[None, :]
        for j in range(layer.n_out):
            lo, hi = layer.sum_min[j], layer.sum_max[j]
            sums.append((s[:, j] - np.int64(lo)).astype(_offset_dtype(hi - lo), copy=False))
        return sums
    off = 0 if prev_codes is None else layer.inputs.lo
    pairs = prep.pairs if prev_codes is None and prep is not None else ()
    singles = prep.singles if prev_codes is None and prep is not None else tuple(range(layer.n_in))
    for j in range(layer.n_out):
        lo, hi = layer.sum_min[j], layer.sum_max[j]
        dt = _offset_dtype(hi - lo)
        base = int(layer.q_b[j]) - lo
        acc = None
        for i, k, idx in pairs:
            tab = (u[:, None] * q_w[j, i] + u[None, :] * q_w[j, k]).reshape(-1)
            if acc is None:
                tab = tab + base
            acc = gather(tab.astype(dt), idx, acc, add=acc is not None)
        for i in singles:
            tab = u * q_w[j, i]
            if acc is None:
                tab = tab + base
            col = inputs[i]
            if off > 0:  # indexed by the code itself: no int64 copy of the codes (8 bytes a sample)
                tab = np.concatenate((np.zeros(off, dtype=tab.dtype), tab))
            elif off:
                col = col.astype(np.int64) - off
            acc = gather(tab.astype(dt), col, acc, add=acc is not None)
        assert acc is not None
        sums.append(acc)
    return sums


Bounds = tuple[np.ndarray, np.ndarray]  # per neuron, the min and max of the offset sums on the data


def _dense_compiled(layer: IntegerLayer, prev_codes: np.ndarray) -> tuple[list[np.ndarray], Bounds] | None:
    """Layer sums from the previous layer's codes in one compiled pass (None: numpy is used)."""
    if prev_codes.shape[0] != layer.n_in:
        return None
    base = layer.q_b - np.array(layer.sum_min, dtype=np.int64)  # the sums offset by their lower end
    width = max(hi - lo for lo, hi in zip(layer.sum_min, layer.sum_max))
    n = prev_codes.shape[1]
    out: np.ndarray = np.empty((layer.n_out, n), dtype=_offset_dtype(width))
    mins = np.empty(layer.n_out, dtype=np.int64)
    maxs = np.empty(layer.n_out, dtype=np.int64)
    w = np.ascontiguousarray(layer.q_w, dtype=np.int64)
    _compiled.kernels().dense_sums(np.ascontiguousarray(prev_codes), w, base, out, mins, maxs)
    return list(out), (mins, maxs)


def sums_and_bounds(
    layer: IntegerLayer, prep: Prepared | None, prev_codes: np.ndarray | None, bits: int
) -> tuple[list[np.ndarray], Bounds]:
    """:func:`layer_sums` and, per neuron, their min and max on the data (compiled where it runs)."""
    n = prep.n if prev_codes is None and prep is not None else (prev_codes.shape[1] if prev_codes is not None else 0)
    if n and _compiled.use_compiled(n):
        # the first layer reads the per-input code columns, stacked (n_in, N): one pass for every neuron
        x = prev_codes if prev_codes is not None else np.stack(prep.columns) if prep is not None else None
        done = _dense_compiled(layer, x) if x is not None else None
        if done is not None:
            return done
    sums = layer_sums(layer, prep, prev_codes, bits)
    mins = np.zeros(layer.n_out, dtype=np.int64)
    maxs = np.zeros(layer.n_out, dtype=np.int64)
    if n:
        kern = _compiled.kernels() if _compiled.use_compiled(n) else None
        for j, sp in enumerate(sums):
            mins[j], maxs[j] = kern.minmax(sp) if kern is not None else (int(sp.min()), int(sp.max()))
    return sums, (mins, maxs)


def frozen(arrays: list[np.ndarray]) -> list[np.ndarray]:
    for a in arrays:
        a.setflags(write=False)
    return arrays


class LayerOut:
    """One layer's outputs, neurons along the first axis (lazy where it pays)."""

    def __init__(self, layer: IntegerLayer, shifted: list[np.ndarray], acc_direct: list[Any],
                 codes: np.ndarray, events: dict[str, np.ndarray],
                 observed: tuple[np.ndarray, np.ndarray]) -> None:
        self.layer = layer
        self._shifted = shifted  # exact sum minus sum_min, per neuron
        # s_A where it differs from the exact sum (an array, or a look-up table and its
        # indices, gathered only when s_A is read), else None
        self._acc_direct = acc_direct
        self.codes = codes  # (n_out, N)
        self.events = events
        self._acc: np.ndarray | None = None
        self.observed = observed  # per neuron, the min and max exact sum on the data

    @property
    def acc(self) -> np.ndarray:
        """s_A, (n_out, N)."""
        if self._acc is None:
            L = self.layer
            alo, ahi = signed_range(L.plan.acc_bits)
            n = self.codes.shape[1]
            dtype = smallest_int(min(min(L.sum_min), alo), max(max(L.sum_max), ahi))
            out: np.ndarray = np.empty((L.n_out, n), dtype=dtype)
            for j in range(L.n_out):
                direct = self._acc_direct[j]
                if isinstance(direct, tuple):  # (s_A over the look-up domain, indices): gathered on first use
                    table = direct[0]() if callable(direct[0]) else direct[0]  # the table itself made on first use
                    gather(table, direct[1], out[j])
                elif direct is not None:
                    out[j] = direct
                else:
                    np.add(self._shifted[j], np.int64(L.sum_min[j]), out=out[j], casting="unsafe")
            out.setflags(write=False)
            self._acc = out
        return self._acc


_COARSE_MIN_SPAN = 1 << 13  # below this many distinct sums the exact look-up table is cheap enough


#: per event (DATA_EVENTS order), the histogram bins of event bits that hold it
_BINS_WITH = tuple(tuple(c for c in range(8) if c >> bit & 1) for bit in range(len(DATA_EVENTS)))


def _add_hist(counts: dict[str, np.ndarray], j: int, hist: np.ndarray) -> None:
    """Add neuron ``j``'s samples by event bits (an 8-bin histogram) to the per-event counts."""
    h = hist.tolist()
    if h[1:] == [0] * 7:  # no event: the common case
        return
    for name, bins in zip(DATA_EVENTS, _BINS_WITH):
        counts[name][j] += sum(h[c] for c in bins)


def _lut_fits(m0: int, m1: int, n: int) -> bool:
    """Whether a neuron whose offset sums span ``[m0, m1]`` on ``n`` samples gets an exact look-up table."""
    span = m1 - m0 + 1
    return span <= _LUT_MAX and m1 < _LUT_MAX and span <= _LUT_FRACTION * n + 1024  # m1: the LUT length


def _shared_domain(layer: IntegerLayer, ms: list[tuple[int, int]], n: int,
                   compiled: bool) -> tuple[int, int, dict[str, Any]] | None:  # fmt: skip
    """Steps 4-7 once over the union of the look-up domains of a layer's neurons, when it saves work.

    :func:`.accumulate.post_accumulate` is a function of the sum alone for one layer's plan (every
    neuron shares the accumulator, shift and table), so each neuron's look-up table is a slice of
    one over the union ``[u0, u1]``. Used when at least two neurons take a look-up table and the
    union is smaller than their domains together (they overlap). None: each neuron computes its own.
    """
    doms = []
    for j, (m0, m1) in enumerate(ms):
        wide = m1 - m0 + 1 >= max(_COARSE_MIN_SPAN, n // 2)
        if _lut_fits(m0, m1, n) and not (compiled and wide):  # a wide one takes the bucket path first
            lo = layer.sum_min[j]
            doms.append((lo + m0, lo + m1))
    if len(doms) < 2:
        return None
    u0, u1 = min(d[0] for d in doms), max(d[1] for d in doms)
    if u1 - u0 + 1 >= sum(b - a + 1 for a, b in doms):
        return None
    return u0, u1, post_accumulate(layer, np.arange(u0, u1 + 1, dtype=np.int64), u0, u1)


def _from_offset(v: np.ndarray, m0: int, dt: Any = None) -> np.ndarray:
    """``v`` (values for the offset sums from ``m0`` on) as a table indexed by the offset sum itself
    (entries below ``m0`` never read)."""
    full = np.empty(m0 + v.shape[0], dtype=v.dtype if dt is None else dt)
    full[m0:] = v
    return full


def _acc_table(layer: IntegerLayer, lo: int, m0: int, m1: int) -> np.ndarray:
    """s_A of the sums ``lo + m0 .. lo + m1``, indexed by the offset sum."""
    acc = post_accumulate(layer, np.arange(lo + m0, lo + m1 + 1, dtype=np.int64), lo + m0, lo + m1)["acc"]
    return _from_offset(np.asarray(acc), m0)


def run_layer(layer: IntegerLayer, shifted: list[np.ndarray], bounds: Bounds | None = None) -> LayerOut:
    """Steps 4-7 on the offset sums ``shifted``; ``bounds``: their per-neuron min and max, when known."""
    n = shifted[0].shape[0] if shifted else 0
    kern = _compiled.kernels() if _compiled.use_compiled(n) else None
    code_dt = smallest_int(layer.code_min, layer.code_max)
    if layer.code_min >= 0 and layer.code_max <= 255:
        code_dt = np.uint8
    codes: np.ndarray = np.empty((layer.n_out, n), dtype=code_dt)
    counts = {name: np.zeros(layer.n_out, dtype=np.int64) for name in DATA_EVENTS}
    acc_direct: list[Any] = []
    obs_min = np.zeros(layer.n_out, dtype=np.int64)
    obs_max = np.zeros(layer.n_out, dtype=np.int64)
    # the look-up table of neuron j covers only the sums seen on the data: [lo + m0, lo + m1]
    if bounds is not None and n:
        ms = [(int(a), int(b)) for a, b in zip(bounds[0], bounds[1])]
    else:
        ms = [(int(sp.min()), int(sp.max())) if n else (0, 0) for sp in shifted]
    # compiled: one table of steps 4-7 over the union of the layer's sums on the data (every neuron
    # shares the layer's steps 4-7), from a bucketed evaluation; too long to expand: read by buckets
    lt = st = None
    if kern is not None and n:
        u0 = min(lo + m0 for lo, (m0, _) in zip(layer.sum_min, ms))
        u1 = max(lo + m1 for lo, (_, m1) in zip(layer.sum_min, ms))
        g0, g1 = min(layer.sum_min), max(layer.sum_max)  # every sum the layer can form
        if g1 - g0 <= min(2 * (u1 - u0) + (1 << 16), steps.EXPAND_MAX - 1):  # not much more: all, for other data too
            lt, t0 = steps.cached_tables(layer, g0, g1, code_dt), g0
        else:
            lt, t0 = steps.cached_tables(layer, u0, u1, code_dt), u0
        if lt is None and u1 - u0 + 1 >= steps.STEPPED_MIN_SPAN and steps.monotone_on(layer, u0, u1):
            st = steps.stepped(layer, u0, u1, code_dt)  # longer than can be expanded: read by buckets
    shared = _shared_domain(layer, ms, n, kern is not None) if st is None and lt is None else None
    alo, ahi = signed_range(layer.plan.acc_bits)
    for j, sp in enumerate(shifted):
        lo = layer.sum_min[j]
        m0, m1 = ms[j]
        if n:
            obs_min[j], obs_max[j] = lo + m0, lo + m1
        if lt is not None:
            assert kern is not None
            seen = np.zeros(8, dtype=np.int64)  # samples by event bits
            kern.lut_apply(sp, t0 - lo, lt[0], lt[1], codes[j], seen)
            _add_hist(counts, j, seen)
            if alo <= lo + m0 and lo + m1 <= ahi:
                acc_direct.append(None)  # no overflow on the data: s_A is the exact sum
            else:  # s_A over this neuron's domain, made only if s_A is read
                acc_direct.append((functools.partial(_acc_table, layer, lo, m0, m1), sp))
            continue
        span = m1 - m0 + 1
        wide = span >= max(_COARSE_MIN_SPAN, n // 2)  # an exact look-up table would cost about a pass per sample
        t = st
        if t is None and kern is not None and wide and steps.monotone_on(layer, lo + m0, lo + m1):
            t = steps.stepped(layer, lo + m0, lo + m1, code_dt)  # this neuron alone (another one overflows)
        if t is not None:
            assert kern is not None
            seen = np.zeros(8, dtype=np.int64)  # samples by event bits
            kern.stepped_apply(sp, lo - t.u0, t.b, t.codes_q, t.ev_q, t.slot, t.exact_codes, t.exact_ev,
                               codes[j], seen)  # fmt: skip
            _add_hist(counts, j, seen)
            acc_direct.append(None)  # no overflow on the data: s_A is the exact sum
            continue
        if _lut_fits(m0, m1, n):
            if shared is not None and shared[0] <= lo + m0 and lo + m1 <= shared[1]:
                a = lo + m0 - shared[0]
                out: dict[str, Any] = {k: None if v is None else v[a : a + span] for k, v in shared[2].items()}
                if out["acc_overflow"] is not None and not out["acc_overflow"].any():
                    out["acc_overflow"] = None  # s_A is the exact sum on this neuron's domain
            else:
                dom = np.arange(lo + m0, lo + m1 + 1, dtype=np.int64)
                out = post_accumulate(layer, dom, lo + m0, lo + m1)

            changed = out["acc_overflow"] is not None
            acc_direct.append((_from_offset(np.asarray(out["acc"]), m0), sp) if changed else None)
            bits = event_bits(out, span)
            ev = bits if bits.any() else None
            hist: np.ndarray | None = None
            if kern is not None:  # one fused pass: codes and the event histogram
                hist = np.zeros(8, dtype=np.int64)
                ev_lut = ev if ev is not None else np.zeros(0, dtype=np.uint8)
                kern.lut_apply(sp, m0, np.ascontiguousarray(out["codes"], dtype=code_dt), ev_lut, codes[j], hist)
            else:
                gather(_from_offset(out["codes"], m0, code_dt), sp, codes[j])
                hist = _bincount8(_from_offset(ev, m0), sp) if ev is not None else None
            if ev is not None:
                assert hist is not None
                _add_hist(counts, j, hist)
        else:
            s = sp.astype(np.int64) + np.int64(lo)
            out = post_accumulate(layer, s, lo + m0, lo + m1)
            codes[j] = out["codes"]
            acc_direct.append(out["acc"] if out["acc_overflow"] is not None else None)
            for name in DATA_EVENTS:
                if out[name] is not None:
                    counts[name][j] = int(np.count_nonzero(out[name]))
    events = dict(counts)
    events["weight_clip"] = layer.weight_clip
    events["bias_clip"] = layer.bias_clip
    codes.setflags(write=False)
    return LayerOut(layer, shifted, acc_direct, codes, events, (obs_min, obs_max))
