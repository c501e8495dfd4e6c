"""Design-space search: sweeps over plan fields, the Pareto front, and ``tune``.

Every plan is judged on the same data by two numbers: its cost (one total of
:func:`~fxnet_widgets.core.analysis.cost.hardware_cost`, ``total_bits`` unless
told otherwise) and its disagreement with the float network (the fraction of
decisions that differ).

Evaluation runs on a local process pool by default, or on any
:class:`concurrent.futures.Executor` (a ``dask.distributed`` ``Client`` works
as one). The plans are cut into a few chunks per worker; each task carries the
network document, the input codes and its chunk's plan documents, so the data
travels once per chunk, never once per plan. Results are identical whatever
runs them: every plan is evaluated by the same deterministic code and records
come back in grid order.

Examples
--------
>>> import numpy as np
>>> from fxnet_widgets.core.network import Network
>>> net = Network.from_layers([([[2.0, -1.0, 0.5]], [-0.5], "sigmoid")])
>>> codes = np.random.default_rng(0).integers(0, 256, (2000, 3))
>>> recs = sweep(net, codes, {"table_bits": [6, 8, 10]}, executor=SerialExecutor())
>>> [r.settings for r in recs]
[(('table_bits', 6),), (('table_bits', 8),), (('table_bits', 10),)]
>>> all(a.cost < b.cost for a, b in zip(recs, recs[1:]))
True
"""

from __future__ import annotations

import concurrent.futures as cf
import itertools
import json
import math
import multiprocessing
import multiprocessing.context
import os
import sys
import threading
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, TextIO

import numpy as np

from ..formats import round_scalar
from ..kernel import emulate, quantise
from ..network import Network, as_codes
from ..plan import CHOICES, INT_LIMITS, PLAN_FIELDS, LayerPlan, Plan
from .cost import COST_KEYS, HardwareCost, hardware_cost
from .metrics import ErrorMetrics, check_labels, error_metrics

#: one plan to evaluate: (record index, its settings as (name, value) pairs, plan document, safe accumulators)
_Item = tuple[int, tuple[tuple[str, Any], ...], dict[str, Any], bool]

__all__ = [
    "SerialExecutor",
    "SweepRecord",
    "TuneResult",
    "TUNE_MOVES",
    "evaluate_plans",
    "sweep",
    "pareto_front",
    "tune",
    "start_plan",
    "parse_grid",
    "text_progress",
]

Progress = Callable[[int, int], None]

#: below this many sample-evaluations (plans x samples), ``executor=None`` runs in
#: this process: starting workers would cost more than it saves
INLINE_WORK = 2_000_000
_TABLE_FIELDS = ("table_bits", "table_frac", "index_round", "table_round", "table_sample")


# ---------------------------------------------------------------------------------
# executors and progress
class SerialExecutor(cf.Executor):
    """An :class:`~concurrent.futures.Executor` that runs each task at once, in this process."""

    def submit(self, fn: Callable[..., Any], /, *args: Any, **kwargs: Any) -> cf.Future[Any]:
        fut: cf.Future[Any] = cf.Future()
        try:
            fut.set_result(fn(*args, **kwargs))
        except BaseException as exc:  # handed to the caller through the future
            fut.set_exception(exc)
        return fut


def text_progress(stream: TextIO | None = None, width: int = 30, label: str = "plans") -> Progress:
    """A progress callback drawing a text bar (``[#####.....] 12/40 plans``) on ``stream``.

    ``stream`` defaults to ``sys.stderr``; the bar is redrawn in place and ends
    with a newline when ``done == total``.
    """
    lock = threading.Lock()

    def report(done: int, total: int) -> None:
        out = stream if stream is not None else sys.stderr
        filled = width if total <= 0 else int(width * done / total)
        with lock:
            out.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {done}/{total} {label}")
            if done >= total:
                out.write("\n")
            out.flush()

    return report


def _local_pool(workers: int) -> cf.Executor:
    """A process pool of ``workers``: forkserver where available, else spawn.

    Both re-import the main script in each worker (so a script needs the usual
    ``if __name__ == "__main__":`` guard); when the main module has no file to
    re-import (code piped on stdin), POSIX systems fork instead.
    """
    methods = multiprocessing.get_all_start_methods()
    main_file = getattr(sys.modules.get("__main__"), "__file__", None)
    spec = getattr(sys.modules.get("__main__"), "__spec__", None)
    ctx: multiprocessing.context.BaseContext
    if spec is None and main_file is not None and not os.path.isfile(main_file) and "fork" in methods:
        ctx = multiprocessing.get_context("fork")
    elif sys.platform != "win32" and "forkserver" in methods:
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload([__name__])
    else:
        ctx = multiprocessing.get_context("spawn")
    return cf.ProcessPoolExecutor(max_workers=workers, mp_context=ctx)


def _as_executor(executor: Any) -> cf.Executor:
    if isinstance(executor, cf.Executor):
        return executor
    if hasattr(executor, "get_executor") and hasattr(executor, "submit"):  # dask.distributed.Client
        return executor.get_executor()
    raise TypeError(f"executor must be a concurrent.futures.Executor or a dask Client, not {type(executor).__name__}")


def _worker_count(executor: cf.Executor) -> int:
    if isinstance(executor, SerialExecutor):
        return 1
    n = getattr(executor, "_max_workers", None)
    if isinstance(n, int) and n > 0:
        return n
    client = getattr(executor, "_client", None)
    if client is not None:
        try:
            return max(1, int(sum(client.nthreads().values())))
        except Exception:  # noqa: BLE001 - a count is only a hint for chunking
            pass
    return os.cpu_count() or 1


class _Runner:
    """The executor for one sweep or tune; owns (and closes) a default local pool."""

    def __init__(self, executor: Any, work: int) -> None:
        self.owned = False
        if executor is None:
            if work < INLINE_WORK or (os.cpu_count() or 1) < 2:
                self.executor: cf.Executor = SerialExecutor()
            else:
                self.executor = _local_pool(os.cpu_count() or 1)
                self.owned = True
        else:
            self.executor = _as_executor(executor)
        self.workers = _worker_count(self.executor)

    def close(self) -> None:
        if self.owned:
            self.executor.shutdown(wait=True)


# ---------------------------------------------------------------------------------
# records
@dataclass(frozen=True)
class SweepRecord:
    """One evaluated plan.

    Attributes
    ----------
    index : position in the sweep (grid order)
    settings : the grid values of this plan, ``((field, value), ...)``
    plan : the plan evaluated (with its accumulator widths if they were derived)
    cost : the chosen cost total (``cost_key``); None if the plan was refused
    cost_key : which total ``cost`` is
    costs : every total of :meth:`HardwareCost.totals`
    mismatch, mismatch_fraction : decisions that differ from float
    max_abs_error_lsb, mean_abs_error_lsb : output error in LSBs (max / mean over outputs)
    accuracy : against labels, or None
    events : event totals on the data
    error : why the kernel refused the plan (then every metric is None/empty)
    """

    index: int
    settings: tuple[tuple[str, Any], ...]
    plan: Plan
    cost: int | None
    cost_key: str
    costs: Mapping[str, int] = field(default_factory=dict, hash=False)
    mismatch: int | None = None
    mismatch_fraction: float | None = None
    max_abs_error_lsb: float | None = None
    mean_abs_error_lsb: float | None = None
    accuracy: float | None = None
    events: Mapping[str, int] = field(default_factory=dict, hash=False)
    error: str | None = None

    @property
    def ok(self) -> bool:
        """True when the plan was evaluated (not refused)."""
        return self.error is None

    def to_dict(self) -> dict[str, Any]:
        return {
            "index": self.index,
            "settings": {k: v for k, v in self.settings},
            "cost": self.cost,
            "cost_key": self.cost_key,
            "costs": dict(self.costs),
            "mismatch": self.mismatch,
            "mismatch_fraction": self.mismatch_fraction,
            "max_abs_error_lsb": self.max_abs_error_lsb,
            "mean_abs_error_lsb": self.mean_abs_error_lsb,
            "accuracy": self.accuracy,
            "events": dict(self.events),
            "error": self.error,
            "plan": self.plan.to_dict(),
        }


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


def with_safe_acc(network: Network, plan: Plan, layers: Iterable[int] | None = None) -> Plan:
    """``plan`` with ``acc_bits`` of ``layers`` (default all) set to the guaranteed-safe width."""
    wide = Plan(tuple(replace(lp, acc_bits=INT_LIMITS["acc_bits"][1]) for lp in plan.layers))
    intnet = quantise(network, wide)
    out = list(plan.layers)
    for i in range(len(out)) if layers is None else layers:
        out[i] = replace(out[i], acc_bits=int(np.max(intnet.layers[i].safe_acc_bits)))
    return Plan(tuple(out))


def _evaluate_one(
    net: Network, codes: np.ndarray, labels: np.ndarray | None, index: int, settings: tuple[tuple[str, Any], ...],
    plan: Plan, safe_acc: bool, cost_key: str, cost_options: dict[str, Any],
) -> SweepRecord:  # fmt: skip
    try:
        if safe_acc:
            plan = with_safe_acc(net, plan)
        result = emulate(net, plan, codes)
        cost = hardware_cost(net, plan, **cost_options)
    except ValueError as exc:
        return SweepRecord(index, settings, plan, None, cost_key, error=str(exc))
    m = error_metrics(result, labels)
    return SweepRecord(
        index=index, settings=settings, plan=plan, cost=cost.value(cost_key), cost_key=cost_key,
        costs=cost.totals(), mismatch=m.mismatch, mismatch_fraction=m.mismatch_fraction,
        max_abs_error_lsb=max(m.max_abs_error_lsb), mean_abs_error_lsb=float(np.mean(m.mean_abs_error_lsb)),
        accuracy=m.accuracy, events=m.events,
    )  # fmt: skip


def _run_chunk(
    net_doc: dict[str, Any], codes: np.ndarray, labels: np.ndarray | None,
    items: list[_Item],
    cost_key: str, cost_options: dict[str, Any],
) -> list[SweepRecord]:  # fmt: skip
    """Evaluate one chunk of plans (runs in a worker)."""
    net = _network_from(net_doc)
    return [
        _evaluate_one(net, codes, labels, i, s, Plan.from_dict(d), safe, cost_key, cost_options)
        for i, s, d, safe in items
    ]


# ---------------------------------------------------------------------------------
# the driver side
def _check_cost_key(cost: str) -> str:
    if cost not in COST_KEYS:
        raise ValueError(f"cost must be one of {', '.join(COST_KEYS)}, not {cost!r}")
    return cost


def _prepare_data(network: Network, codes: Any, labels: Any) -> tuple[np.ndarray, np.ndarray | None]:
    flat, shape = as_codes(codes, network.input_bits, network.n_in)
    flat = np.ascontiguousarray(flat)
    lab = None
    if labels is not None:
        lab = check_labels(labels, flat.shape[0], shape, len(network.classes))
        lab = lab.astype(np.int16 if len(network.classes) < 32768 else np.int64)
    return flat, lab


def _evaluate(
    runner: _Runner, network: Network, codes: np.ndarray, labels: np.ndarray | None,
    items: list[_Item],
    cost_key: str, cost_options: dict[str, Any], progress: Progress | None, chunks_per_worker: int = 4,
) -> list[SweepRecord]:  # fmt: skip
    total = len(items)
    if progress is not None:
        progress(0, total)
    if not items:
        return []
    n_chunks = min(total, runner.workers * chunks_per_worker) if runner.workers > 1 else 1
    if isinstance(runner.executor, SerialExecutor):
        n_chunks = min(total, 16) if progress is not None else 1
    bounds = np.linspace(0, total, n_chunks + 1).round().astype(int)
    doc = network.to_dict()
    futures = {}
    for a, b in zip(bounds[:-1], bounds[1:]):
        if b > a:
            fut = runner.executor.submit(_run_chunk, doc, codes, labels, items[a:b], cost_key, cost_options)
            futures[fut] = b - a
    done = 0
    records: list[SweepRecord] = []
    try:
        for fut in cf.as_completed(futures):
            records.extend(fut.result())
            done += futures[fut]
            if progress is not None:
                progress(done, total)
    except BaseException:
        for fut in futures:
            fut.cancel()
        raise
    records.sort(key=lambda r: r.index)
    return records


def _cost_options(cost_options: Mapping[str, Any] | None) -> dict[str, Any]:
    opts = dict(cost_options or {})
    allowed = ("multipliers", "multiplier_size", "block_bits", "pipeline_stages")
    for k in opts:
        if k not in allowed:
            raise ValueError(f"cost_options key must be one of {', '.join(allowed)}, not {k!r}")
    if "multiplier_size" in opts:
        opts["multiplier_size"] = tuple(opts["multiplier_size"])
    return opts


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
    _check_cost_key(cost)
    opts = _cost_options(cost_options)
    flat, lab = _prepare_data(network, codes, labels)
    items: list[_Item] = [(i, (), p.to_dict(), False) for i, p in enumerate(plans)]
    runner = _Runner(executor, len(items) * flat.shape[0])
    try:
        return _evaluate(runner, network, flat, lab, items, cost, opts, progress)
    finally:
        runner.close()


# ---------------------------------------------------------------------------------
# grids
def parse_grid(spec: str) -> dict[str, list[Any]]:
    """Parse ``'weight_frac=3:8,table_bits=8:14'`` into ``{field: values}``.

    Each item is ``FIELD=VALUES`` with VALUES ``A:B`` (integers A to B, both
    included), ``A:B:STEP``, ``V`` or ``V1|V2|...`` (integers, or the names of a
    choice field such as ``acc_overflow=wrap|saturate``).

    >>> parse_grid("weight_frac=3:5,acc_overflow=wrap|saturate")
    {'weight_frac': [3, 4, 5], 'acc_overflow': ['wrap', 'saturate']}
    """
    if not isinstance(spec, str):
        raise TypeError(f"grid must be a string, not {spec!r}")
    grid: dict[str, list[Any]] = {}
    for item in (s.strip() for s in spec.split(",")):
        if not item:
            continue
        name, eq, values = item.partition("=")
        name, values = name.strip(), values.strip()
        if not eq or not values:
            raise ValueError(f"grid item must be FIELD=VALUES, not {item!r}")
        if name in grid:
            raise ValueError(f"grid field {name!r} is given twice")
        if name in CHOICES:
            grid[name] = [v.strip() for v in values.split("|")]
        elif name in INT_LIMITS:
            try:
                if ":" in values:
                    parts = [int(v) for v in values.split(":")]
                    if len(parts) not in (2, 3) or (len(parts) == 3 and parts[2] <= 0):
                        raise ValueError
                    step = parts[2] if len(parts) == 3 else 1
                    grid[name] = list(range(parts[0], parts[1] + 1, step))
                else:
                    grid[name] = [int(v) for v in values.split("|")]
            except ValueError:
                raise ValueError(
                    f"grid values of {name} must be A:B, A:B:STEP (STEP > 0) or V1|V2 integers, not {values!r}"
                ) from None
            if not grid[name]:
                raise ValueError(f"grid values of {name} must not be empty, not {values!r}")
        else:
            raise ValueError(f"grid field must be a plan key ({', '.join(PLAN_FIELDS)}), not {name!r}")
    if not grid:
        raise ValueError(f"grid must name at least one field, not {spec!r}")
    return grid


def _check_grid(grid: Any) -> dict[str, list[Any]]:
    if isinstance(grid, str):
        grid = parse_grid(grid)
    if not isinstance(grid, Mapping) or not grid:
        raise TypeError(f"grid must be a non-empty mapping of plan field to values, not {grid!r}")
    out: dict[str, list[Any]] = {}
    for name, values in grid.items():
        if name not in PLAN_FIELDS:
            raise ValueError(f"grid field must be a plan key ({', '.join(PLAN_FIELDS)}), not {name!r}")
        vals = [values] if isinstance(values, (int, str)) else list(values)
        if not vals:
            raise ValueError(f"grid values of {name} must not be empty, not {values!r}")
        for v in vals:
            if name in INT_LIMITS:
                if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
                    raise TypeError(f"grid values of {name} must be integers, not {v!r}")
                lo, hi = INT_LIMITS[name]
                if not lo <= v <= hi:
                    raise ValueError(f"grid values of {name} must be between {lo} and {hi}, not {int(v)!r}")
            elif v not in CHOICES[name]:
                raise ValueError(f"grid values of {name} must be one of {', '.join(CHOICES[name])}, not {v!r}")
        out[name] = [int(v) if name in INT_LIMITS else v for v in vals]
    return out


#: (width, frac) pairs that move together under ``keep_range``
_PAIRS = (("weight_bits", "weight_frac"), ("table_bits", "table_frac"), ("out_bits", "out_frac"))


def _apply(network: Network, base: Plan, settings: dict[str, Any], layer: int | None, keep_range: bool) -> Plan:
    layers = list(base.layers)
    for i in range(len(layers)) if layer is None else [layer]:
        vals = dict(settings)
        lp = layers[i]
        if network.layers[i].activation in ("relu", "identity"):
            for k in _TABLE_FIELDS:
                vals.pop(k, None)
        if keep_range:
            for bits, frac in _PAIRS:
                old_bits, old_frac = getattr(lp, bits), getattr(lp, frac)
                if old_bits is None or old_frac is None or (bits in vals) == (frac in vals):
                    continue
                if bits in vals:
                    vals[frac] = old_frac + vals[bits] - old_bits
                else:
                    vals[bits] = old_bits + vals[frac] - old_frac
        where = f"layers[{i}]."
        for k, v in vals.items():
            lo, hi = INT_LIMITS.get(k, (None, None))
            if lo is not None and not lo <= v <= hi:
                raise ValueError(f"{where}{k} must be between {lo} and {hi}, not {v!r}")
        layers[i] = replace(lp, **vals)
    return Plan(tuple(layers)).check(network)


def sweep(
    network: Network,
    codes: Any,
    grid: Mapping[str, Iterable[Any]] | str,
    *,
    base: Plan | None = None,
    layer: int | None = None,
    labels: Any = None,
    safe_acc: bool = True,
    keep_range: bool = True,
    cost: str = "total_bits",
    cost_options: Mapping[str, Any] | None = None,
    executor: Any = None,
    progress: Progress | None = None,
) -> list[SweepRecord]:
    """Evaluate every combination of ``grid`` on the data; one record per plan.

    Parameters
    ----------
    network, codes
        The float network and the input codes (N x n_in, or an image).
    grid
        ``{plan field: values}`` (or a :func:`parse_grid` string); the plans are
        the cartesian product, first field slowest, in the order given.
    base
        The plan the grid changes (default :func:`start_plan`).
    layer
        0-based layer the grid applies to; None (default) applies it to every
        layer (table fields skip relu/identity layers).
    labels
        Optional class labels, for accuracy.
    safe_acc
        When ``acc_bits`` is not a grid field, set every layer's ``acc_bits`` to
        its guaranteed-safe width for that plan (default True).
    keep_range
        When a grid sets only one of a width and its frac (``weight_bits`` /
        ``weight_frac``, ``table_bits`` / ``table_frac``, ``out_bits`` / an
        explicit ``out_frac``), move the other by the same amount, so the range
        stays that of ``base`` and only the resolution changes (default True).
        A combination that leaves a field's limits is a refused record.
    cost
        The total used as ``record.cost`` (one of ``COST_KEYS``).
    cost_options
        Keyword arguments of :func:`hardware_cost`.
    executor
        None (a local process pool, or this process for small work), any
        :class:`concurrent.futures.Executor`, or a ``dask.distributed.Client``.
    progress
        ``progress(done, total)`` after each finished chunk (see :func:`text_progress`).
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    g = _check_grid(grid)
    _check_cost_key(cost)
    opts = _cost_options(cost_options)
    n_layers = len(network.layers)
    if layer is not None and (isinstance(layer, bool) or not isinstance(layer, int) or not 0 <= layer < n_layers):
        raise ValueError(f"layer must be None or an index from 0 to {n_layers - 1}, not {layer!r}")
    if base is None:
        base = start_plan(network)
    elif not isinstance(base, Plan):
        raise TypeError(f"base must be a Plan, not {type(base).__name__}")
    base.check(network)
    flat, lab = _prepare_data(network, codes, labels)
    names = list(g)
    derive = safe_acc and "acc_bits" not in g
    items = []
    refused = []
    for i, combo in enumerate(itertools.product(*(g[k] for k in names))):
        settings = tuple(zip(names, combo))
        try:
            plan = _apply(network, base, dict(settings), layer, keep_range)
        except ValueError as exc:
            refused.append(SweepRecord(i, settings, base, None, cost, error=str(exc)))
            continue
        items.append((i, settings, plan.to_dict(), derive))
    runner = _Runner(executor, len(items) * flat.shape[0])
    try:
        records = _evaluate(runner, network, flat, lab, items, cost, opts, progress)
    finally:
        runner.close()
    return sorted(records + refused, key=lambda r: r.index)


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


# ---------------------------------------------------------------------------------
# start plan and tune
def _float_bounds(network: Network) -> list[tuple[np.ndarray, np.ndarray]]:
    """Interval bounds of every layer's float output over all inputs."""
    n = 1 << network.input_bits
    lo = np.zeros(network.n_in)
    hi = np.full(network.n_in, (n - 1) * network.input_factor())
    out = []
    from ..network import activate

    for L in network.layers:
        w = L.weights
        s_lo = L.bias + np.minimum(w * lo, w * hi).sum(axis=1)
        s_hi = L.bias + np.maximum(w * lo, w * hi).sum(axis=1)
        lo, hi = activate(s_lo, L.activation), activate(s_hi, L.activation)
        out.append((lo, hi))
    return out


def _max_frac(m: float, bits: int, mode: str = "half-even") -> int:
    """The largest frac (within limits) at which ``m >= 0`` rounds into a signed ``bits``-bit code."""
    lo, hi = INT_LIMITS["weight_frac"]
    top = (1 << (bits - 1)) - 1
    if m == 0:
        return min(bits - 1, hi)

    def fits(f: int) -> bool:
        return round_scalar(math.ldexp(m, f), mode) <= top

    f = min(max(bits - 1 - math.frexp(m)[1], lo), hi)
    while f < hi and fits(f + 1):
        f += 1
    while f > lo and not fits(f):
        f -= 1
    return f


def start_plan(network: Network, *, weight_bits: int = 16, table_bits: int = 14, out_bits: int = 12) -> Plan:
    """A generous plan whose accumulators cannot overflow: the start of :func:`tune`.

    Per layer: ``weight_bits`` with the largest ``weight_frac`` that clips no
    weight; sigmoid/tanh tables of ``table_bits`` covering ``[-2**r, 2**r)`` with
    ``r = ceil(log2((out_bits + 1) ln 2))`` (beyond it a sigmoid's entries are all
    0 or full scale, and a tanh's within half an LSB of -1 or 1);
    relu/identity outputs of ``out_bits`` with the finest ``out_frac`` that holds
    the float interval bound of the layer's output; ``acc_bits`` the
    guaranteed-safe width.
    """
    layers = []
    bounds = _float_bounds(network)
    for i, L in enumerate(network.layers):
        w = np.asarray(L.weights, dtype=np.float64)
        if i == 0 and network.input_scale == "full":
            n = 1 << network.input_bits
            w = w * (n / (n - 1))
        fw = _max_frac(float(np.max(np.abs(w))), weight_bits)
        doc: dict[str, Any] = {"weight_bits": weight_bits, "weight_frac": fw, "acc_bits": 62, "out_bits": out_bits}
        if L.activation in ("sigmoid", "tanh"):
            r = math.ceil(math.log2((out_bits + 1) * math.log(2)))
            doc["table_bits"] = table_bits
            doc["table_frac"] = table_bits - 1 - r
        else:
            lo, hi = bounds[i]
            m = float(max(np.max(np.abs(lo)), np.max(np.abs(hi))))
            signed = L.activation == "identity"
            fo = _max_frac(m, out_bits if signed else out_bits + 1)
            doc["out_frac"] = fo
        layers.append(LayerPlan.from_dict(doc, f"layers[{i}]."))
    return with_safe_acc(network, Plan(tuple(layers)).check(network))


#: the moves of :func:`tune`, each reducing one width by ``d`` bits
TUNE_MOVES = ("weight_lsb", "weight_msb", "acc_msb", "table_lsb", "table_msb", "out_lsb", "out_msb")
_STEPS = (1, 2, 4)


def _move(network: Network, plan: Plan, layer: int, move: str, d: int) -> Plan | None:
    lp = plan.layers[layer]
    act = network.layers[layer].activation
    table = act in ("sigmoid", "tanh")
    v: dict[str, Any]
    if move == "weight_lsb":
        v = {"weight_bits": lp.weight_bits - d, "weight_frac": lp.weight_frac - d}
    elif move == "weight_msb":
        v = {"weight_bits": lp.weight_bits - d}
    elif move == "acc_msb":
        v = {"acc_bits": lp.acc_bits - d}
    elif move == "table_lsb" and table:
        assert lp.table_bits is not None and lp.table_frac is not None
        v = {"table_bits": lp.table_bits - d, "table_frac": lp.table_frac - d}
    elif move == "table_msb" and table:
        assert lp.table_bits is not None
        v = {"table_bits": lp.table_bits - d}
    elif move == "out_lsb":
        v = {"out_bits": lp.out_bits - d}
        if lp.out_frac is not None:
            v["out_frac"] = lp.out_frac - d
    elif move == "out_msb" and not table:
        v = {"out_bits": lp.out_bits - d}
    else:
        return None
    for k, x in v.items():
        lo, hi = INT_LIMITS[k]
        if not lo <= x <= hi:
            return None
    return Plan(tuple(replace(p, **v) if j == layer else p for j, p in enumerate(plan.layers)))


def _width_sum(plan: Plan) -> int:
    return sum(lp.weight_bits + lp.acc_bits + (lp.table_bits or 0) + lp.out_bits for lp in plan.layers)


@dataclass(frozen=True)
class TuneStep:
    """One accepted move of :func:`tune`."""

    move: str
    layer: int
    bits: int
    cost: int
    mismatch: int


@dataclass(frozen=True, eq=False)
class TuneResult:
    """Answer of :func:`tune`.

    Attributes
    ----------
    plan : the cheapest plan found that meets the budget
    start : the guaranteed-safe plan it started from
    max_mismatch : the budget (fraction of decisions that may differ from float)
    steps : the accepted moves, in order
    records : every plan evaluated, in evaluation order
    metrics, cost : verification: a final emulation of ``plan`` on the data, and its cost
    verified : the final emulation meets the budget with no accumulator overflow
    local_minimum : every one-bit move of :data:`TUNE_MOVES` from ``plan`` breaks the budget or is impossible
    """

    plan: Plan
    start: Plan
    max_mismatch: float
    cost_key: str
    steps: tuple[TuneStep, ...]
    records: tuple[SweepRecord, ...]
    metrics: ErrorMetrics
    cost: HardwareCost
    verified: bool
    local_minimum: bool

    def summary(self) -> str:
        start_rec = self.records[0]
        lines = [
            f"tune: budget {self.max_mismatch:g} of decisions may differ from float, no accumulator overflow",
            f"  start {self.cost_key} {start_rec.cost}, answer {self.cost.value(self.cost_key)} "
            f"after {len(self.steps)} moves, {len(self.records)} plans evaluated",
            f"  answer: {self.metrics.mismatch} of {self.metrics.n} decisions differ "
            f"({100 * self.metrics.mismatch_fraction:.4f} %); verified {'yes' if self.verified else 'NO'}; "
            f"local minimum {'yes' if self.local_minimum else 'no'}",
        ]
        for i, lp in enumerate(self.plan.layers):
            lines.append(f"  layer {i + 1}: {lp!r}")
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        return {
            "plan": self.plan.to_dict(),
            "start": self.start.to_dict(),
            "max_mismatch": self.max_mismatch,
            "cost_key": self.cost_key,
            "steps": [s.__dict__ for s in self.steps],
            "evaluated": len(self.records),
            "metrics": self.metrics.to_dict(),
            "cost": self.cost.to_dict(),
            "verified": self.verified,
            "local_minimum": self.local_minimum,
        }


def tune(
    network: Network,
    codes: Any,
    max_mismatch: float = 0.001,
    *,
    labels: Any = None,
    start: Plan | None = None,
    cost: str = "total_bits",
    cost_options: Mapping[str, Any] | None = None,
    executor: Any = None,
    progress: Progress | None = None,
    max_rounds: int = 500,
) -> TuneResult:
    """The cheapest plan found that meets an error budget on the data.

    A plan is *acceptable* when at most ``max_mismatch`` (a fraction) of its
    decisions differ from float on ``codes`` and no accumulator overflows on
    them. Starting from ``start`` (default :func:`start_plan`, whose
    accumulators cannot overflow), each round evaluates every move of
    :data:`TUNE_MOVES` on every layer by 1, 2 and 4 bits (``weight_lsb``:
    ``weight_bits`` and ``weight_frac`` down, the same range with fewer fraction
    bits; ``weight_msb``: ``weight_bits`` down; ``acc_msb``: ``acc_bits`` down;
    ``table_lsb`` / ``table_msb``: ``table_bits`` down with / without
    ``table_frac``; ``out_lsb``: ``out_bits`` (and an explicit ``out_frac``) down;
    ``out_msb``: relu/identity ``out_bits`` down) and takes the acceptable one
    with the lowest cost (ties: fewer total bits, then move order). It stops when
    no move is acceptable.

    Guarantee: the answer is acceptable (checked by a final emulation,
    ``verified``), and reducing any single width of it by one bit in any of these
    ways breaks the budget or is impossible (``local_minimum``). It is a local
    search: a cheaper acceptable plan elsewhere is not ruled out. Deterministic:
    the same answer whatever executor runs it.
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if isinstance(max_mismatch, bool) or not isinstance(max_mismatch, (int, float)):
        raise TypeError(f"max_mismatch must be a number, not {max_mismatch!r}")
    if not 0 <= max_mismatch <= 1:
        raise ValueError(f"max_mismatch must be between 0 and 1, not {max_mismatch!r}")
    _check_cost_key(cost)
    opts = _cost_options(cost_options)
    flat, lab = _prepare_data(network, codes, labels)
    if start is None:
        start = start_plan(network)
    elif not isinstance(start, Plan):
        raise TypeError(f"start must be a Plan, not {type(start).__name__}")
    start.check(network)

    def acceptable(r: SweepRecord) -> bool:
        return r.ok and r.mismatch_fraction is not None and r.mismatch_fraction <= max_mismatch and not r.events.get(
            "acc_overflow", 0
        )

    n_moves = len(network.layers) * len(TUNE_MOVES) * len(_STEPS)
    runner = _Runner(executor, n_moves * flat.shape[0] * 4)
    records: list[SweepRecord] = []
    seen: dict[Plan, SweepRecord] = {}

    def run(plans: list[Plan]) -> list[SweepRecord]:
        todo = [p for p in dict.fromkeys(plans) if p not in seen]
        items: list[_Item] = [(len(records) + i, (), p.to_dict(), False) for i, p in enumerate(todo)]
        got = _evaluate(runner, network, flat, lab, items, cost, opts, progress, chunks_per_worker=1)
        for p, r in zip(todo, got):
            seen[p] = r
        records.extend(got)
        return [seen[p] for p in plans]

    steps: list[TuneStep] = []
    try:
        (cur,) = run([start])
        if not acceptable(cur):
            why = (
                cur.error
                if not cur.ok
                else f"{cur.mismatch_fraction:.6g} of decisions differ from float and "
                f"{cur.events.get('acc_overflow', 0)} accumulator overflows"
            )
            raise ValueError(
                f"the starting plan must meet the budget (max_mismatch {max_mismatch:g}, no accumulator "
                f"overflow), not {why}; give a wider start"
            )
        plan = start
        for _ in range(max_rounds):
            cands = []
            for layer in range(len(network.layers)):
                for move in TUNE_MOVES:
                    for d in _STEPS:
                        p = _move(network, plan, layer, move, d)
                        if p is not None:
                            cands.append((move, layer, d, p))
            recs = run([c[3] for c in cands])
            best = None
            for order, (c, r) in enumerate(zip(cands, recs)):
                if acceptable(r):
                    key = (r.cost, _width_sum(c[3]), order)
                    if best is None or key < best[0]:
                        best = (key, c, r)
            if best is None:
                break
            _, (move, layer, d, plan), cur = best
            assert cur.cost is not None and cur.mismatch is not None
            steps.append(TuneStep(move, layer, d, cur.cost, cur.mismatch))
    finally:
        runner.close()
    one_bit = [p for layer in range(len(network.layers)) for m in TUNE_MOVES
               if (p := _move(network, plan, layer, m, 1)) is not None]  # fmt: skip
    local_min = all(not acceptable(seen[p]) for p in one_bit if p in seen) and all(p in seen for p in one_bit)
    result = emulate(network, plan, codes)
    metrics = error_metrics(result, labels)
    hw = hardware_cost(network, plan, **opts)
    verified = metrics.mismatch_fraction <= max_mismatch and metrics.events["acc_overflow"] == 0
    return TuneResult(
        plan, start, float(max_mismatch), cost, tuple(steps), tuple(records), metrics, hw, verified, local_min
    )
