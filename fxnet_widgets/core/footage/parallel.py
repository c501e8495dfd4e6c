"""Footage analysis split by frame ranges over an executor (a local process pool or a dask cluster).

Each task carries the network and plan documents, the source path and one frame range;
it opens the source itself, builds the look-ups (cached per worker process) and returns
its records. The parts are joined in frame order, so the result equals one
:func:`~.analyse.analyse_footage` over the whole range (tests compare them on a dask
``LocalCluster``). A worker decodes its range from the start of the file (no seeking:
exact, at the cost of decoding the frames before it).
"""

from __future__ import annotations

import os
from collections.abc import Callable
from typing import Any

from ..analysis.search.executors import as_executor, worker_count
from ..network import Network
from ..plan import Plan
from .analyse import FootageAnalysis, analyse_footage
from .reader import open_footage

__all__ = ["analyse_footage_split", "split_range"]


def split_range(start: int, stop: int, step: int, parts: int) -> list[str]:
    """``"A:B:S"`` texts covering ``range(start, stop, step)`` in ``parts`` contiguous pieces (fewer if short)."""
    idx = list(range(start, stop, step))
    parts = max(1, min(parts, len(idx)))
    out = []
    for k in range(parts):
        piece = idx[k * len(idx) // parts : (k + 1) * len(idx) // parts]
        if piece:
            out.append(f"{piece[0]}:{piece[-1] + 1}:{step}")
    return out


def _part(network_doc: dict[str, Any], plan_doc: dict[str, Any], source: str,
          frames: str) -> tuple[list[Any], list[str]]:  # fmt: skip
    net = Network.from_dict(network_doc)
    plan = Plan.from_dict(plan_doc).check(net)
    r = analyse_footage(net, plan, source, frames=frames)
    return r.frames, list(r.source.get("broken", []))


def analyse_footage_split(
    network: Network,
    plan: Plan,
    source: str | os.PathLike[str],
    executor: Any,
    *,
    frames: str | slice | None = None,
    parts: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> FootageAnalysis:
    """:func:`~.analyse.analyse_footage` with the frames split into ranges run on ``executor``.

    ``executor`` is a ``concurrent.futures.Executor`` or a ``dask.distributed.Client``; ``parts``
    defaults to twice its worker count. The source must announce its frame count (video
    headers, image folders). ``progress(done, total)`` counts finished parts.
    """
    src = os.fspath(source)
    clip = open_footage(src, frames)
    n = clip.info.frames
    if n is None:
        raise ValueError(f"{src}: must announce its frame count to be split over workers, not an unknown count")
    sl = clip.frames
    stop = n if sl.stop is None else min(sl.stop, n)
    ex = as_executor(executor)
    pieces = split_range(sl.start, stop, sl.step, parts or 2 * worker_count(executor))
    if not pieces:
        raise ValueError(f"{src}: frames {sl.start}:{stop}:{sl.step} must hold at least one frame, not 0")
    net_doc, plan_doc = network.to_dict(), plan.to_dict()
    futures = [ex.submit(_part, net_doc, plan_doc, src, p) for p in pieces]
    records: list[Any] = []
    broken: list[str] = []
    for done, fut in enumerate(futures, start=1):  # in frame order
        recs, br = fut.result()
        records += recs
        broken += [b for b in br if b not in broken]
        if progress is not None:
            progress(done, len(futures))
    info = clip.info.to_dict()
    info["broken"] = broken
    return FootageAnalysis(info, plan, network, records, False, {})
