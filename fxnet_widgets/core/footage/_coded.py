"""One small table for the per-frame loop: every colour's (fixed, float, events) as a dense code.

For two classes, each colour's fixed decision, float decision and event bits form one value
(bit 0 fixed, bit 1 float, bits 2.. the event slots). A network has few distinct values (the
3-3-1 demo network: 9 over the 2^24 colours), so each colour keeps only the number of its
value among the distinct ones: 2, 4 or 8 bits per colour (4, 8 or 16 MB). A frame is then one
compiled pass that reads one code per pixel and counts codes (a histogram of at most 256 bins)
and the channel sums; the positives, the disagreement and the per-slot event counts are read
off the histogram afterwards. On a noisy frame (every pixel a different colour) the table
reads are cache misses, so the table's size is the cost: no per-pixel branching on events.

Results are the same counts as the byte tables' gathers (tests compare on every frame).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass
from typing import Any

import numpy as np

from .lookup import ColourLookup

__all__ = ["CodedTable", "coded_table", "MAX_CODES"]

#: at most this many distinct (fixed, float, events) values get a coded table
MAX_CODES = 256

_CACHE: OrderedDict[Any, CodedTable | None] = OrderedDict()
_LOCK = threading.Lock()


@dataclass(frozen=True, eq=False)
class CodedTable:
    """Dense codes per colour, packed ``per_byte`` = 1, 2 or 4 to a byte (little-endian within
    the byte), and per code its value (bit 0 fixed, bit 1 float, bits 2.. event slots)."""

    table: np.ndarray
    log2_per_byte: int
    values: np.ndarray

    def counts(self, hist: np.ndarray, n_slots: int) -> tuple[int, int, int, np.ndarray]:
        """Positives (fixed, float), disagreements and per-slot counts from a histogram of codes."""
        h = hist[: self.values.shape[0]].astype(np.int64)
        v = self.values.astype(np.uint64)
        fx = (v & np.uint64(1)).astype(np.int64)
        fl = ((v >> np.uint64(1)) & np.uint64(1)).astype(np.int64)
        slots = np.array([int(h @ ((v >> np.uint64(2 + k)) & np.uint64(1)).astype(np.int64))
                          for k in range(n_slots)], dtype=np.int64)  # fmt: skip
        return int(h @ fx), int(h @ fl), int(h @ (fx ^ fl)), slots


def coded_table(fixed: ColourLookup, flt: ColourLookup) -> CodedTable | None:
    """The coded table of a fixed and a float look-up (two classes, at most :data:`MAX_CODES`
    distinct values), cached by value like the look-ups; None when it does not apply."""
    if fixed.n_classes != 2 or len(fixed.event_slots) > 62 or fixed.size != flt.size:
        return None
    key = (fixed.network.digest, fixed.plan, flt.network.digest, fixed.size)
    with _LOCK:
        if key in _CACHE:
            _CACHE.move_to_end(key)
            return _CACHE[key]
    value = _make(fixed, flt)
    with _LOCK:
        _CACHE[key] = value
        while len(_CACHE) > 2:
            _CACHE.popitem(last=False)
    return value


def _make(fixed: ColourLookup, flt: ColourLookup) -> CodedTable | None:
    n_slots = len(fixed.event_slots)
    dt = np.dtype(np.uint8 if n_slots <= 6 else np.uint16 if n_slots <= 14 else np.uint32 if n_slots <= 30
                  else np.uint64)  # fmt: skip
    from . import _compiled

    kern = _compiled.kernels()
    if kern is None:  # pragma: no cover - numba is a dependency
        return None
    combined = np.empty(fixed.size, dtype=dt)
    ev = fixed.events if fixed.events is not None and n_slots else np.zeros(1, dtype=np.uint8)
    hist = np.zeros(1 << (8 * dt.itemsize) if dt.itemsize <= 2 else 0, dtype=np.int64)
    kern.combine(fixed.decisions, flt.decisions, ev, combined, hist)
    if dt.itemsize <= 2:  # distinct values by counting: no sort of 2^24 entries
        values = np.flatnonzero(hist)
        if values.shape[0] > MAX_CODES:
            return None
        code_of = np.zeros(hist.shape[0], dtype=np.uint8)
        code_of[values] = np.arange(values.shape[0], dtype=np.uint8)
        codes = code_of.take(combined)
    else:
        uniq, inverse = np.unique(combined, return_inverse=True)
        if uniq.shape[0] > MAX_CODES:
            return None
        values, codes = uniq, inverse.astype(np.uint8).reshape(-1)
    n = values.shape[0]
    lg = 2 if n <= 4 else 1 if n <= 16 else 0  # 4, 2 or 1 codes per byte
    table = _pack(codes, lg) if codes.shape[0] % (1 << lg) == 0 else codes
    lg = lg if table is not codes else 0
    table.setflags(write=False)
    return CodedTable(table, lg, np.asarray(values, dtype=np.uint64))


def _pack(codes: np.ndarray, lg: int) -> np.ndarray:
    """``1 << lg`` codes per byte, code ``i`` of a byte in bits ``(i * (8 >> lg))..``."""
    per = 1 << lg
    width = 8 >> lg
    parts = codes.reshape(-1, per)
    out = parts[:, 0].copy()
    for i in range(1, per):
        out |= parts[:, i] << np.uint8(i * width)
    return out
