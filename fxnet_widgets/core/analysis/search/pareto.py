"""The Pareto front of evaluated plans by (cost, mismatch)."""

from __future__ import annotations

import math
from collections.abc import Iterable

from .records import SweepRecord

__all__ = ["pareto_front"]


def pareto_front(records: Iterable[SweepRecord]) -> list[SweepRecord]:
    """The records no other record dominates, by (cost, mismatch), cheapest first.

    Record ``a`` dominates ``b`` when ``a.cost <= b.cost`` and ``a.mismatch <=
    b.mismatch`` with at least one strict. Of records equal in both, the first
    (lowest index) stands for all. Refused plans are left out.
    """
    ok = [r for r in records if r.ok]
    ok.sort(key=lambda r: (r.cost, r.mismatch, r.index))
    front: list[SweepRecord] = []
    best = math.inf
    for r in ok:
        assert r.mismatch is not None
        if r.mismatch < best:
            front.append(r)
            best = r.mismatch
    return front
