"""Steps 1-7 of the contract: the float network and a plan become the integer network.

:func:`build_integer_network` rounds and clamps the weights and biases, proves the exact sums fit
int64, computes every neuron's guaranteed-safe accumulator width, the shift of the
table index (or output) and the activation tables (one builder: :mod:`.tables`).
Cached by value.
"""

from __future__ import annotations

import math
from dataclasses import replace
from functools import partial
from typing import NamedTuple

import numpy as np

from ..formats import bits_for_range, round_float, signed_range, unsigned_range
from ..network import Network
from ..plan import INT_LIMITS, LayerPlan, Plan
from .caches import OUTPUT_CACHE, QUANT_CACHE, TABLE_CACHE, WEIGHT_CACHE
from .layers import Bounds, CodeFormat, IntegerLayer, IntegerNetwork
from .tables import TableSpec, build_table

__all__ = ["build_integer_network", "safe_acc_widths"]

_INT64_MAX = (1 << 63) - 1


def _code_range(activation: str, bits: int) -> tuple[int, int, bool]:
    if activation in ("sigmoid", "relu"):
        lo, hi = unsigned_range(bits)
        return lo, hi, False
    lo, hi = signed_range(bits)
    return lo, hi, True


def _interval(q_w: np.ndarray, u_min: int, u_max: int, bias: list[int]) -> tuple[list[int], list[int]]:
    lo_list, hi_list = [], []
    for j in range(q_w.shape[0]):
        lo = hi = int(bias[j])
        for q in q_w[j].tolist():
            a, b = q * u_min, q * u_max
            lo += min(a, b)
            hi += max(a, b)
        lo_list.append(lo)
        hi_list.append(hi)
    return lo_list, hi_list


def _scaled(x: np.ndarray, e: int) -> np.ndarray:
    """``x * 2**e`` in float64 for rounding to an integer.

    A product too small for float64 would underflow to zero and lose its sign
    (``floor`` of a tiny negative value is -1, not 0); it is kept as the smallest
    subnormal of its sign instead, which every rounding mode treats exactly like
    the true value (any magnitude below 1/2 rounds by its sign alone).
    """
    with np.errstate(over="ignore", under="ignore"):
        y = np.ldexp(x, e)
    tiny = (y == 0) & (x != 0)
    if tiny.any():
        y = np.where(tiny, np.copysign(np.float64(5e-324), x), y)
    return y


class _Weights(NamedTuple):
    """Steps 1-3 of one layer that do not depend on the accumulator width (cached by value)."""

    q_w: np.ndarray
    weight_clip: np.ndarray
    q_b_raw: tuple[int, ...]
    safe_min: list[int]
    safe_max: list[int]
    safe_bits: np.ndarray
    wide_worst: int  # the largest |exact sum| with the bias clamped to the widest accumulator


def _weights_uncached(network: Network, li: int, lp: LayerPlan, in_frac: int, u_min: int, u_max: int) -> _Weights:
    L = network.layers[li]
    w = np.asarray(L.weights, dtype=np.float64)
    if li == 0 and network.input_scale == "full":
        n = 1 << network.input_bits
        w = w * (n / (n - 1))
    # 1. weights
    with np.errstate(invalid="ignore"):  # inf (an overflow) rounds to inf and is clamped: weight_clip
        qw_f = round_float(_scaled(w, lp.weight_frac), lp.weight_round)
    wlo, whi = signed_range(lp.weight_bits)
    clipped = (qw_f < wlo) | (qw_f > whi)
    q_w = np.clip(qw_f, wlo, whi).astype(np.int64)
    weight_clip = clipped.sum(axis=1).astype(np.int64)
    # 2. bias (aligned to the product's scale), before the accumulator clamp
    acc_frac = in_frac + lp.weight_frac
    with np.errstate(invalid="ignore"):
        qb_f = round_float(_scaled(np.asarray(L.bias, dtype=np.float64), acc_frac), lp.weight_round)
    # beyond float64 the product is an exact integer (b is then an integer and acc_frac > 0)
    q_b_raw = [int(v) if math.isfinite(v) else int(b) << acc_frac for v, b in zip(qb_f.tolist(), L.bias.tolist())]
    # the safe width holds the sum interval and the raw bias itself (semantics.md, "Guaranteed-safe
    # accumulator width"), so at that width neither an overflow nor a bias clamp can happen
    s_lo, s_hi = _interval(q_w, u_min, u_max, q_b_raw)
    safe_min = [min(a, b) for a, b in zip(s_lo, q_b_raw)]
    safe_max = [max(a, b) for a, b in zip(s_hi, q_b_raw)]
    safe_bits = np.array([bits_for_range(a, b) for a, b in zip(safe_min, safe_max)], dtype=np.int64)
    wlo_acc, whi_acc = signed_range(INT_LIMITS["acc_bits"][1])
    w_lo, w_hi = _interval(q_w, u_min, u_max, [min(max(v, wlo_acc), whi_acc) for v in q_b_raw])
    for arr in (q_w, weight_clip, safe_bits):
        arr.setflags(write=False)
    return _Weights(q_w, weight_clip, tuple(q_b_raw), safe_min, safe_max, safe_bits,
                    max(max(abs(v) for v in w_lo), max(abs(v) for v in w_hi)))  # fmt: skip


def _weights(network: Network, li: int, lp: LayerPlan, in_frac: int, u_min: int, u_max: int) -> _Weights:
    key = (network.digest, li, lp.weight_bits, lp.weight_frac, lp.weight_round, in_frac, u_min, u_max)
    return WEIGHT_CACHE.get(key, partial(_weights_uncached, network, li, lp, in_frac, u_min, u_max))


class _Output(NamedTuple):
    """Steps 5-7 of one layer: the shift, the address range, the table and the output codes."""

    k: int
    address: CodeFormat
    table: np.ndarray | None
    output: CodeFormat
    reachable: CodeFormat


def _output(activation: str, has_table: bool, lp: LayerPlan, acc_frac: int) -> _Output:
    """Steps 5-7 of one layer (cached by every field they read; not the weight or accumulator fields)."""
    key = (activation, has_table, lp.out_bits, lp.out_frac, lp.table_bits, lp.table_frac, lp.index_round,
           lp.table_sample, lp.table_round, acc_frac)  # fmt: skip
    return OUTPUT_CACHE.get(key, partial(_output_uncached, activation, has_table, lp, acc_frac))


def _output_uncached(activation: str, has_table: bool, lp: LayerPlan, acc_frac: int) -> _Output:
    out_lo, out_hi, out_signed = _code_range(activation, lp.out_bits)
    out_frac = lp.resolved_out_frac(activation)
    if has_table:
        assert lp.table_bits is not None and lp.table_frac is not None
        k = acc_frac - lp.table_frac
        ilo, ihi = signed_range(lp.table_bits)
        spec = TableSpec(activation, lp.table_bits, lp.table_frac, k, lp.index_round,
                         lp.table_sample, out_frac, lp.table_round, out_lo, out_hi)  # fmt: skip
        # an edge-sampled table (or any with k <= 0) reads neither k nor index_round (tables.table_inputs):
        # plans that differ only in the weight fraction share it
        key = spec if spec.sample == "mid" and k > 0 else replace(spec, shift=0, index_round="floor")
        table = TABLE_CACHE.get(key, partial(build_table, key))
        return _Output(k, CodeFormat(lp.table_frac, ilo, ihi), table, CodeFormat(out_frac, out_lo, out_hi, out_signed),
                       CodeFormat(out_frac, int(table.min()), int(table.max()), out_signed))  # fmt: skip
    fmt = CodeFormat(out_frac, out_lo, out_hi, out_signed)
    return _Output(acc_frac - out_frac, CodeFormat(out_frac, out_lo, out_hi), None, fmt, fmt)


def _int64_error(where: str, worst: int) -> ValueError:
    return ValueError(
        f"{where}: the exact sum can reach {worst}, which does not fit in int64; "
        "use fewer weight bits or a smaller input range"
    )


def _quantise_uncached(network: Network, plan: Plan) -> IntegerNetwork:
    plan.check(network)
    notes = []
    layers: list[IntegerLayer] = []
    in_frac = network.input_bits
    u_min, u_max = 0, (1 << network.input_bits) - 1
    if network.input_scale == "full":
        notes.append(
            f"input scale 'full': layer-1 weights multiplied by 2^{network.input_bits}/(2^{network.input_bits}-1)"
            " before quantising"
        )
    for li, (L, lp) in enumerate(zip(network.layers, plan.layers)):
        wt = _weights(network, li, lp, in_frac, u_min, u_max)
        alo, ahi = signed_range(lp.acc_bits)
        q_b_list = [min(max(v, alo), ahi) for v in wt.q_b_raw]
        bias_clip = np.array([int(v != c) for v, c in zip(wt.q_b_raw, q_b_list)], dtype=np.int64)
        q_b = np.array(q_b_list, dtype=np.int64)
        # 3. int64-safety proof
        sum_min, sum_max = _interval(wt.q_w, u_min, u_max, q_b_list)
        worst = max(max(abs(v) for v in sum_min), max(abs(v) for v in sum_max))
        if worst > _INT64_MAX:
            raise _int64_error(f"layers[{li}]", worst)
        # 5.-7. index, table, output
        o = _output(L.activation, L.has_table, lp, in_frac + lp.weight_frac)
        for arr in (q_b, bias_clip):
            arr.setflags(write=False)
        layers.append(
            IntegerLayer(
                index=li, activation=L.activation, plan=lp, q_w=wt.q_w, q_b=q_b, q_b_raw=wt.q_b_raw,
                weight_clip=wt.weight_clip, bias_clip=bias_clip, inputs=CodeFormat(in_frac, u_min, u_max),
                sums=Bounds(tuple(sum_min), tuple(sum_max)), safe=Bounds(tuple(wt.safe_min), tuple(wt.safe_max)),
                safe_acc_bits=wt.safe_bits, shift=o.k, address=o.address, table=o.table,
                output=o.output, reachable=o.reachable,
            )
        )  # fmt: skip
        in_frac = o.output.frac
        u_min, u_max = o.reachable.lo, o.reachable.hi
    last = layers[-1]
    thr = None
    if last.n_out == 1:
        thr = math.ceil(network.threshold * 2.0**last.out_frac)
    return IntegerNetwork(network, plan, tuple(layers), network.input_bits, thr, tuple(notes))


def safe_acc_widths(network: Network, plan: Plan) -> tuple[int, ...]:
    """Per layer, the largest guaranteed-safe accumulator width of its neurons.

    The same figures as the ``safe_acc_bits`` of :func:`build_integer_network` (the safe width
    does not depend on ``acc_bits``), walked layer by layer from the cached weight and table
    parts, so plans that share a layer's weight settings share its work. Raises what building
    the plan with the widest accumulators raises.
    """
    plan.check(network)
    in_frac = network.input_bits
    u_min, u_max = 0, (1 << network.input_bits) - 1
    widths = []
    for li, (L, lp) in enumerate(zip(network.layers, plan.layers)):
        wt = _weights(network, li, lp, in_frac, u_min, u_max)
        if wt.wide_worst > _INT64_MAX:
            raise _int64_error(f"layers[{li}]", wt.wide_worst)
        widths.append(int(wt.safe_bits.max()))
        o = _output(L.activation, L.has_table, lp, in_frac + lp.weight_frac)
        in_frac, u_min, u_max = o.output.frac, o.reachable.lo, o.reachable.hi
    return tuple(widths)


def build_integer_network(network: Network, plan: Plan) -> IntegerNetwork:
    """The integer network of ``(network, plan)`` (cached by value)."""
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if not isinstance(plan, Plan):
        raise TypeError(f"plan must be a Plan, not {type(plan).__name__}")
    return QUANT_CACHE.get((network.digest, plan), lambda: _quantise_uncached(network, plan))
