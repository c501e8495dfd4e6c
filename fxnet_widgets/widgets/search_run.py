"""What the search panel shows about records and runs: event classes, Q notation, rates, tune paths.

Pure functions and one small executor wrapper; no widgets.

>>> rate_text(50, 200, 2.0)
'50/200 plans, 25.0 plans/s, about 6.0 s left'
"""

from __future__ import annotations

import concurrent.futures as cf
import html
import itertools
import threading
from collections.abc import Callable, Iterable, Sequence
from typing import Any

import numpy as np

from ..core.analysis import SweepRecord, TuneResult
from ..core.analysis.search.grid import apply_settings
from ..core.analysis.search.tuning import move
from ..core.formats import q_notation
from ..core.labels import LabelledPixels
from ..core.network import Network
from ..core.plan import Plan

__all__ = [
    "EVENT_CLASSES",
    "PieceSizer",
    "RecordingExecutor",
    "StopRequested",
    "event_class",
    "plan_q",
    "plan_work",
    "rate_text",
    "record_html",
    "search_data",
    "tune_path",
    "dominance_front",
]

#: the scatter's point classes, in drawing order
EVENT_CLASSES = ("no events", "clamps", "overflow")


def event_class(record: SweepRecord, relu: bool = False) -> str:
    """``overflow`` (an accumulator overflowed), ``clamps`` (a table index, weight or bias clamped), or ``no events``.

    With ``relu`` (the network has relu layers) ``table_low`` is left out: on a
    relu neuron it counts the times the unit is off, not an error.
    """
    ev = record.events
    if ev.get("acc_overflow", 0):
        return "overflow"
    kinds = ("table_high", "weight_clip", "bias_clip") if relu else ("table_low", "table_high", "weight_clip",
                                                                      "bias_clip")  # fmt: skip
    return "clamps" if any(ev.get(k, 0) for k in kinds) else "no events"


def plan_q(network: Network, plan: Plan) -> str:
    """The plan's formats in Q notation, one line per layer (weights, accumulator, table input, output).

    >>> from fxnet_widgets.core.network import Network
    >>> net = Network.from_layers([([[1.0, 2.0]], [0.0], "sigmoid")])
    >>> print(plan_q(net, Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=16, out_bits=8,
    ...                                 table_bits=10, table_frac=6)))
    L1: weights Q2.5 (8 b), acc 16 b, table in Q3.6 (10 b), out 8 b
    """
    lines = []
    for i, (lp, L) in enumerate(zip(plan.layers, network.layers)):
        parts = [f"weights {q_notation(lp.weight_bits, lp.weight_frac)}", f"acc {lp.acc_bits} b"]
        if lp.table_bits is not None and lp.table_frac is not None:
            parts.append(f"table in {q_notation(lp.table_bits, lp.table_frac)}")
            parts.append(f"out {lp.out_bits} b")
        elif lp.out_frac is not None:
            parts.append(f"out {q_notation(lp.out_bits, lp.out_frac, L.activation == 'identity')}")
        else:
            parts.append(f"out {lp.out_bits} b")
        lines.append(f"L{i + 1}: " + ", ".join(parts))
    return "\n".join(lines)


def search_data(session: Any, codes: Any, labels: Any) -> tuple[np.ndarray, np.ndarray | None]:
    """The codes and labels a search runs on (see :class:`~fxnet_widgets.widgets.search_panel.SearchPanel`)."""
    if isinstance(labels, LabelledPixels):
        if codes is not None:
            raise ValueError("codes must be None when labels is a LabelledPixels (it has its codes), not given")
        return labels.codes, labels.labels
    if codes is None:
        if session.samples is not None:
            codes, default = session.samples, session.labels
        elif session.image is not None:
            codes, default = session.image, session.image_labels
        else:
            raise ValueError("the search needs data: the explorer must have samples or an image, not neither")
        labels = default if labels is None else labels
    return np.asarray(codes), (None if labels is None else np.asarray(labels))


def record_html(network: Network, r: SweepRecord, i: int, cost_key: str, x: float, cls: str) -> str:
    """One record as a short HTML block: index, settings, cost, disagreement, accuracy, events, Q notation."""
    q = html.escape(plan_q(network, r.plan)).replace("\n", "<br>")
    acc = "" if r.accuracy is None else f", accuracy {100 * r.accuracy:.2f} %"
    return (f"<div style='font-size:11px;font-family:monospace'><b>records[{i}]</b> "
            f"{html.escape(str(dict(r.settings)))}: {cost_key} {x:.0f}, "
            f"{r.mismatch} differ ({100 * (r.mismatch_fraction or 0):.3f} %){acc}, {cls}<br>{q}</div>")  # fmt: skip


def rate_text(done: int, total: int | None, seconds: float) -> str:
    """``done/total plans, R plans/s, about T s left`` (total None: a search of unknown length)."""
    rate = done / seconds if seconds > 0 else 0.0
    head = f"{done}/{total} plans" if total is not None else f"{done} plans"
    if rate <= 0:
        return head
    text = f"{head}, {rate:.1f} plans/s"
    if total is not None and done < total:
        text += f", about {(total - done) / rate:.1f} s left"
    return text


def dominance_front(records: Iterable[SweepRecord], x: Callable[[SweepRecord], float],
                    y: Callable[[SweepRecord], float]) -> list[SweepRecord]:  # fmt: skip
    """Records no other beats in ``x`` and ``y`` (both: smaller is better), cheapest first; ties: lowest index.

    With ``x`` the cost and ``y`` the mismatch this is :func:`~fxnet_widgets.core.analysis.pareto_front`;
    the panel also uses it for another cost total or for accuracy (``y = -accuracy``).
    """
    ok = sorted((r for r in records if r.ok), key=lambda r: (x(r), y(r), r.index))
    front: list[SweepRecord] = []
    best = float("inf")
    for r in ok:
        if y(r) < best:
            front.append(r)
            best = y(r)
    return front


def tune_path(network: Network, result: TuneResult) -> list[SweepRecord]:
    """The records of the start plan and of each accepted move, in order (the path drawn on the scatter).

    The plans are rebuilt from the moves; a path that does not end at the
    answer (or whose plans were not evaluated) raises ValueError.
    """
    by_plan = {r.plan: r for r in result.records}
    plan = result.start
    path = [by_plan[plan]] if plan in by_plan else []
    for s in result.steps:
        step = move(network, plan, s.layer, s.move, s.bits)  # tune's own move, rebuilt
        if step is None:
            raise ValueError(f"tune path must consist of possible moves, not {s.move!r} on layer {s.layer + 1}")
        plan = step.plan
        if plan not in by_plan:
            raise ValueError(f"tune path must consist of evaluated plans, not {plan!r}")
        path.append(by_plan[plan])
    if plan != result.plan or len(path) != len(result.steps) + 1:
        raise ValueError("tune path must end at the tuned plan, not elsewhere")
    return path


#: table entries that cost about as much time as one sample (the table build against the per-sample loops;
#: measured with ``benchmarks/bench_search_panel.py`` on the demo network, 2026: it only sizes the pieces)
TABLE_ENTRIES_PER_SAMPLE = 4


def plan_work(network: Network, plan: Plan | None, n_samples: int) -> float:
    """A plan's expected evaluation time in sample units: the samples plus its table entries / 4.

    Only :class:`PieceSizer` reads it (how many plans fit in one piece); a refused plan (None) costs 1.

    >>> from fxnet_widgets.core.network import Network
    >>> net = Network.from_layers([([[1.0, 2.0], [0.5, 0.5]], [0.0, 0.0], "sigmoid")])
    >>> plan_work(net, Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=16, out_bits=8,
    ...                              table_bits=10, table_frac=6), 1000)
    1512.0
    """
    if plan is None:
        return 1.0
    entries = sum(L.n_out << lp.table_bits for lp, L in zip(plan.layers, network.layers) if lp.table_bits is not None)
    return float(n_samples) + entries / TABLE_ENTRIES_PER_SAMPLE


class PieceSizer:
    """How many plans of a grid go into the next piece so that it runs about ``seconds`` (wall time).

    The expected work of every plan (:func:`plan_work`) is known before the run;
    the seconds per unit of work are measured on the pieces that finished (the
    latest piece counts half, and a piece more than twice as slow as expected counts
    fully, so a machine that gets busy shrinks the pieces at once).
    The first piece is one plan.
    """

    def __init__(self, network: Network, grid: dict[str, list[Any]], base: Plan, layer: int | None,
                 keep_range: bool, n_samples: int, seconds: float) -> None:  # fmt: skip
        names = list(grid)
        self.work: list[float] = []
        for combo in itertools.product(*(grid[k] for k in names)):
            try:
                plan: Plan | None = apply_settings(network, base, dict(zip(names, combo)), layer, keep_range)
            except ValueError:
                plan = None
            self.work.append(plan_work(network, plan, n_samples))
        self.seconds = float(seconds)
        self.rate: float | None = None  # seconds per unit of work

    def next_size(self, pos: int) -> int:
        """Plans from ``pos`` that fit in one piece (at least 1)."""
        if self.rate is None:
            return 1
        budget, n = self.seconds / self.rate, 0
        for w in self.work[pos:]:
            if n and budget < w:
                break
            budget -= w
            n += 1
        return max(1, n)

    def finished(self, pos: int, n: int, seconds: float) -> None:
        """Piece ``[pos, pos + n)`` took ``seconds``: update the measured rate."""
        rate = max(seconds, 1e-6) / max(sum(self.work[pos : pos + n]), 1.0)
        self.rate = rate if self.rate is None or rate > 2 * self.rate else 0.5 * (rate + self.rate)


class StopRequested(Exception):
    """Raised into a running search when the panel's stop button was pressed."""


class RecordingExecutor(cf.Executor):
    """Wraps an executor: hands each finished task's records to ``on_records`` and refuses new tasks after a stop.

    ``sweep`` and ``tune`` return their records only at the end; this lets the
    panel draw a tune's records as its rounds finish and stop it between tasks.
    A task whose result is not a list of records is passed through untouched.
    """

    def __init__(self, inner: cf.Executor, on_records: Callable[[Sequence[SweepRecord]], None],
                 stop: threading.Event) -> None:  # fmt: skip
        self.inner = inner
        self.on_records = on_records
        self.stop = stop

    def submit(self, fn: Callable[..., Any], /, *args: Any, **kwargs: Any) -> cf.Future[Any]:
        if self.stop.is_set():
            raise StopRequested("stopped")
        fut = self.inner.submit(fn, *args, **kwargs)
        fut.add_done_callback(self._done)
        return fut

    def _done(self, fut: cf.Future[Any]) -> None:
        if fut.cancelled() or fut.exception() is not None:
            return
        got = fut.result()
        if isinstance(got, list) and got and all(isinstance(r, SweepRecord) for r in got):
            self.on_records(got)

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        """The wrapped executor belongs to the caller: nothing to shut down here."""
