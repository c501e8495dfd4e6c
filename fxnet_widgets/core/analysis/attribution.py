"""Error attribution: which stage of a plan causes the disagreement with float.

For each stage, the plan is re-run with that one stage made generous (every
other setting unchanged), and the disagreement that disappears is credited to
the stage. The generous versions (all layers at once, or one layer):

``weights``
    weight and bias quantisation: ``weight_frac`` and ``weight_bits`` grow by
    ``d`` bits (so the same range, ``d`` more fraction bits), plus the integer
    bits that stop every weight clip; ``acc_bits`` grows by ``d`` too, so the
    accumulator overflows at the same real value as before. ``d`` is as large as
    the limits allow, at most 16 (``weight_bits <= 32``, ``acc_bits <= 62``).
``accumulator``
    ``acc_bits`` is raised to the guaranteed-safe width (never lowered), so no
    accumulator can overflow.
``table address``
    the table index is exact over the whole accumulator range: ``table_frac`` =
    the accumulator's frac and ``table_bits = acc_bits`` (shift 0, no clamp),
    or, when that exceeds the 20-bit limit, ``table_bits = 20`` with the finest
    ``table_frac`` that still covers the accumulator range. Sigmoid/tanh only.
``table output``
    ``out_bits`` grows by ``d`` to 16 with ``out_frac`` up by ``d`` (same range,
    ``d`` more fraction bits); the next layer's ``acc_bits`` grows by ``d`` so its
    overflow point is unchanged.

Stages interact, so the credits need not add up to the total; the ``all`` row
makes every stage generous at once and shows what is left.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from ..formats import round_float
from ..kernel import build_integer_network, emulate
from ..network import Network
from ..plan import INT_LIMITS, Plan
from .metrics import error_metrics

__all__ = ["STAGES", "Attribution", "AttributionRow", "attribute_errors", "generous_plan"]

STAGES = ("weights", "accumulator", "table address", "table output")
_MAX_D = 16


def _weight_int_bits(w: np.ndarray, frac: int, bits: int, mode: str) -> int:
    """Extra bits so that no weight clips at ``frac`` fraction bits and ``bits`` width."""
    q = np.abs(round_float(np.ldexp(w, frac), mode)) - (w < 0)  # a negative code may reach -2^(W-1)
    m = int(np.max(q)) if q.size else 0
    extra = 0
    while extra < 64 and m > (1 << (bits + extra - 1)) - 1:
        extra += 1
    return extra


def generous_plan(network: Network, plan: Plan, stage: str, layer: int | None = None) -> Plan:
    """``plan`` with one stage made generous (see the module text for exactly how).

    ``layer`` (0-based) limits the change to one layer; ``None`` changes every layer.
    """
    if stage not in STAGES:
        raise ValueError(f"stage must be one of {', '.join(STAGES)}, not {stage!r}")
    plan.check(network)
    n = len(plan.layers)
    if layer is not None and (isinstance(layer, bool) or not isinstance(layer, int) or not 0 <= layer < n):
        raise ValueError(f"layer must be None or an index from 0 to {n - 1}, not {layer!r}")
    which = range(n) if layer is None else [layer]
    intnet = build_integer_network(network, plan)
    layers = list(plan.layers)
    amax = INT_LIMITS["acc_bits"][1]
    for i in which:
        lp = layers[i]
        L = network.layers[i]
        il = intnet.layers[i]
        if stage == "weights":
            w = np.asarray(L.weights, dtype=np.float64)
            if i == 0 and network.input_scale == "full":
                nn = 1 << network.input_bits
                w = w * (nn / (nn - 1))
            d = min(_MAX_D, INT_LIMITS["weight_frac"][1] - lp.weight_frac, amax - lp.acc_bits)
            d = max(d, 0)
            extra = _weight_int_bits(w, lp.weight_frac + d, lp.weight_bits + d, lp.weight_round)
            wb = min(lp.weight_bits + d + extra, INT_LIMITS["weight_bits"][1])
            layers[i] = replace(lp, weight_bits=wb, weight_frac=lp.weight_frac + d, acc_bits=lp.acc_bits + d)
        elif stage == "accumulator":
            safe = int(np.max(il.safe_acc_bits))
            layers[i] = replace(lp, acc_bits=min(max(lp.acc_bits, safe), amax))
        elif stage == "table address":
            if il.table is None:
                continue
            acc_frac = il.acc_frac
            tmax = INT_LIMITS["table_bits"][1]
            if lp.acc_bits <= tmax:
                tb, tf = lp.acc_bits, acc_frac
            else:
                tb, tf = tmax, acc_frac - (lp.acc_bits - tmax)
            tf = max(min(tf, INT_LIMITS["table_frac"][1]), INT_LIMITS["table_frac"][0])
            layers[i] = replace(lp, table_bits=tb, table_frac=tf)
        else:  # table output
            d = INT_LIMITS["out_bits"][1] - lp.out_bits
            if i + 1 < n:
                d = min(d, amax - layers[i + 1].acc_bits)
            of = lp.resolved_out_frac(L.activation)
            d = max(min(d, INT_LIMITS["out_frac"][1] - of), 0)
            if d == 0:
                continue
            layers[i] = replace(lp, out_bits=lp.out_bits + d, out_frac=of + d)
            if i + 1 < n:
                nxt = layers[i + 1]
                layers[i + 1] = replace(nxt, acc_bits=nxt.acc_bits + d)
    return Plan(tuple(layers)).check(network)


@dataclass(frozen=True)
class AttributionRow:
    """One stage made generous: the disagreement left and the part removed."""

    stage: str
    plan: Plan
    mismatch: int
    mismatch_fraction: float
    removed: int
    share: float
    mean_abs_error_lsb: float
    accuracy: float | None

    def to_dict(self) -> dict[str, Any]:
        return {
            "stage": self.stage,
            "mismatch": self.mismatch,
            "mismatch_fraction": self.mismatch_fraction,
            "removed": self.removed,
            "share": self.share,
            "mean_abs_error_lsb": self.mean_abs_error_lsb,
            "accuracy": self.accuracy,
            "plan": self.plan.to_dict(),
        }


@dataclass(frozen=True)
class Attribution:
    """Disagreement of a plan, per stage (see :func:`attribute_errors`)."""

    plan: Plan
    layer: int | None
    n: int
    mismatch: int
    mismatch_fraction: float
    mean_abs_error_lsb: float
    accuracy: float | None
    rows: tuple[AttributionRow, ...]
    all_generous: AttributionRow

    def bar_data(self) -> dict[str, list[Any]]:
        """Bar-chart-ready data: ``stage`` names and the ``removed`` mismatch counts and ``share``."""
        return {
            "stage": [r.stage for r in self.rows],
            "removed": [r.removed for r in self.rows],
            "share": [r.share for r in self.rows],
        }

    def to_dict(self) -> dict[str, Any]:
        return {
            "samples": self.n,
            "layer": self.layer,
            "mismatch": self.mismatch,
            "mismatch_fraction": self.mismatch_fraction,
            "mean_abs_error_lsb": self.mean_abs_error_lsb,
            "accuracy": self.accuracy,
            "rows": [r.to_dict() for r in self.rows],
            "all": self.all_generous.to_dict(),
        }

    def summary(self) -> str:
        """Deterministic text table."""
        where = "all layers" if self.layer is None else f"layer {self.layer + 1}"
        lines = [
            f"error attribution over {self.n} samples ({where}): {self.mismatch} decisions differ from float",
            f"  {'stage made generous':<22}{'mismatch':>10}{'removed':>10}{'share':>9}{'mean |err| LSB':>16}",
        ]
        for r in (*self.rows, self.all_generous):
            lines.append(
                f"  {r.stage:<22}{r.mismatch:>10d}{r.removed:>10d}{100 * r.share:>8.1f}%{r.mean_abs_error_lsb:>16.4f}"
            )
        return "\n".join(lines)


def attribute_errors(
    network: Network, plan: Plan, codes: Any, labels: Any = None, *, layer: int | None = None
) -> Attribution:
    """How much of the float-vs-fixed disagreement each stage of ``plan`` causes.

    Re-runs the emulation once per stage of :data:`STAGES` with that stage made
    generous (:func:`generous_plan`) and once with all of them generous.
    ``removed = base mismatch - mismatch with the stage generous`` (may be
    negative: a generous stage can also un-cancel errors); ``share = removed /
    base mismatch`` (0 when there is no mismatch). The mean absolute error of
    the mean output, in output LSBs of the plan being judged, is given beside it.
    """
    base = error_metrics(emulate(network, plan, codes), labels)
    lsb_scale = 2.0**base.out_frac

    def row(stage: str, p: Plan) -> AttributionRow:
        m = error_metrics(emulate(network, p, codes), labels)
        removed = base.mismatch - m.mismatch
        err = float(np.mean(m.mean_abs_error)) * lsb_scale
        return AttributionRow(
            stage, p, m.mismatch, m.mismatch_fraction, removed,
            removed / base.mismatch if base.mismatch else 0.0, err, m.accuracy,
        )  # fmt: skip

    rows = tuple(row(s, generous_plan(network, plan, s, layer)) for s in STAGES)
    p_all = plan
    for s in STAGES:
        p_all = generous_plan(network, p_all, s, layer)
    return Attribution(
        plan, layer, base.n, base.mismatch, base.mismatch_fraction, float(np.mean(base.mean_abs_error_lsb)),
        base.accuracy, rows, row("all", p_all),
    )  # fmt: skip
