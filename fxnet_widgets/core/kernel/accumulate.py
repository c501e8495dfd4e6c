"""Steps 4-7 of the contract on exact sums: accumulator, table index, table or output clamp.

One function, :func:`post_accumulate`, used for every sample and for every look-up
table of these steps, so the fast paths compute the same bits. Wrap, saturate and
the index rounding are the ones in :mod:`..formats` (the only place they are written).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import formats
from .caches import NARROW_CACHE
from .layers import IntegerLayer

__all__ = ["post_accumulate", "smallest_int"]


_SIGNED = tuple((dt, int(np.iinfo(dt).min), int(np.iinfo(dt).max)) for dt in (np.int8, np.int16, np.int32))


def smallest_int(lo: int, hi: int) -> type:
    """The narrowest signed integer type holding ``[lo, hi]`` (int64 beyond int32).

    >>> smallest_int(-128, 127).__name__, smallest_int(0, 128).__name__, smallest_int(0, 1 << 40).__name__
    ('int8', 'int16', 'int64')
    """
    for dt, a, b in _SIGNED:
        if a <= lo and hi <= b:
            return dt
    return np.int64


def _narrow_table(layer: IntegerLayer) -> np.ndarray:
    """The layer's (read-only, shared) table in the codes' narrowest type, made once per table."""
    table = layer.table
    assert table is not None
    dt = smallest_int(layer.code_min, layer.code_max)  # holds every entry: the codes are the entries
    held, narrow = NARROW_CACHE.get((id(table), dt), lambda: (table, table.astype(dt)))
    return narrow if held is table else table.astype(dt)


def post_accumulate(layer: IntegerLayer, s: np.ndarray, lo: int | None = None, hi: int | None = None) -> dict[str, Any]:
    """Steps 4-7 of the contract on exact sums ``s`` (any shape, int64).

    ``lo``/``hi`` optionally bound ``s`` (from interval analysis); steps that
    cannot change any value in that bound are skipped. Returns ``acc`` (s_A),
    ``codes`` and boolean arrays ``acc_overflow``, ``table_low``, ``table_high``
    (or None where no event is possible).
    """
    p = layer.plan
    s = np.asarray(s)
    if lo is None:
        lo, hi = (int(s.min()), int(s.max())) if s.size else (0, 0)
    assert hi is not None
    alo, ahi = formats.signed_range(p.acc_bits)
    ov = None
    s_a = s
    if lo < alo or hi > ahi:
        s64 = s.astype(np.int64, copy=False)
        ov = (s64 < alo) | (s64 > ahi)
        if p.acc_overflow == "wrap":  # written once, in formats (looked up at call time)
            s_a = formats.wrap(s64, p.acc_bits)
            lo, hi = alo, ahi
        else:
            s_a = formats.saturate(s64, p.acc_bits)
            lo, hi = max(lo, alo), min(hi, ahi)
        s_a = s_a.astype(smallest_int(alo, ahi), copy=False)
    k = layer.shift
    ilo, ihi = layer.index_min, layer.index_max
    low = high = None
    if k >= 0:
        if k > 0:
            a = formats.shift_round(s_a, k, p.index_round)
            a_lo, a_hi = (int(v) for v in formats.shift_round(np.array([lo, hi]), k, p.index_round))
        else:
            a, a_lo, a_hi = s_a, lo, hi
        if a_lo < ilo or a_hi > ihi:
            a = np.asarray(a, dtype=np.int64)
            low, high = a < ilo, a > ihi
            a = np.clip(a, ilo, ihi)
    else:
        m = -k
        if (lo << m) >= ilo and (hi << m) <= ihi:
            a = s_a.astype(np.int64) << np.int64(m)
        else:
            # decide the clamp in the unshifted domain so the shift cannot overflow
            c_hi = ihi >> m
            c_lo = -((-ilo) >> m)
            s64 = s_a.astype(np.int64)
            low, high = s64 < c_lo, s64 > c_hi
            a = np.clip(s64, c_lo, c_hi) << np.int64(m)
            a = np.where(low, ilo, np.where(high, ihi, a))
    if layer.table is not None:
        idx = np.asarray(a) - np.int64(ilo) if ilo != 0 else a  # int64: ilo may not fit a's dtype
        codes = _narrow_table(layer).take(idx)  # idx is clamped to the address range: in bounds
    else:
        codes = np.asarray(a).astype(smallest_int(ilo, ihi), copy=False)
    return {"acc": s_a, "codes": codes, "acc_overflow": ov, "table_low": low, "table_high": high}
