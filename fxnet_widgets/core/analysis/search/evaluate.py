"""Evaluating plans on data, in chunks, on any executor; records come back in order.

Each task carries the network document, the input codes (for a local pool, a
handle to one shared-memory block) and one chunk of :class:`PlanTask` records,
so the data travels at most once per chunk, never once per plan. Every plan is
evaluated by the same deterministic code, so the records are identical whatever
runs them.
"""

from __future__ import annotations

import concurrent.futures as cf
import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ...kernel import _compiled, emulate
from ...kernel.evaluate import Prepared, prepare
from ...network import Network, as_codes
from ...plan import Plan
from ...starting import start_plan, with_safe_acc
from ..cost import COST_KEYS, hardware_cost
from ..metrics import check_labels, error_metrics
from .executors import Runner
from .fast import evaluate_fast
from .progress import Progress
from .records import SweepRecord
from .shared import SharedCodes, share_codes

__all__ = [
    "PlanTask", "argmax_ties", "base_plan", "evaluate", "evaluate_plans", "check_cost_key", "check_cost_options",
    "prepare_data",
]


@dataclass(frozen=True)
class PlanTask:
    """One plan to evaluate (what a worker receives; plain data, so it pickles small).

    Attributes
    ----------
    index : the record's position (grid or evaluation order)
    settings : the grid values that made the plan, ``((field, value), ...)``
    plan_doc : the plan document (:meth:`Plan.to_dict`)
    safe_acc : set every ``acc_bits`` to the guaranteed-safe width before evaluating
    plan : the checked :class:`Plan` of ``plan_doc`` when the driver has it (the fast path then
        does not read and check the document again), else None
    """

    index: int
    settings: tuple[tuple[str, Any], ...]
    plan_doc: dict[str, Any]
    safe_acc: bool = False
    plan: Plan | None = field(default=None, compare=False)


# ---------------------------------------------------------------------------------
# the worker side (module level, so it pickles by reference)
_NET_CACHE: dict[str, Network] = {}


def _network_from(doc: dict[str, Any]) -> Network:
    key = json.dumps(doc, sort_keys=True)
    net = _NET_CACHE.get(key)
    if net is None:
        net = Network.from_dict(doc)
        if len(_NET_CACHE) > 8:
            _NET_CACHE.clear()
        _NET_CACHE[key] = net
    return net


def _evaluate_one(
    net: Network, codes: np.ndarray | Prepared, labels: np.ndarray | None, task: PlanTask, cost_key: str,
    options: dict[str, Any],
) -> SweepRecord:  # fmt: skip
    plan = Plan.from_dict(task.plan_doc)
    try:
        if task.safe_acc:
            plan = with_safe_acc(net, plan)
        result = emulate(net, plan, codes)
        cost = hardware_cost(net, plan, **options)
    except ValueError as exc:
        return SweepRecord(task.index, task.settings, plan, None, cost_key, error=str(exc))
    m = error_metrics(result, labels)
    ties, tied_agreeing = argmax_ties(result.out_codes, result.decisions, result.float_decisions)
    return SweepRecord(
        index=task.index, settings=task.settings, plan=plan, cost=cost.value(cost_key), cost_key=cost_key,
        costs=cost.totals(), mismatch=m.mismatch, mismatch_fraction=m.mismatch_fraction,
        max_abs_error_lsb=max(m.max_abs_error_lsb), mean_abs_error_lsb=float(np.mean(m.mean_abs_error_lsb)),
        accuracy=m.accuracy, events=m.events, ties=ties, tied_agreeing=tied_agreeing,
    )  # fmt: skip


def argmax_ties(out_codes: np.ndarray, decisions: np.ndarray, float_decisions: np.ndarray) -> tuple[int, int]:
    """(tied, tied and agreeing with float): decisions of several outputs whose top code is shared.

    The contract decides a tie by the lowest index (semantics.md, step 8); one output has no ties.

    >>> argmax_ties(np.array([[3, 3, 1], [1, 2, 0], [0, 5, 5]]), np.array([0, 1, 1]), np.array([0, 1, 2]))
    (2, 1)
    """
    codes = np.asarray(out_codes).reshape(-1, np.shape(out_codes)[-1])
    if codes.shape[1] < 2:
        return 0, 0
    tied = np.count_nonzero(codes == codes.max(axis=1, keepdims=True), axis=1) > 1
    agree = np.asarray(decisions).reshape(-1) == np.asarray(float_decisions).reshape(-1)
    return int(np.count_nonzero(tied)), int(np.count_nonzero(tied & agree))


def _run_chunk(
    net_doc: dict[str, Any], codes: np.ndarray | SharedCodes, labels: np.ndarray | None, tasks: list[PlanTask],
    cost_key: str, options: dict[str, Any],
) -> list[SweepRecord]:  # fmt: skip
    """Evaluate one chunk of plans (runs in a worker)."""
    net = _network_from(net_doc)
    if isinstance(codes, SharedCodes):  # decomposed once per worker and data (not hashed per chunk)
        prep = codes.prepared(net.input_bits, net.n_in)
    else:
        prep = prepare(codes, net.input_bits, net.n_in)  # hashed once per chunk, not once per plan
    _compiled.load_for(prep.n)  # many plans on the same data: the compiled loops pay for their import
    if _compiled.use_compiled(prep.n):  # the fast path (same records; FXNET_KERNEL=numpy: the reference)
        return [
            evaluate_fast(net, prep, labels, t.index, t.settings,
                          Plan.from_dict(t.plan_doc) if t.plan is None else t.plan, t.safe_acc, cost_key, options)
            for t in tasks
        ]  # fmt: skip
    return [_evaluate_one(net, prep, labels, t, cost_key, options) for t in tasks]


# ---------------------------------------------------------------------------------
# the driver side
def check_cost_key(cost: str) -> str:
    """``cost`` if it names a cost total (:data:`COST_KEYS`), else a ValueError."""
    if cost not in COST_KEYS:
        raise ValueError(f"cost must be one of {', '.join(COST_KEYS)}, not {cost!r}")
    return cost


def check_cost_options(options: Mapping[str, Any] | None) -> dict[str, Any]:
    """Checked keyword arguments of :func:`hardware_cost`."""
    opts = dict(options or {})
    allowed = ("multipliers", "multiplier_size", "block_bits", "pipeline_stages", "target")
    for k in opts:
        if k not in allowed:
            raise ValueError(f"cost_options key must be one of {', '.join(allowed)}, not {k!r}")
    if "multiplier_size" in opts:
        opts["multiplier_size"] = tuple(opts["multiplier_size"])
    return opts


def prepare_data(network: Network, codes: Any, labels: Any) -> tuple[np.ndarray, np.ndarray | None]:
    """Flat, contiguous input codes (N x n_in) and checked labels (or None)."""
    flat, shape = as_codes(codes, network.input_bits, network.n_in)
    flat = np.ascontiguousarray(flat)
    lab = None
    if labels is not None:
        lab = check_labels(labels, flat.shape[0], shape, len(network.classes))
        lab = lab.astype(np.int16 if len(network.classes) < 32768 else np.int64)
    return flat, lab


def base_plan(network: Network, plan: Any, flat: np.ndarray, what: str) -> Plan:
    """``plan`` checked against ``network``, or when None the generous start plan on the data ``flat``."""
    if plan is None:
        return start_plan(network, flat)
    if not isinstance(plan, Plan):
        raise TypeError(f"{what} must be a Plan, not {type(plan).__name__}")
    return plan.check(network)


def evaluate(
    runner: Runner, network: Network, codes: np.ndarray, labels: np.ndarray | None, tasks: list[PlanTask],
    cost_key: str, options: dict[str, Any], progress: Progress | None, chunks_per_worker: int = 4,
) -> list[SweepRecord]:  # fmt: skip
    """Evaluate ``tasks`` on ``runner``; the records sorted by their index."""
    total = len(tasks)
    if progress is not None:
        progress(0, total)
    if not tasks:
        return []
    n_chunks = min(total, runner.workers * chunks_per_worker) if runner.workers > 1 else 1
    if runner.serial:
        n_chunks = min(total, 16) if progress is not None else 1
    bounds = np.linspace(0, total, n_chunks + 1).round().astype(int)
    doc = network.to_dict()
    futures = {}
    shared = share_codes(codes) if runner.local and n_chunks > 1 else None
    payload = codes if shared is None else shared.handle
    done = 0
    records: list[SweepRecord] = []
    try:
        for a, b in zip(bounds[:-1], bounds[1:]):
            if b > a:
                fut = runner.executor.submit(_run_chunk, doc, payload, labels, tasks[a:b], cost_key, options)
                futures[fut] = b - a
        for fut in cf.as_completed(futures):
            records.extend(fut.result())
            done += futures[fut]
            if progress is not None:
                progress(done, total)
    except BaseException:
        for fut in futures:
            fut.cancel()
        raise
    finally:
        if shared is not None:
            shared.release()
    records.sort(key=lambda r: r.index)
    return records


def evaluate_plans(
    network: Network,
    codes: Any,
    plans: Sequence[Plan],
    *,
    labels: Any = None,
    cost: str = "total_bits",
    cost_options: Mapping[str, Any] | None = None,
    executor: Any = None,
    progress: Progress | None = None,
) -> list[SweepRecord]:
    """Evaluate given plans as they are (cost and error each); records in input order."""
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    for i, p in enumerate(plans):
        if not isinstance(p, Plan):
            raise TypeError(f"plans[{i}] must be a Plan, not {type(p).__name__}")
        p.check(network)
    check_cost_key(cost)
    opts = check_cost_options(cost_options)
    flat, lab = prepare_data(network, codes, labels)
    tasks = [PlanTask(i, (), p.to_dict(), plan=p) for i, p in enumerate(plans)]
    with Runner(executor, len(tasks) * flat.shape[0]) as runner:
        return evaluate(runner, network, flat, lab, tasks, cost, opts, progress)

