"""Starting plans: the largest fraction that keeps a range, the safe-accumulator plan, start plans.

Every plan the product proposes without a search starts here: the explorer's
and the demo's suggested plan and the generous start of :func:`tune`.

>>> from fxnet_widgets.core.network import Network
>>> net = Network.from_layers([([[2.0, -1.0, 0.5]], [-0.5], "sigmoid")])
>>> start_plan(net).layers[0].weight_frac
13
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import replace
from typing import Any

import numpy as np

from .formats import round_scalar
from .kernel import quantise as build_integer_network
from .network import Network, activate
from .plan import INT_LIMITS, LayerPlan, Plan

__all__ = ["largest_frac", "with_safe_acc", "start_plan"]


def with_safe_acc(network: Network, plan: Plan, layers: Iterable[int] | None = None) -> Plan:
    """``plan`` with ``acc_bits`` of ``layers`` (default all) set to the guaranteed-safe width."""
    wide = Plan(tuple(replace(lp, acc_bits=INT_LIMITS["acc_bits"][1]) for lp in plan.layers))
    intnet = build_integer_network(network, wide)
    out = list(plan.layers)
    for i in range(len(out)) if layers is None else layers:
        out[i] = replace(out[i], acc_bits=int(np.max(intnet.layers[i].safe_acc_bits)))
    return Plan(tuple(out))


def _float_bounds(network: Network) -> list[tuple[np.ndarray, np.ndarray]]:
    """Interval bounds of every layer's float output over all inputs."""
    n = 1 << network.input_bits
    lo = np.zeros(network.n_in)
    hi = np.full(network.n_in, (n - 1) * network.input_factor())
    out = []
    for L in network.layers:
        w = L.weights
        s_lo = L.bias + np.minimum(w * lo, w * hi).sum(axis=1)
        s_hi = L.bias + np.maximum(w * lo, w * hi).sum(axis=1)
        lo, hi = activate(s_lo, L.activation), activate(s_hi, L.activation)
        out.append((lo, hi))
    return out


def largest_frac(m: float, bits: int, mode: str = "half-even") -> int:
    """The largest frac (within limits) at which ``m >= 0`` rounds into a signed ``bits``-bit code.

    >>> largest_frac(1.0, 8)   # 1.0 * 2**6 = 64 <= 127; 1.0 * 2**7 = 128 is not
    6
    """
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
        fw = largest_frac(float(np.max(np.abs(w))), weight_bits)
        doc: dict[str, Any] = {"weight_bits": weight_bits, "weight_frac": fw, "acc_bits": 62, "out_bits": out_bits}
        if L.activation in ("sigmoid", "tanh"):
            r = math.ceil(math.log2((out_bits + 1) * math.log(2)))
            doc["table_bits"] = table_bits
            doc["table_frac"] = table_bits - 1 - r
        else:
            lo, hi = bounds[i]
            m = float(max(np.max(np.abs(lo)), np.max(np.abs(hi))))
            signed = L.activation == "identity"
            fo = largest_frac(m, out_bits if signed else out_bits + 1)
            doc["out_frac"] = fo
        layers.append(LayerPlan.from_dict(doc, f"layers[{i}]."))
    return with_safe_acc(network, Plan(tuple(layers)).check(network))
