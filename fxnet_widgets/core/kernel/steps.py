"""Steps 4-7 over ranges of sums, from few evaluations: the compiled path's per-layer tables.

Every neuron of a layer shares the layer's steps 4-7 (:func:`.accumulate.post_accumulate` is a
function of the sum alone for one layer's plan), so one table over a range of sums serves them
all. On accumulator values inside the accumulator's range, and for a table that never decreases,
the code and the ``table_low``/``table_high`` events are monotone in the value: :func:`stepped`
evaluates buckets of sums at their ends and only the buckets with a step inside throughout, and
:func:`layer_tables` adds the accumulator's wrap turns or saturated ends piece by piece. Rounding,
wrap and saturate stay in :mod:`..formats` (only the pieces' ends are evaluated there).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import formats
from ..formats import signed_range
from .accumulate import post_accumulate
from .caches import DOMAIN_CACHE, MONOTONE_CACHE
from .layers import DATA_EVENTS, IntegerLayer

__all__ = ["LUT_MAX", "EXPAND_MAX", "STEPPED_MIN_SPAN", "event_bits", "monotone", "monotone_on", "Stepped",
           "stepped", "expand", "acc_pieces", "layer_tables", "cached_tables"]

LUT_MAX = 1 << 21  # the longest look-up table over sums the kernel makes


def event_bits(out: dict[str, Any], size: int) -> np.ndarray:
    """:func:`.accumulate.post_accumulate`'s event flags as one byte a sum (bit k: ``DATA_EVENTS[k]``)."""
    ev = np.zeros(size, dtype=np.uint8)
    for bit, name in enumerate(DATA_EVENTS):
        if out[name] is not None:
            ev |= out[name].astype(np.uint8) << np.uint8(bit)
    return ev


def monotone(table: np.ndarray) -> bool:
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


STEPPED_MIN_SPAN = 1 << 13  # below this many sums one look-up table over them all is as cheap
EXPAND_MAX = LUT_MAX  # longer bucketed tables are read by buckets, not expanded


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
    c, ev = out["codes"], event_bits(out, nb + 1)
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
        exact_ev = event_bits(ex, sums.size).reshape(rows.size, w)
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


def monotone_on(layer: IntegerLayer, u0: int, u1: int) -> bool:
    """Whether steps 4-7 are monotone in the sum on ``[u0, u1]`` (no overflow there, a table that never decreases)."""
    alo, ahi = signed_range(layer.plan.acc_bits)
    return alo <= u0 and u1 <= ahi and (layer.table is None or monotone(layer.table))


MAX_PIECES = 64  # sums wrapping round the accumulator more often than this: the other paths


def acc_pieces(layer: IntegerLayer, u0: int, u1: int) -> list[tuple[int, int, int, int]] | None:
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
        if k1 - k0 + 1 > MAX_PIECES:
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


def cached_tables(layer: IntegerLayer, u0: int, u1: int, code_dt: Any) -> tuple[np.ndarray, np.ndarray] | None:
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
    value (:func:`acc_pieces`); each piece's codes are a slice of those (or one value), and the
    pieces where s_A differs from the sum carry the ``acc_overflow`` bit.
    """
    if (layer.table is not None and not monotone(layer.table)) or u1 - u0 + 1 > EXPAND_MAX:
        return None
    pieces = acc_pieces(layer, u0, u1)
    if pieces is None:
        return None
    v0, v1 = min(pc[2] for pc in pieces), max(pc[3] for pc in pieces)  # the accumulator values reached
    t = stepped(layer, v0, v1, code_dt)
    if t is not None:
        vc, ve = expand(t)
    else:
        out = post_accumulate(layer, np.arange(v0, v1 + 1, dtype=np.int64), v0, v1)
        vc, ve = np.ascontiguousarray(out["codes"], dtype=code_dt), event_bits(out, v1 - v0 + 1)
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
