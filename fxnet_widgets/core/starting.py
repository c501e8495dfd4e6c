"""Starting plans: the largest fraction that keeps a range, the safe-accumulator plan, suggested plans.

Every plan the product proposes without a search comes from here: the
suggested plan of the explorer and the demo (:func:`suggest_plan`) and the
generous start of ``tune`` and ``sweep`` (:func:`start_plan`). Both follow one
rule, layer by layer (:func:`starting_plan`):

* weights: the largest ``weight_frac`` at which no weight clips;
* sigmoid/tanh: a table of ``table_bits`` covering sums in ``[-2**r, 2**r)``,
  ``r = ceil(log2((out_bits + 1) ln 2))`` (beyond it a sigmoid's entries are all
  0 or full scale, a tanh's within half an LSB of -1 or 1): ``[-8, 8)`` for
  8-bit outputs;
* relu/identity: ``out_bits`` fraction bits (the LSB of an ``out_bits``-bit
  sigmoid output) and the smallest width that holds the layer's output range
  (beyond 16 bits: 16 bits and the largest fraction that holds it). That range
  is the *guaranteed* one (interval analysis of the float network over every
  input, layer by layer through relu and identity, each layer's inputs bounded
  by the previous layer's format) or, when data is given, the *observed* range
  on the data widened by :data:`MARGIN` (a quarter of its magnitude), whichever
  is smaller. So nothing saturates on the data, and without data nothing can
  saturate at all. A relu or identity output has no bound of its own: when the
  kept range is the observed one, the plan's notes say so (inputs unlike the
  data may saturate). The layer's weights get at least enough fraction bits
  that rounding all of them moves a sum by at most half an output LSB (worst
  case over the layer's input range), and as many more bits as they need to clip none;
* accumulators: the guaranteed-safe width (:func:`with_safe_acc`), so no input
  can overflow.

>>> from fxnet_widgets.core.network import Network
>>> net = Network.from_layers([([[2.0, -1.0, 0.5]], [-0.5], "relu"), ([[1.0]], [0.0], "identity")])
>>> start = starting_plan(net)
>>> [(lp.out_bits, lp.out_frac) for lp in start.plan.layers]
[(9, 8), (10, 8)]
>>> print(start.notes[0])
layer 1 (relu): UQ1.8 (9 b) holds the guaranteed range [0, 1.99]
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .formats import q_notation, round_scalar
from .kernel import build_integer_network
from .network import Network, activate, as_codes
from .plan import INT_LIMITS, LayerPlan, Plan

__all__ = [
    "MARGIN",
    "LayerRange",
    "StartingPlan",
    "largest_frac",
    "starting_plan",
    "suggest_plan",
    "start_plan",
    "table_frac_for",
    "with_safe_acc",
]

#: the observed range of a relu/identity output is widened by this fraction of its magnitude
MARGIN = 0.25


def with_safe_acc(network: Network, plan: Plan, layers: Iterable[int] | None = None) -> Plan:
    """``plan`` with ``acc_bits`` of ``layers`` (default all) set to the guaranteed-safe width."""
    wide = Plan(tuple(replace(lp, acc_bits=INT_LIMITS["acc_bits"][1]) for lp in plan.layers))
    intnet = build_integer_network(network, wide)
    out = list(plan.layers)
    for i in range(len(out)) if layers is None else layers:
        out[i] = replace(out[i], acc_bits=int(np.max(intnet.layers[i].safe_acc_bits)))
    return Plan(tuple(out))


def largest_frac(lo: float, hi: float, bits: int, *, signed: bool = True, mode: str = "half-even") -> int:
    """The largest frac (within the plan's limits) at which every value in ``[lo, hi]`` rounds into range.

    The code range is signed ``[-2**(bits-1), 2**(bits-1) - 1]`` or unsigned
    ``[0, 2**bits - 1]``; values are rounded with ``mode``. An unsigned range
    must not reach below 0.

    >>> largest_frac(-1.0, 0.5, 8)   # -1.0 * 2**7 = -128 fits; 0.5 * 2**7 = 64 too
    7
    >>> largest_frac(0.0, 1.0, 8)    # 1.0 * 2**6 = 64 <= 127; 1.0 * 2**7 = 128 is not
    6
    >>> largest_frac(0.0, 1.0, 8, signed=False)
    7
    """
    if not lo <= hi or not math.isfinite(lo) or not math.isfinite(hi):
        raise ValueError(f"range must be finite with lo <= hi, not [{lo!r}, {hi!r}]")
    if not signed and lo < 0:
        raise ValueError(f"an unsigned range must not reach below 0, not {lo!r}")
    f_lo, f_hi = INT_LIMITS["weight_frac"]
    top = (1 << (bits - 1)) - 1 if signed else (1 << bits) - 1
    bottom = -(1 << (bits - 1)) if signed else 0
    m = max(abs(lo), abs(hi))
    if m == 0:
        return f_hi

    def fits(f: int) -> bool:
        return bottom <= round_scalar(math.ldexp(lo, f), mode) and round_scalar(math.ldexp(hi, f), mode) <= top

    f = min(max(bits - math.frexp(m)[1], f_lo), f_hi)
    while f < f_hi and fits(f + 1):
        f += 1
    while f > f_lo and not fits(f):
        f -= 1
    return f


def _width_for(lo: float, hi: float, frac: int, signed: bool, most: int) -> int:
    """The smallest width (at most ``most``) whose code range holds ``[lo, hi]`` at ``frac``."""
    b = 1
    while b < most and largest_frac(lo, hi, b, signed=signed) < frac:
        b += 1
    return b


def _out_format(lo: float, hi: float, resolution: int, signed: bool) -> tuple[int, int]:
    """(out_bits, out_frac) of a relu/identity output: ``resolution`` fraction bits, the width holding
    ``[lo, hi]``; beyond 16 bits, 16 bits with the largest fraction holding the range."""
    most = INT_LIMITS["out_bits"][1]
    bits = _width_for(lo, hi, resolution, signed, most)
    return bits, min(resolution, largest_frac(lo, hi, bits, signed=signed))


def table_frac_for(table_bits: int, out_bits: int) -> int:
    """``table_frac`` of a table covering ``[-2**r, 2**r)``, ``r = ceil(log2((out_bits + 1) ln 2))``.

    >>> table_frac_for(14, 8)   # r = 3: sums in [-8, 8)
    10
    """
    r = math.ceil(math.log2((out_bits + 1) * math.log(2)))
    return table_bits - 1 - r


@dataclass(frozen=True)
class LayerRange:
    """The output range of one layer, as :func:`starting_plan` saw it.

    Attributes
    ----------
    activation : the layer's activation
    guaranteed : (lo, hi) over every input (interval analysis)
    observed : (lo, hi) of the float network on the data, or None without data
    kept : (lo, hi) the output format was chosen to hold (None for table layers)
    source : ``"table"`` (sigmoid/tanh: the table rule), ``"guaranteed"`` or ``"observed"``
    """

    activation: str
    guaranteed: tuple[float, float]
    observed: tuple[float, float] | None
    kept: tuple[float, float] | None
    source: str


@dataclass(frozen=True)
class StartingPlan:
    """A starting plan and, per layer, the range it holds and why (``notes``)."""

    plan: Plan
    ranges: tuple[LayerRange, ...]
    margin: float
    notes: tuple[str, ...]


def _data_codes(network: Network, data: Any) -> np.ndarray | None:
    if data is None:
        return None
    parts = list(data) if isinstance(data, (list, tuple)) else [data]
    flats = [as_codes(p, network.input_bits, network.n_in, what="data")[0] for p in parts if p is not None]
    flats = [f for f in flats if f.size]
    return np.concatenate(flats) if flats else None


def _observed(network: Network, codes: np.ndarray | None) -> list[tuple[float, float]] | None:
    if codes is None:
        return None
    lo = [math.inf] * len(network.layers)
    hi = [-math.inf] * len(network.layers)
    factor = network.input_factor()
    for start in range(0, codes.shape[0], 65536):
        outs = network.forward(codes[start : start + 65536].astype(np.float64) * factor)
        for i, h in enumerate(outs):
            lo[i], hi[i] = min(lo[i], float(h.min())), max(hi[i], float(h.max()))
    return list(zip(lo, hi))


def _fmt(v: float) -> str:
    return f"{v:.3g}"


def starting_plan(
    network: Network,
    data: Any = None,
    *,
    weight_bits: int = 10,
    table_bits: int = 14,
    out_bits: int = 8,
    margin: float = MARGIN,
) -> StartingPlan:
    """The starting plan of the module's rule, with each layer's range and a note on it.

    ``data``: input codes (N x n_in or an image, or a list of them) whose observed
    output ranges the relu/identity formats must hold; None: the guaranteed
    ranges only. ``margin`` widens the observed range (a fraction of its magnitude).
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if isinstance(margin, bool) or not isinstance(margin, (int, float)) or not 0 <= margin <= 16:
        raise ValueError(f"margin must be a number between 0 and 16, not {margin!r}")
    observed = _observed(network, _data_codes(network, data))
    lo = np.zeros(network.n_in)
    hi = np.full(network.n_in, ((1 << network.input_bits) - 1) * network.input_factor())
    layers, ranges, notes = [], [], []
    for i, L in enumerate(network.layers):
        w = np.asarray(L.weights, dtype=np.float64)
        if i == 0 and network.input_scale == "full":
            n = 1 << network.input_bits
            w = w * (n / (n - 1))  # what the kernel does before quantising (semantics.md, input scale "full")
        fw = largest_frac(float(w.min()), float(w.max()), weight_bits)
        doc: dict[str, Any] = {"weight_bits": weight_bits, "weight_frac": fw, "acc_bits": 62, "out_bits": out_bits}
        in_lo, in_hi = lo, hi
        s_lo = L.bias + np.minimum(w * lo, w * hi).sum(axis=1)
        s_hi = L.bias + np.maximum(w * lo, w * hi).sum(axis=1)
        lo, hi = activate(s_lo, L.activation), activate(s_hi, L.activation)
        g = (float(lo.min()), float(hi.max()))
        obs = observed[i] if observed is not None else None
        what = f"layer {i + 1} ({L.activation})"
        if L.has_table:
            doc["table_bits"] = table_bits
            doc["table_frac"] = table_frac_for(table_bits, out_bits)
            reach = 2.0 ** (table_bits - 1 - doc["table_frac"])
            ranges.append(LayerRange(L.activation, g, obs, None, "table"))
            notes.append(f"{what}: the table covers sums in [-{reach:g}, {reach:g}) (table_frac {doc['table_frac']})")
        else:
            signed = L.activation == "identity"
            k_lo, k_hi, source = g[0], g[1], "guaranteed"
            if obs is not None:
                mag = (1 + margin) * max(abs(obs[0]), abs(obs[1]))
                w_lo, w_hi = (-mag if signed else 0.0), mag
                if w_hi < k_hi or w_lo > k_lo:
                    k_lo, k_hi, source = max(k_lo, w_lo), min(k_hi, w_hi), "observed"
            bo, fo = _out_format(k_lo, k_hi, out_bits, signed)
            doc["out_bits"], doc["out_frac"] = bo, fo
            # weights fine enough that rounding all of them moves a sum by at most half an output LSB
            reach = float(np.sum(np.maximum(np.abs(in_lo), np.abs(in_hi))))
            need = fo + (math.ceil(math.log2(reach)) if reach > 0 else 0)
            if need > fw:
                wb = _width_for(float(w.min()), float(w.max()), need, True, INT_LIMITS["weight_bits"][1])
                doc["weight_bits"], doc["weight_frac"] = wb, largest_frac(float(w.min()), float(w.max()), wb)
            q = q_notation(bo, fo, signed)
            if source == "observed":
                assert obs is not None
                notes.append(
                    f"{what}: {q} holds the observed range [{_fmt(obs[0])}, {_fmt(obs[1])}] plus "
                    f"{100 * margin:g} %; the guaranteed range [{_fmt(g[0])}, {_fmt(g[1])}] is wider, so "
                    "inputs unlike the data may saturate"
                )
            else:
                notes.append(f"{what}: {q} holds the guaranteed range [{_fmt(g[0])}, {_fmt(g[1])}]")
            ranges.append(LayerRange(L.activation, g, obs, (k_lo, k_hi), source))
            # the next layer's inputs are bounded by this format too
            top = ((1 << bo) - 1 if not signed else (1 << (bo - 1)) - 1) * 2.0**-fo
            bottom = -(2.0 ** (bo - 1 - fo)) if signed else 0.0
            lo, hi = np.clip(lo, bottom, top), np.clip(hi, bottom, top)
        layers.append(LayerPlan.from_dict(doc, f"layers[{i}]."))
    plan = with_safe_acc(network, Plan(tuple(layers)).check(network))
    return StartingPlan(plan, tuple(ranges), float(margin), tuple(notes))


def suggest_plan(
    network: Network, data: Any = None, *, weight_bits: int = 10, table_bits: int = 14, out_bits: int = 8,
    margin: float = MARGIN,
) -> Plan:  # fmt: skip
    """The suggested plan (the explorer's and the demo's start): :func:`starting_plan`'s plan.

    At least 10-bit weights, 14-bit tables over ``[-8, 8)``, 8-bit sigmoid/tanh
    outputs (relu/identity: 8 fraction bits), safe accumulators.
    """
    return starting_plan(
        network, data, weight_bits=weight_bits, table_bits=table_bits, out_bits=out_bits, margin=margin
    ).plan


def start_plan(
    network: Network, data: Any = None, *, weight_bits: int = 16, table_bits: int = 14, out_bits: int = 12,
    margin: float = MARGIN,
) -> Plan:  # fmt: skip
    """A generous plan whose accumulators cannot overflow: the start of ``tune`` and the base of ``sweep``.

    The rule of :func:`starting_plan` with at least 16-bit weights, 14-bit tables and 12-bit
    outputs (relu/identity: 12 fraction bits where 16 bits hold the range).
    """
    return starting_plan(
        network, data, weight_bits=weight_bits, table_bits=table_bits, out_bits=out_bits, margin=margin
    ).plan

