"""One small table for the per-frame loop: every colour's (fixed, float, events) as a dense code.

For two classes, each colour's fixed decision, float decision and event bits form one value
(bit 0 fixed, bit 1 float, bits 2.. the event slots). A network has few distinct values (the
3-3-1 demo network under its plan: 12 over the 2^24 colours), so each colour keeps only the
number of its value among the distinct ones, numbered from the most frequent: 2 bits per colour
(a 4 MB table) for the three most frequent values, and for the rest an escape code that sends
the colour to a byte table of every colour's code (16 MB, read only for those colours: 2.5 % of
all colours for the demo plan). A frame is then one compiled pass that reads one code per pixel
and counts codes (a histogram of at most 256 bins) and the channel sums; the positives, the
disagreement and the per-slot event counts are read off the histogram afterwards. On a noisy
frame (every pixel a different colour) the table reads are cache misses, so the size of the
table read for most pixels is the cost: no per-pixel branching on events. A 256 KB table of
4 x 4 x 4 colour blocks that share one code comes first (it stays in the cache), so most
pixels of a noisy frame never read the 4 MB table.

Results are the same counts as the byte tables' gathers (tests compare on every frame).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass
from typing import Any

import numpy as np

from .lookup import ColourLookup

__all__ = ["CodedTable", "coded_table", "MAX_CODES", "ESCAPE"]

#: at most this many distinct (fixed, float, events) values get a coded table
MAX_CODES = 254  # codes 0..253: 254 and 255 mark blocks (not yet seen, mixed)
#: a block of 4 x 4 x 4 colours whose colours do not all share one code (see :attr:`CodedTable.blocks`)
MIXED = 255
#: the block table is kept when at least this fraction of the blocks is uniform
MIN_UNIFORM = 0.5
#: the 2-bit code that sends a colour to the byte table (:attr:`CodedTable.escape`)
ESCAPE = 3

_CACHE: OrderedDict[Any, CodedTable | None] = OrderedDict()
_LOCK = threading.Lock()


@dataclass(frozen=True, eq=False)
class CodedTable:
    """Dense codes per colour, packed ``1 << log2_per_byte`` (1 or 4) to a byte (little-endian
    within the byte), and per code its value (bit 0 fixed, bit 1 float, bits 2.. event slots).

    Codes are numbered from the most frequent value. With more than four values the packed
    table keeps 2 bits per colour (codes 0-2, and :data:`ESCAPE` for the rest) and ``escape``
    holds every colour's code in a byte: only colours of the rarer values read it.

    ``blocks`` (2^18 bytes, for 8-bit RGB): per block of 4 x 4 x 4 colours (``r >> 2, g >> 2,
    b >> 2``) the code all its colours share, or :data:`MIXED`. It fits in the cache, and
    decisions and events change smoothly over the colour cube (the demo plan: 94 % of the blocks
    are uniform), so most pixels never read the larger tables.
    """

    table: np.ndarray
    log2_per_byte: int
    values: np.ndarray
    escape: np.ndarray | None = None
    blocks: np.ndarray | None = None

    def counts(self, hist: np.ndarray, n_slots: int) -> tuple[int, int, int, np.ndarray]:
        """Positives (fixed, float), disagreements and per-slot counts from a histogram of codes."""
        h = hist[: self.values.shape[0]].astype(np.int64)
        v = self.values.astype(np.uint64)
        fx = (v & np.uint64(1)).astype(np.int64)
        fl = ((v >> np.uint64(1)) & np.uint64(1)).astype(np.int64)
        slots = np.array([int(h @ ((v >> np.uint64(2 + k)) & np.uint64(1)).astype(np.int64))
                          for k in range(n_slots)], dtype=np.int64)  # fmt: skip
        return int(h @ fx), int(h @ fl), int(h @ (fx ^ fl)), slots


def clear() -> None:
    """Forget the cached tables."""
    with _LOCK:
        _CACHE.clear()


def coded_table(fixed: ColourLookup, flt: ColourLookup) -> CodedTable | None:
    """The coded table of a fixed and a float look-up (two classes, at most 14 event slots and
    :data:`MAX_CODES` distinct values), cached by value like the look-ups; None when it does not apply."""
    if fixed.n_classes != 2 or fixed.size != flt.size:
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
    if n_slots > 14:  # values of more than 16 bits: the per-pixel loop over the byte tables instead
        return None
    dt = np.dtype(np.uint8 if n_slots <= 6 else np.uint16)
    from . import _compiled

    kern = _compiled.kernels()
    if kern is None:  # pragma: no cover - numba is a dependency
        return None
    combined = np.empty(fixed.size, dtype=dt)
    ev = fixed.events if fixed.events is not None and n_slots else np.zeros(1, dtype=np.uint8)
    hist = np.zeros(1 << (8 * dt.itemsize), dtype=np.int64)
    kern.combine(fixed.decisions, flt.decisions, ev, combined, hist)
    values = np.flatnonzero(hist)  # distinct values by counting: no sort of 2^24 entries
    if values.shape[0] > MAX_CODES:
        return None
    values = values[np.argsort(-hist[values], kind="stable")]  # the most frequent values get the lowest codes
    code_of = np.zeros(hist.shape[0], dtype=np.uint8)
    code_of[values] = np.arange(values.shape[0], dtype=np.uint8)
    codes = code_of.take(combined)
    del combined
    escape = None
    if values.shape[0] > 4 and codes.shape[0] % 4 == 0:  # 2 bits per colour, code 3: read the byte table
        escape = codes
        table = _pack(np.minimum(codes, np.uint8(ESCAPE)), 2)
        lg = 2
    elif codes.shape[0] % 4 == 0:
        table, lg = _pack(codes, 2), 2
    else:
        table, lg = codes, 0
    blocks = _blocks(codes) if codes.shape[0] == 1 << 24 else None
    for a in (table, escape, blocks):
        if a is not None:
            a.setflags(write=False)
    return CodedTable(table, lg, np.asarray(values, dtype=np.uint64), escape, blocks)


def _blocks(codes: np.ndarray) -> np.ndarray | None:
    """Per 4 x 4 x 4 block of the RGB cube its one code, or :data:`MIXED`; None when few blocks are uniform."""
    from . import _compiled

    out = np.empty(1 << 18, dtype=np.uint8)
    uniform = _compiled.kernels().blocks(codes, out)
    return out if uniform >= MIN_UNIFORM * out.shape[0] else None


def _pack(codes: np.ndarray, lg: int) -> np.ndarray:
    """``1 << lg`` codes per byte, code ``i`` of a byte in bits ``(i * (8 >> lg))..``."""
    per = 1 << lg
    width = 8 >> lg
    parts = codes.reshape(-1, per)
    out = parts[:, 0].copy()
    for i in range(1, per):
        out |= parts[:, i] << np.uint8(i * width)
    return out
