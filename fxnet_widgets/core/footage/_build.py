"""Building the colour look-up tables (see :mod:`.lookup`): chunked, bounded memory, exact.

Layer 1's exact sums are a product table over the low inputs plus one constant per
combination of the high inputs; later layers are exact integer sums; steps 4-7 come from
:func:`~fxnet_widgets.core.kernel.post_accumulate` applied once to every integer of each
neuron's sum interval (the kernel's own trick) and are then read per colour, either in one
compiled loop (:mod:`._compiled`) or chunk by chunk in numpy.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any

import numpy as np

from ..kernel import IntegerNetwork, build_integer_network, post_accumulate
from ..network import Network
from ..plan import Plan

__all__ = ["USE_COMPILED", "CHUNK_COLOURS", "DOMAIN_MAX", "LOOKUP_EVENTS", "MAX_INDEX_BITS"]

#: build with the compiled loop (numba) when every neuron's sum interval has its table
USE_COMPILED = True
#: colours evaluated together while a table is built
CHUNK_COLOURS = 1 << 17
#: the largest colour cube: 24 bits (three 8-bit inputs)
MAX_INDEX_BITS = 24
#: the per-sample events a table records, per neuron
LOOKUP_EVENTS = ("acc_overflow", "table_low", "table_high")
_EXACT_FLOAT = 1 << 53


def _index_codes(start: int, stop: int, bits: int, n_in: int) -> np.ndarray:
    c = np.arange(start, stop, dtype=np.int64)
    mask = (1 << bits) - 1
    return np.stack([(c >> (bits * (n_in - 1 - i))) & mask for i in range(n_in)], axis=1)


def _check_cube(network: Network) -> int:
    total = network.input_bits * network.n_in
    if total > MAX_INDEX_BITS:
        raise ValueError(
            f"network inputs must total at most {MAX_INDEX_BITS} bits for a colour look-up, not {total} "
            f"({network.n_in} inputs of {network.input_bits} bits)"
        )
    return total


def _layer1_parts(intnet: IntegerNetwork, bits: int, n_in: int) -> tuple[int, np.ndarray, np.ndarray]:
    """Split layer 1's sum into a table over the low inputs and a constant per high combination."""
    L = intnet.layers[0]
    n_low = min(n_in, max(1, 16 // bits))
    n_high = n_in - n_low
    low = _index_codes(0, 1 << (bits * n_low), bits, n_low)  # (2^lowbits, n_low)
    low_sum = low @ L.q_w[:, n_high:].T  # int64 (2^lowbits, n_out)
    high = _index_codes(0, 1 << (bits * n_high), bits, n_high) if n_high else np.zeros((1, 0), np.int64)
    const = high @ L.q_w[:, :n_high].T + L.q_b[None, :]  # (2^highbits, n_out)
    return n_low, np.ascontiguousarray(low_sum.T), np.ascontiguousarray(const.T)


def _exact_in_float(layer: Any) -> bool:
    umax = max(abs(layer.inputs.lo), abs(layer.inputs.hi))
    bound = int(np.abs(layer.q_w).sum(axis=1).max()) * umax + int(np.abs(layer.q_b).max())
    return bound < _EXACT_FLOAT


def _layer_sums(layer: Any, codes: np.ndarray) -> np.ndarray:
    if _exact_in_float(layer):  # every partial sum is an integer below 2^53: float64 adds exactly
        s = layer.q_w.astype(np.float64) @ codes.astype(np.float64)
        s += layer.q_b.astype(np.float64)[:, None]
        return s.astype(np.int64)
    return layer.q_w @ codes.astype(np.int64) + layer.q_b[:, None]


def _uint_for(n_bits: int) -> Any:
    for dt in (np.uint8, np.uint16, np.uint32, np.uint64):
        if n_bits <= np.dtype(dt).itemsize * 8:
            return dt
    raise AssertionError(n_bits)


def _build_fixed(network: Network, plan: Plan, keep_codes: bool, keep_events: bool,
                 progress: Callable[[int, int], None] | None) -> Any:  # fmt: skip
    t0 = time.perf_counter()
    total = _check_cube(network)
    bits, n_in = network.input_bits, network.n_in
    intnet = build_integer_network(network, plan)
    size = 1 << total
    slots = [(li, j, e) for li, L in enumerate(intnet.layers) for j in range(L.n_out) for e in LOOKUP_EVENTS]
    if keep_events and len(slots) > 64:
        raise ValueError(f"network must have at most 21 neurons for a per-neuron event table, not "
                         f"{len(slots) // 3}; pass events=False")  # fmt: skip
    n_low, low_sum, const = _layer1_parts(intnet, bits, n_in)
    low_size = low_sum.shape[1]
    group = max(1, CHUNK_COLOURS // low_size)
    n_out = network.n_out
    decisions = np.empty(size, dtype=np.uint8)
    last = intnet.layers[-1]
    codes_all = np.empty((size, n_out), dtype=np.int32 if last.code_min < -32768 or last.code_max > 32767
                         else np.int16) if keep_codes else None  # fmt: skip
    ev_dt = _uint_for(len(slots)) if keep_events else None
    domains = [_domain_tables(layer) for layer in intnet.layers]
    compiled = USE_COMPILED and all(d is not None for dl in domains for d in dl)
    events = np.zeros(size, dtype=ev_dt) if ev_dt is not None and not compiled else None
    seen_bits = [0] * (len(slots) // 3)
    n_chunks = const.shape[1]
    from . import _compiled

    kern = _compiled.kernels() if USE_COMPILED and all(d is not None for dl in domains for d in dl) else None
    if kern is not None:  # one compiled loop over the colours, same integers, same tables
        flat = _flatten(intnet, domains)
        # event bits only for the events each neuron's sum interval can reach (a superset of those that happen)
        possible = [int(np.bitwise_or.reduce(d[2])) if d is not None and d[2].size else 0 for dl in domains for d in dl]
        reach = [k for k in range(len(slots)) if possible[k // 3] >> (k % 3) & 1]
        pos = np.zeros(len(slots), dtype=np.int64)
        pos[reach] = np.arange(len(reach))
        ev_full = np.zeros(size if keep_events else 1, dtype=_uint_for(max(1, len(reach))))
        seen_arr = np.zeros(len(slots) // 3, dtype=np.uint8)
        dummy = np.zeros((1, n_out), dtype=np.int64)
        low_t, const_t = np.ascontiguousarray(low_sum.T), np.ascontiguousarray(const.T)
        for h0 in range(0, n_chunks, group):
            h1 = min(n_chunks, h0 + group)
            kern.build(low_t, const_t, h0, h1, *flat, intnet.threshold_code or 0, decisions, keep_codes,
                       codes_all if codes_all is not None else dummy, keep_events, ev_full, seen_arr, pos)  # fmt: skip
            if progress is not None:
                progress(h1 * low_size, size)
        seen_bits = [int(v) for v in seen_arr.tolist()]
        h_range: range = range(0)
    else:
        h_range = range(0, n_chunks, group)
    for h0 in h_range:
        h1 = min(n_chunks, h0 + group)
        start, stop = h0 * low_size, h1 * low_size
        s = (low_sum[:, None, :] + const[:, h0:h1, None]).reshape(low_sum.shape[0], -1)
        ev = np.zeros(stop - start, dtype=ev_dt) if ev_dt is not None else None
        base = 0
        codes: np.ndarray = s
        for li, layer in enumerate(intnet.layers):
            if li:
                s = _layer_sums(layer, codes)
            codes, bits_of = _apply_layer(layer, s, domains[li])
            for j, b in enumerate(bits_of):
                if b is not None and ev is not None:
                    seen_bits[base + j] |= int(np.bitwise_or.reduce(b))
                    ev |= b.astype(ev.dtype) << ev.dtype.type(3 * (base + j))
            base += layer.n_out
        if n_out == 1:
            assert intnet.threshold_code is not None
            decisions[start:stop] = codes[0] >= intnet.threshold_code
        else:
            decisions[start:stop] = np.argmax(codes, axis=0)  # ties: the lowest index (step 8)
        if codes_all is not None:
            codes_all[start:stop] = codes.T
        if events is not None and ev is not None:
            events[start:stop] = ev
        if progress is not None:
            progress(stop, size)
    ev_slots: tuple[tuple[int, int, str], ...] = ()
    if keep_events:
        seen = np.array([(seen_bits[k // 3] >> (k % 3)) & 1 for k in range(len(slots))], dtype=bool)
        active = np.flatnonzero(seen)
        ev_slots = tuple(slots[i] for i in active)
        if kern is not None:
            if len(active) == len(reach):  # every reachable event happens: the bits are already compact
                events = ev_full
            else:  # drop the bits of events no colour reaches (renumbered within ev_full's bits)
                events = np.zeros(size, dtype=_uint_for(max(1, len(active))))
                kern.compact(ev_full, pos[active], events)
        else:
            assert events is not None
            events = _compact(events, active)
    return _finish(network, plan, bits, n_in, decisions, codes_all, events, ev_slots, t0)


def _flatten(intnet: IntegerNetwork, domains: list[list[Any]]) -> tuple[np.ndarray, ...]:
    """The integer network as flat arrays for the compiled loop (layers 2.. weights, biases, tables)."""
    sizes = np.array([L.n_out for L in intnet.layers], dtype=np.int64)
    goff = np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64)
    ws, woff, pos = [], [], 0
    for L in intnet.layers:
        woff.append(pos)
        if L.index:
            ws.append(L.q_w.reshape(-1).astype(np.int64))
            pos += L.q_w.size
    weights = np.concatenate(ws) if ws else np.zeros(1, np.int64)
    biases = np.concatenate([L.q_b.astype(np.int64) for L in intnet.layers])
    lo = np.array([d[0] for dl in domains for d in dl], dtype=np.int64)
    lengths = [d[1].shape[0] for dl in domains for d in dl]
    toff = np.concatenate([[0], np.cumsum(lengths)[:-1]]).astype(np.int64)
    narrow = all(d[1].dtype.itemsize <= 2 and d[1].dtype.kind == "i" for dl in domains for d in dl)
    # codes of at most 16 bits: int16 tables are half the memory the loop reads (int32 for unsigned 16-bit codes)
    tab_codes = np.concatenate([d[1].astype(np.int16 if narrow else np.int32) for dl in domains for d in dl])
    tab_bits = np.concatenate([d[2] for dl in domains for d in dl])
    return weights, biases, sizes, np.array(woff, np.int64), goff, lo, toff, tab_codes, tab_bits


def _compact(events: np.ndarray, active: np.ndarray) -> np.ndarray:
    """Keep only the bits of slots that happen, renumbered 0..len(active)-1, in the smallest dtype.

    Done a byte at a time through 256-entry tables (one gather per byte of the mask).
    """
    dt = _uint_for(max(1, len(active)))
    if len(active) and int(active[-1]) == len(active) - 1:  # the active slots are already 0..n-1
        return events.astype(dt) if dt != events.dtype else events
    new_of = {int(old): new for new, old in enumerate(active.tolist())}
    out = np.zeros(events.shape[0], dtype=dt)
    as_bytes = events.view(np.uint8).reshape(events.shape[0], events.dtype.itemsize)
    for k in range(events.dtype.itemsize):
        table = np.zeros(256, dtype=dt)
        for v in range(256):
            table[v] = sum(1 << new_of[8 * k + b] for b in range(8) if v >> b & 1 and 8 * k + b in new_of)
        if table.any():
            out |= table.take(as_bytes[:, k if np.little_endian else events.dtype.itemsize - 1 - k])
    return out


#: a neuron whose exact sums span at most this many integers gets steps 4-7 as a table
DOMAIN_MAX = 1 << 22


def _domain_tables(layer: Any) -> list[tuple[int, np.ndarray, np.ndarray] | None]:
    """Per neuron, steps 4-7 applied once to every integer of its sum interval (the kernel's own trick).

    Returns ``(sum_min, codes over the interval, event bits over the interval)`` (bit 0
    ``acc_overflow``, 1 ``table_low``, 2 ``table_high``), or None for a wide interval.
    """
    out: list[tuple[int, np.ndarray, np.ndarray] | None] = []
    for j in range(layer.n_out):
        lo, hi = int(layer.sum_min[j]), int(layer.sum_max[j])
        if hi - lo + 1 > DOMAIN_MAX:
            out.append(None)
            continue
        r = post_accumulate(layer, np.arange(lo, hi + 1, dtype=np.int64), lo, hi)
        bits = np.zeros(hi - lo + 1, dtype=np.uint8)
        for b, name in enumerate(LOOKUP_EVENTS):
            if r[name] is not None:
                bits |= r[name].astype(np.uint8) << np.uint8(b)
        out.append((lo, np.asarray(r["codes"]), bits))
    return out


def _apply_layer(layer: Any, s: np.ndarray,
                 domains: list[tuple[int, np.ndarray, np.ndarray] | None]) -> tuple[np.ndarray, list[Any]]:  # fmt: skip
    """Codes (n_out, N) and per-neuron event bits (uint8 (N,) or None) of exact sums ``s`` (n_out, N)."""
    if all(d is None for d in domains):
        r = post_accumulate(layer, s)
        bits_of: list[Any] = []
        for j in range(layer.n_out):
            b = None
            for k, name in enumerate(LOOKUP_EVENTS):
                if r[name] is not None:
                    part = r[name][j].astype(np.uint8) << np.uint8(k)
                    b = part if b is None else b | part
            bits_of.append(b)
        return np.asarray(r["codes"]), bits_of
    dt = np.result_type(*[d[1].dtype for d in domains if d is not None])
    codes = np.empty(s.shape, dtype=dt)
    bits_of = []
    for j, d in enumerate(domains):
        if d is None:
            r = post_accumulate(layer, s[j : j + 1])
            codes[j] = r["codes"][0]
            b = np.zeros(s.shape[1], dtype=np.uint8)
            for k, name in enumerate(LOOKUP_EVENTS):
                if r[name] is not None:
                    b |= r[name][0].astype(np.uint8) << np.uint8(k)
            bits_of.append(b)
            continue
        lo, tab_codes, tab_bits = d
        idx = s[j] - np.int64(lo)  # within [0, span): s lies in the proven interval
        np.take(tab_codes, idx, out=codes[j])
        bits_of.append(tab_bits.take(idx) if tab_bits.any() else None)
    return codes, bits_of


def _finish(network: Network, plan: Plan | None, bits: int, n_in: int, decisions: np.ndarray,
            codes: np.ndarray | None, events: np.ndarray | None, slots: tuple[tuple[int, int, str], ...],
            t0: float) -> Any:  # fmt: skip
    from .lookup import ColourLookup

    n_classes = max(2, network.n_out)
    packed = np.packbits(decisions, bitorder="little") if n_classes == 2 and decisions.shape[0] >= 8 else None
    for a in (decisions, packed, codes, events):
        if a is not None:
            a.setflags(write=False)
    return ColourLookup(network, plan, bits, n_in, decisions, packed, codes, events, slots,
                        time.perf_counter() - t0, n_classes)  # fmt: skip


def _build_float(network: Network, progress: Callable[[int, int], None] | None) -> Any:
    """``predict`` + ``decide`` on every colour: float32 chunks, ``predict`` itself near the boundary
    (:mod:`._float_build`)."""
    from ._float_build import build_float_decisions

    t0 = time.perf_counter()
    _check_cube(network)
    with _one_blas_thread():
        decisions, _ = build_float_decisions(network, progress)
    return _finish(network, None, network.input_bits, network.n_in, decisions, None, None, (), t0)


def _one_blas_thread() -> Any:
    """Limit BLAS to one thread while the float table is built, where threadpoolctl is installed.

    The float products are tall and thin (N x 3 by 3 x n): BLAS threads gain nothing there, and
    on a busy machine they wait for each other (measured: 40x slower with 2 threads on 2
    loaded cores). Row results do not depend on the thread count.
    """
    try:
        from threadpoolctl import threadpool_limits  # type: ignore[import-untyped]
    except ImportError:
        import contextlib

        return contextlib.nullcontext()
    return threadpool_limits(limits=1, user_api="blas")
