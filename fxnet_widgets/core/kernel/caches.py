"""The kernel's value-keyed caches: small LRUs, emptied together by :func:`clear_caches`.

Keys are values (network digests, plans, hashes of input codes), never object
identities, so two different values can never share an answer.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable
from typing import Any

__all__ = ["LRU", "MONOTONE_CACHE", "NARROW_CACHE", "OUTPUT_CACHE", "QUANT_CACHE",
           "INPUT_CACHE", "LAYER_CACHE", "FLOAT_CACHE", "SUM_CACHE", "TABLE_CACHE",
           "WEIGHT_CACHE",
           "DOMAIN_CACHE", "clear_caches", "cache_stats"]  # fmt: skip


_MISSING = object()


class LRU:
    """A thread-safe least-recently-used map from a value key to a computed value."""

    def __init__(self, size: int) -> None:
        self.size = size
        self.data: OrderedDict[Hashable, Any] = OrderedDict()
        self.lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    def get(self, key: Hashable, make: Callable[[], Any]) -> Any:
        """The value of ``key``, made with ``make()`` (outside the lock) on a miss."""
        with self.lock:
            value = self.data.get(key, _MISSING)
            if value is not _MISSING:
                self.data.move_to_end(key)
                self.hits += 1
                return value
        value = make()
        with self.lock:
            self.misses += 1
            self.data[key] = value
            while len(self.data) > self.size:
                self.data.popitem(last=False)
        return value

    def clear(self) -> None:
        with self.lock:
            self.data.clear()
            self.hits = self.misses = 0


#: integer networks by (network digest, plan)
QUANT_CACHE = LRU(64)
#: per-image decompositions by a hash of the codes
INPUT_CACHE = LRU(4)
#: layer outputs by (network digest, input key, plan prefix)
LAYER_CACHE = LRU(12)
#: float references by (network digest, input key)
FLOAT_CACHE = LRU(4)
#: first-layer exact sums by the integer weights' values: a change of the accumulator,
#: table or output fields keeps them (the product gathers are skipped)
SUM_CACHE = LRU(4)
#: activation tables (read-only) by their :class:`.tables.TableSpec`: plans that differ only
#: in fields a table does not depend on (the accumulator width, the weights' values) share it
TABLE_CACHE = LRU(256)
#: one layer's weight codes, raw bias codes and safe widths by (network digest, layer, weight
#: fields, input format): plans that differ in the accumulator, table or output fields share them
WEIGHT_CACHE = LRU(256)
#: one layer's steps 5-7 (shift, address range, table, output codes) by the fields they read
#: (activation, output and table fields, the accumulator's fraction): a plan's guaranteed-safe
#: widths and its build read the same parts (a search builds both per plan)
OUTPUT_CACHE = LRU(256)
#: per shared activation table (by identity; each entry holds its table, so that identity cannot
#: be reused while cached): whether it never decreases, and its copy in the codes' narrowest type
MONOTONE_CACHE = LRU(64)
NARROW_CACHE = LRU(64)
#: one layer's steps 4-7 tables over a range of sums (compiled path) by the fields they read and
#: the range (each entry holds its activation table, as above): the image, slices and cube of one
#: explorer update share them; a few MB an entry at most (2**21 sums), so few entries
DOMAIN_CACHE = LRU(6)

_NAMED = {"quantise": QUANT_CACHE, "input": INPUT_CACHE, "layer": LAYER_CACHE, "float": FLOAT_CACHE,
          "sums": SUM_CACHE, "table": TABLE_CACHE,
          "weights": WEIGHT_CACHE, "output": OUTPUT_CACHE, "monotone": MONOTONE_CACHE,
          "narrow_table": NARROW_CACHE, "domain": DOMAIN_CACHE}  # fmt: skip


def clear_caches() -> None:
    """Empty every cache of the kernel (for benchmarks and tests)."""
    for c in _NAMED.values():
        c.clear()


def cache_stats() -> dict[str, tuple[int, int]]:
    """``{cache: (hits, misses)}`` of the kernel's caches."""
    return {name: (c.hits, c.misses) for name, c in _NAMED.items()}
