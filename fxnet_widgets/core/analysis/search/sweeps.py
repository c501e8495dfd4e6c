"""Sweeps: every combination of a grid of plan settings, evaluated on the data."""

from __future__ import annotations

import itertools
from collections.abc import Iterable, Mapping
from typing import Any

from ...network import Network
from ...plan import Plan
from .evaluate import PlanTask, base_plan, check_cost_key, check_cost_options, evaluate, prepare_data
from .executors import Runner
from .grid import apply_settings, check_grid
from .progress import Progress
from .records import SweepRecord
from .refining import Reference, check_refine, refine_record

__all__ = ["sweep"]


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
    refine: bool | str = False,
    refine_options: Mapping[str, Any] | None = None,
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
        The plan the grid changes (default :func:`~fxnet_widgets.core.starting.start_plan`).
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
    refine, refine_options
        ``"rounding"`` (or True) or ``"both"``: every evaluated plan with a differing decision
        gets a bounded :func:`~fxnet_widgets.core.refine.refine` of its integers (as in
        :func:`tune`; ``refine_options`` of :class:`RefineSettings`, ``tries`` unused), in this
        process after the evaluation; when the refined network has fewer differing decisions
        (against the *original* float, ties counted as in :func:`tune`) and no more accumulator
        overflows, its figures replace the plan's and the record carries ``refined_network``.
        About a second per plan on 20,000 samples: refine small grids.
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    g = check_grid(grid)
    check_cost_key(cost)
    opts = check_cost_options(cost_options)
    n_layers = len(network.layers)
    if layer is not None and (isinstance(layer, bool) or not isinstance(layer, int) or not 0 <= layer < n_layers):
        raise ValueError(f"layer must be None or an index from 0 to {n_layers - 1}, not {layer!r}")
    refining = check_refine(refine, refine_options)
    flat, lab = prepare_data(network, codes, labels)
    base = base_plan(network, base, flat, "base")
    names = list(g)
    derive = safe_acc and "acc_bits" not in g
    tasks = []
    refused = []
    for i, combo in enumerate(itertools.product(*(g[k] for k in names))):
        settings = tuple(zip(names, combo))
        try:
            plan = apply_settings(network, base, dict(settings), layer, keep_range)
        except ValueError as exc:
            refused.append(SweepRecord(i, settings, base, None, cost, error=str(exc)))
            continue
        tasks.append(PlanTask(i, settings, plan.to_dict(), derive, plan))
    with Runner(executor, len(tasks) * flat.shape[0]) as runner:
        records = evaluate(runner, network, flat, lab, tasks, cost, opts, progress)
    if refining is not None:
        ref = Reference(network, flat, refining)
        for k, r in enumerate(records):
            if not r.ok or not r.strict_mismatch:
                continue
            rr = refine_record(ref, lab, r, r.index, cost, opts)
            if rr is not None and (rr.strict_mismatch or 0) < r.strict_mismatch and (
                rr.events.get("acc_overflow", 0) <= r.events.get("acc_overflow", 0)
            ):
                records[k] = rr
    return sorted(records + refused, key=lambda r: r.index)
