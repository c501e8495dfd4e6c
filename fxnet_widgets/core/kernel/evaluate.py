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

from .. import formats
from ..formats import signed_range
from ..network import as_codes
from . import _compiled
from .accumulate import post_accumulate, smallest_int
from .caches import DOMAIN_CACHE, INPUT_CACHE, MONOTONE_CACHE
from .layers import DATA_EVENTS, IntegerLayer

__all__ = ["Prepared", "prepare", "layer_sums", "sums_and_bounds", "LayerOut", "run_layer", "frozen",
           "Stepped", "stepped", "expand"]


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
_LUT_MAX = 1 << 21
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


def _event_bits(out: dict[str, Any], size: int) -> np.ndarray:
    ev = np.zeros(size, dtype=np.uint8)
    for bit, name in enumerate(DATA_EVENTS):
        if out[name] is not None:
            ev |= out[name].astype(np.uint8) << np.uint8(bit)
    return ev


#: per event (DATA_EVENTS order), the histogram bins of event bits that hold it
_BINS_WITH = tuple(tuple(c for c in range(8) if c >> bit & 1) for bit in range(len(DATA_EVENTS)))


def _add_hist(counts: dict[str, np.ndarray], j: int, hist: np.ndarray) -> None:
    """Add neuron ``j``'s samples by event bits (an 8-bin histogram) to the per-event counts."""
    h = hist.tolist()
    if h[1:] == [0] * 7:  # no event: the common case
        return
    for name, bins in zip(DATA_EVENTS, _BINS_WITH):
        counts[name][j] += sum(h[c] for c in bins)


def _monotone(table: np.ndarray) -> bool:
    """Whether the (read-only, shared) activation table never decreases, checked once per table."""
    held, flag = MONOTONE_CACHE.get(id(table), lambda: (table, bool(np.all(table[1:] >= table[:-1]))))
    return bool(flag) if held is table else bool(np.all(table[1:] >= table[:-1]))


@dataclass(frozen=True, eq=False)
class Stepped:
    """Steps 4-7 of one layer over the sums ``[u0, u1]`` in buckets of ``2**b`` sums (see :func:`stepped`)."""

    u0: int
    b: int
    codes_q: np.ndarray  # per bucket, the code it holds throughout (where it has no step inside)
    ev_q: np.ndarray  # per bucket, its event bits; 128 where a step lies inside
    slot: np.ndarray  # per bucket, its row of the exact tables (-1: none)
    exact_codes: np.ndarray  # (buckets with a step, 2**b): the code of each of their sums
    exact_ev: np.ndarray  # and its event bits


_STEPPED_MIN_SPAN = 1 << 13  # below this many sums one look-up table over them all is as cheap
_EXPAND_MAX = _LUT_MAX  # longer bucketed tables are read by buckets, not expanded


def stepped(layer: IntegerLayer, u0: int, u1: int, code_dt: Any) -> Stepped | None:
    """Steps 4-7 over the sums ``[u0, u1]``, exact, from far fewer evaluations than sums (None: no gain).

    For a layer whose steps 4-7 are monotone on ``[u0, u1]`` (no sum there overflows the
    accumulator, and the table never decreases; the caller checks): the code, ``table_low`` and
    ``table_high`` are then monotone in the sum, so a bucket whose first sum and the next bucket's
    agree on all three agrees throughout. :func:`.accumulate.post_accumulate` runs on every
    bucket's first sum and on every sum of the buckets with a step inside, no others. The
    bucket width ``2**b`` is about ``sqrt(span / steps)`` (a code range of ``c`` values has at
    most ``c + 1`` steps), which makes the two evaluation counts alike.
    """
    span = u1 - u0 + 1
    steps = max(1, min(span, layer.code_max - layer.code_min + 3))
    b = ((span // steps).bit_length() - 1) // 2
    if b <= 0:
        return None
    nb = ((span - 1) >> b) + 1
    # every bucket's first sum, and u1 after the last (a step just at the next bucket's start only
    # sends this bucket to the exact rows)
    pts = u0 + (np.arange(nb + 1, dtype=np.int64) << np.int64(b))
    pts[nb] = u1
    out = post_accumulate(layer, pts, u0, u1)
    c, ev = out["codes"], _event_bits(out, nb + 1)
    step = (c[:nb] != c[1:]) | (ev[:nb] != ev[1:])
    ev_q = ev[:nb].copy()
    ev_q[step] = 128
    rows = np.flatnonzero(step)
    slot = np.full(nb, -1, dtype=np.int32)
    slot[rows] = np.arange(rows.size, dtype=np.int32)
    w = 1 << b
    # the sums of the step buckets (the last bucket's beyond u1 repeat u1: never read)
    sums = np.minimum((rows.astype(np.int64) << np.int64(b))[:, None] + (u0 + np.arange(w, dtype=np.int64)), u1)
    if rows.size:
        ex = post_accumulate(layer, sums.reshape(-1), u0, u1)
        exact_codes = np.ascontiguousarray(ex["codes"], dtype=code_dt).reshape(rows.size, w)
        exact_ev = _event_bits(ex, sums.size).reshape(rows.size, w)
    else:
        exact_codes, exact_ev = np.zeros((0, w), dtype=code_dt), np.zeros((0, w), dtype=np.uint8)
    return Stepped(u0, b, np.ascontiguousarray(c[:nb], dtype=code_dt), ev_q, slot, exact_codes, exact_ev)


def expand(t: Stepped) -> tuple[np.ndarray, np.ndarray]:
    """The look-up tables a :class:`Stepped` stands for: per sum from ``t.u0`` on, its code and its
    event bits (empty where no sum has an event); a bucket's repeated values, then the exact rows.
    """
    w, nb = 1 << t.b, t.codes_q.shape[0]
    rows = np.flatnonzero(t.slot >= 0)
    codes = np.empty((nb, w), dtype=t.codes_q.dtype)
    codes[...] = t.codes_q[:, None]
    codes[rows] = t.exact_codes
    if not (np.any(t.ev_q & 127) or t.exact_ev.any()):
        return codes.reshape(-1), np.zeros(0, dtype=np.uint8)
    ev = np.empty((nb, w), dtype=np.uint8)
    ev[...] = (t.ev_q & 127)[:, None]
    ev[rows] = t.exact_ev
    return codes.reshape(-1), ev.reshape(-1)


def _monotone_on(layer: IntegerLayer, u0: int, u1: int) -> bool:
    """Whether steps 4-7 are monotone in the sum on ``[u0, u1]`` (no overflow there, a table that never decreases)."""
    alo, ahi = signed_range(layer.plan.acc_bits)
    return alo <= u0 and u1 <= ahi and (layer.table is None or _monotone(layer.table))


def _layer_stepped(layer: IntegerLayer, ms: list[tuple[int, int]], code_dt: Any) -> Stepped | None:
    """One :func:`stepped` over the union of the layer's sums on the data (every neuron shares the
    layer's steps 4-7), where it is exact and saves work; None: the other paths."""
    u0 = min(lo + m0 for lo, (m0, _) in zip(layer.sum_min, ms))
    u1 = max(lo + m1 for lo, (_, m1) in zip(layer.sum_min, ms))
    if u1 - u0 + 1 < _STEPPED_MIN_SPAN or not _monotone_on(layer, u0, u1):
        return None
    return stepped(layer, u0, u1, code_dt)


_MAX_PIECES = 64  # sums wrapping round the accumulator more often than this: the other paths


def _acc_pieces(layer: IntegerLayer, u0: int, u1: int) -> list[tuple[int, int, int, int]] | None:
    """``[u0, u1]`` cut where the accumulator value s_A stops following the sum: ``(p0, p1, a0, a1)``
    per piece, s_A running from ``a0`` (at ``p0``) to ``a1`` (at ``p1``) one step a sum, or holding
    one value (``a0 == a1``) where a saturated accumulator holds its end. s_A at the ends comes
    from :mod:`..formats` (wrap and saturate are written there only). None: too many pieces.
    """
    p = layer.plan
    alo, ahi = signed_range(p.acc_bits)
    if alo <= u0 and u1 <= ahi:
        return [(u0, u1, u0, u1)]
    cuts = [u0]
    if p.acc_overflow == "wrap":  # the accumulator wraps at its ends: a new piece at every turn
        period = 1 << p.acc_bits
        k0, k1 = (u0 - alo) // period, (u1 - alo) // period
        if k1 - k0 + 1 > _MAX_PIECES:
            return None
        cuts += [alo + k * period for k in range(k0 + 1, k1 + 1)]
    else:  # saturate: constant below and above the range
        cuts += [c for c in (alo, ahi + 1) if u0 < c <= u1]
    ends = [(a, b - 1) for a, b in zip(cuts, cuts[1:] + [u1 + 1])]
    flat = np.array([v for e in ends for v in e], dtype=np.int64)
    acc = formats.wrap(flat, p.acc_bits) if p.acc_overflow == "wrap" else formats.saturate(flat, p.acc_bits)
    pieces = [(a, b, int(acc[2 * i]), int(acc[2 * i + 1])) for i, (a, b) in enumerate(ends)]
    for p0, p1, a0, a1 in pieces:  # each piece one shifted run or one held value
        assert a1 - a0 == p1 - p0 or a0 == a1, (p0, p1, a0, a1)
    return pieces


def _cached_tables(layer: IntegerLayer, u0: int, u1: int, code_dt: Any) -> tuple[np.ndarray, np.ndarray] | None:
    """:func:`layer_tables`, kept by the fields steps 4-7 read (the layer's plan, activation, input
    format, shift, address and output formats, its table by identity, held) and the range."""
    table = layer.table
    key = (layer.plan, layer.activation, layer.inputs, layer.shift, layer.address, layer.output,
           None if table is None else id(table), u0, u1, np.dtype(code_dt).str)  # fmt: skip
    # (shared by every reader of the cache, which only reads them; left writable so the compiled
    # look-up keeps one signature for all its tables)
    held, value = DOMAIN_CACHE.get(key, lambda: (table, layer_tables(layer, u0, u1, code_dt)))
    return value if held is table else layer_tables(layer, u0, u1, code_dt)


def layer_tables(layer: IntegerLayer, u0: int, u1: int, code_dt: Any) -> tuple[np.ndarray, np.ndarray] | None:
    """The codes and event bits (empty: none) of steps 4-7 for every sum in ``[u0, u1]``, the values of
    :func:`.accumulate.post_accumulate` on each, from far fewer evaluations (None: not applicable).

    For a layer whose table never decreases (or that has none): on accumulator values inside the
    accumulator's range steps 5-7 are monotone, so :func:`stepped` evaluates them over the values
    the sums reach; the sums are cut into pieces on which s_A runs one step a sum or holds one
    value (:func:`_acc_pieces`); each piece's codes are a slice of those (or one value), and the
    pieces where s_A differs from the sum carry the ``acc_overflow`` bit.
    """
    if (layer.table is not None and not _monotone(layer.table)) or u1 - u0 + 1 > _EXPAND_MAX:
        return None
    pieces = _acc_pieces(layer, u0, u1)
    if pieces is None:
        return None
    v0, v1 = min(pc[2] for pc in pieces), max(pc[3] for pc in pieces)  # the accumulator values reached
    t = stepped(layer, v0, v1, code_dt)
    if t is not None:
        vc, ve = expand(t)
    else:
        out = post_accumulate(layer, np.arange(v0, v1 + 1, dtype=np.int64), v0, v1)
        vc, ve = np.ascontiguousarray(out["codes"], dtype=code_dt), _event_bits(out, v1 - v0 + 1)
        if not ve.any():
            ve = np.zeros(0, dtype=np.uint8)
    span = u1 - u0 + 1
    if len(pieces) == 1 and pieces[0][2] == u0 and pieces[0][3] == u1:  # s_A is the sum throughout
        return vc[:span], ve[:span]
    codes = np.empty(span, dtype=code_dt)
    ev = np.zeros(span, dtype=np.uint8)
    for p0, p1, a0, a1 in pieces:
        dst = slice(p0 - u0, p1 - u0 + 1)
        src = slice(a0 - v0, a1 - v0 + 1) if a1 - a0 == p1 - p0 else a0 - v0  # a run, or one held value
        codes[dst] = vc[src]
        if ve.shape[0]:
            ev[dst] = ve[src]
        if not (p0 == a0 and p1 == a1):
            ev[dst] |= np.uint8(1 << DATA_EVENTS.index("acc_overflow"))
    return codes, ev


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


def _acc_table(layer: IntegerLayer, lo: int, m0: int, m1: int) -> np.ndarray:
    """s_A of the sums ``lo + m0 .. lo + m1``, indexed by the offset sum (entries below ``m0`` never read)."""
    acc = post_accumulate(layer, np.arange(lo + m0, lo + m1 + 1, dtype=np.int64), lo + m0, lo + m1)["acc"]
    full = np.empty(m0 + acc.shape[0], dtype=acc.dtype)
    full[m0:] = acc
    return full


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
        if g1 - g0 <= min(2 * (u1 - u0) + (1 << 16), _EXPAND_MAX - 1):  # not much more: all, for other data too
            u0, u1 = g0, g1
        lt = _cached_tables(layer, u0, u1, code_dt)
        st = _layer_stepped(layer, ms, code_dt) if lt is None else None
    shared = _shared_domain(layer, ms, n, kern is not None) if st is None and lt is None else None
    alo, ahi = signed_range(layer.plan.acc_bits)
    # expanded into plain look-up tables where they are not too long: a gather a sample is about a
    # third of a bucket look-up's time, and expanding costs about one byte written per sum
    luts = expand(st) if st is not None and ((st.codes_q.shape[0] << st.b) <= _EXPAND_MAX) else None
    for j, sp in enumerate(shifted):
        lo = layer.sum_min[j]
        m0, m1 = ms[j]
        if n:
            obs_min[j], obs_max[j] = lo + m0, lo + m1
        if lt is not None:
            assert kern is not None
            seen = np.zeros(8, dtype=np.int64)  # samples by event bits
            kern.lut_apply(sp, u0 - lo, lt[0], lt[1], codes[j], seen)
            _add_hist(counts, j, seen)
            if alo <= lo + m0 and lo + m1 <= ahi:
                acc_direct.append(None)  # no overflow on the data: s_A is the exact sum
            else:  # s_A over this neuron's domain, made only if s_A is read
                acc_direct.append((functools.partial(_acc_table, layer, lo, m0, m1), sp))
            continue
        span = m1 - m0 + 1
        wide = span >= max(_COARSE_MIN_SPAN, n // 2)  # an exact look-up table would cost about a pass per sample
        own = None
        if st is None and kern is not None and wide and _monotone_on(layer, lo + m0, lo + m1):
            own = stepped(layer, lo + m0, lo + m1, code_dt)  # this neuron alone (another one overflows)
        if st is not None or own is not None:
            t = st if st is not None else own
            assert t is not None and kern is not None
            seen = np.zeros(8, dtype=np.int64)  # samples by event bits
            if t is st and luts is not None:  # the expanded tables: one gather a sample
                kern.lut_apply(sp, t.u0 - lo, luts[0], luts[1], codes[j], seen)
            else:
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

            def lut(v: np.ndarray, dt: Any = None, m0: int = m0) -> np.ndarray:
                # indexed by sp directly: entries below m0 are never read
                full = np.empty(m0 + v.shape[0], dtype=v.dtype if dt is None else dt)
                full[m0:] = v
                return full

            acc_lut = out["acc"]
            changed = out["acc_overflow"] is not None
            acc_direct.append((lut(np.asarray(acc_lut)), sp) if changed else None)
            flags = [out[k] for k in DATA_EVENTS]
            ev = None
            if any(f is not None and f.any() for f in flags):
                ev = np.zeros(span, dtype=np.uint8)
                for bit, f in enumerate(flags):
                    if f is not None:
                        ev |= f.astype(np.uint8) << np.uint8(bit)
            hist: np.ndarray | None = None
            if kern is not None:  # one fused pass: codes and the event histogram
                hist = np.zeros(8, dtype=np.int64)
                ev_lut = ev if ev is not None else np.zeros(0, dtype=np.uint8)
                kern.lut_apply(sp, m0, np.ascontiguousarray(out["codes"], dtype=code_dt), ev_lut, codes[j], hist)
            else:
                gather(lut(out["codes"], code_dt), sp, codes[j])
                hist = _bincount8(lut(ev), sp) if ev is not None else None
            if ev is not None:
                assert hist is not None
                for bit, name in enumerate(DATA_EVENTS):
                    counts[name][j] = int(sum(int(hist[c]) for c in range(8) if c >> bit & 1))
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
