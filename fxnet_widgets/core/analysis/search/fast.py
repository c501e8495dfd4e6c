"""One plan's record by the fast path: the same figures as the reference, with less work per plan.

A search runs many plans on the same data. With the compiled loops in use (see
:mod:`...kernel._compiled`) a worker evaluates each plan here instead of through
:func:`~fxnet_widgets.core.starting.with_safe_acc` and
:func:`~fxnet_widgets.core.analysis.metrics.error_metrics`:

* the guaranteed-safe widths come from :func:`~fxnet_widgets.core.kernel.build.safe_acc_widths`,
  which walks the layers through the cached weight and table parts (no second build of the
  whole integer network at the widest accumulators);
* the output error comes from :func:`~fxnet_widgets.core.analysis.metrics.output_errors`, the
  same function the reference's metrics use (one fused compiled pass per output, then numpy's
  ``max`` and ``mean``), so the floats are the reference's bit for bit; the record keeps only
  the scalars a search needs.

``FXNET_KERNEL=numpy`` keeps every plan on the reference path, and the tests run both
paths on the same random cases and require identical records.
"""

from __future__ import annotations

import copy
from typing import Any

import numpy as np

from ...kernel import emulate
from ...kernel.build import safe_acc_widths
from ...kernel.evaluate import Prepared
from ...network import Network
from ...plan import LayerPlan, Plan, check_field
from ..cost import hardware_cost
from ..metrics import output_errors
from .records import SweepRecord

__all__ = ["evaluate_fast"]

def _error_stats(result: Any) -> tuple[float, float]:
    """(largest, mean over outputs of the mean) output error in LSBs, as the reference computes them."""
    _err, mx, mn, out_frac = output_errors(result)
    scale = 2.0**out_frac
    return max(float(v * scale) for v in mx), float(np.mean([float(v * scale) for v in mn]))


def _with_acc(lp: LayerPlan, acc_bits: int) -> LayerPlan:
    """``dataclasses.replace(lp, acc_bits=acc_bits)`` checking only the field that changes."""
    check_field("acc_bits", acc_bits, "")  # what replace's full check says about it, word for word
    out = copy.copy(lp)
    object.__setattr__(out, "acc_bits", acc_bits)
    return out


def evaluate_fast(
    net: Network, prep: Prepared, labels: np.ndarray | None, index: int, settings: tuple[tuple[str, Any], ...],
    plan: Plan, safe_acc: bool, cost_key: str, options: dict[str, Any],
) -> SweepRecord:  # fmt: skip
    """The record of one plan (the reference's figures; :func:`.evaluate._evaluate_one` is the reference)."""
    from .evaluate import argmax_ties  # the module that calls this one

    try:
        if safe_acc:
            widths = safe_acc_widths(net, plan)
            plan = Plan(tuple(_with_acc(lp, w) for lp, w in zip(plan.layers, widths)))
        result = emulate(net, plan, prep)
        cost = hardware_cost(net, plan, **options)
    except ValueError as exc:
        return SweepRecord(index, settings, plan, None, cost_key, error=str(exc))
    n = result.n
    mx, mn = _error_stats(result)
    dec = result._decisions
    fdec = np.asarray(result.float_decisions).reshape(-1)
    mismatch = int(np.count_nonzero(dec != fdec))
    accuracy = None
    if labels is not None:
        accuracy = float(np.count_nonzero(dec == labels) / n) if n else 0.0
    ties, tied_agreeing = argmax_ties(result.out_codes, result.decisions, result.float_decisions)
    return SweepRecord(
        index=index, settings=settings, plan=plan, cost=cost.value(cost_key), cost_key=cost_key,
        costs=cost.totals(), mismatch=mismatch, mismatch_fraction=mismatch / n if n else 0.0,
        max_abs_error_lsb=mx, mean_abs_error_lsb=mn, accuracy=accuracy, events=result.event_totals(),
        ties=ties, tied_agreeing=tied_agreeing,
    )  # fmt: skip
