"""The bit-exact integer network: what the hardware computes, per ``semantics.md``.

Two parts:

* :func:`quantise` turns a float :class:`~fxnet_widgets.core.network.Network` and
  a :class:`~fxnet_widgets.core.plan.Plan` into an :class:`IntegerNetwork`: the
  integer weights and biases, shifts, tables, ranges, static events
  (``weight_clip``, ``bias_clip``), the guaranteed-safe accumulator width of
  every neuron and the int64-safety proof. Cached by value.
* :func:`emulate` runs input codes through it and returns an :class:`Emulation`
  with every accumulator (``s_A``), every code, the decisions and the per-neuron
  event counts. Work is cached by value: the same image with a new plan reuses
  its per-image decomposition, and layers whose plan prefix is unchanged are not
  recomputed.

Implementation notes (speed without changing a bit):

* the exact sum ``s`` is a sum of integer *product tables* gathered by input
  code (``T_i[u] = q_w,i * u``, with the bias folded into the first); for 8-bit
  inputs two inputs share one 65536-entry table indexed by ``u0 << 8 | u1``;
* values are held in the smallest integer dtype that the interval analysis
  proves sufficient (int32 when every sum fits), and all neurons of a layer are
  processed together as an N x n_out block;
* every step that cannot change a value (no overflow possible, no clamp
  possible) is skipped on the proof, and its event count is zero.

Examples
--------
>>> from fxnet_widgets.core.network import Network
>>> from fxnet_widgets.core.plan import Plan
>>> net = Network.from_layers([([[1.0, 1.0, 1.0]], [-1.0], "sigmoid")])
>>> plan = Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18,
...                     table_bits=14, table_frac=10, out_bits=8)
>>> r = emulate(net, plan, np.array([[128, 128, 128]]))
>>> int(r.acc[0][0, 0]), int(r.out_codes[0, 0]), int(r.decisions[0])
(4096, 159, 1)
"""

from __future__ import annotations

import hashlib
import math
import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable
from dataclasses import dataclass
from typing import Any

import numpy as np

from .formats import bits_for_range, q_notation, round_float, shift_round, signed_range, unsigned_range
from .kernel_tables import TableSpec, build_table, table_inputs
from .network import Network, as_codes
from .plan import LayerPlan, Plan

__all__ = [
    "EVENT_NAMES",
    "IntegerLayer",
    "IntegerNetwork",
    "Emulation",
    "quantise",
    "emulate",
    "table_inputs",
    "clear_caches",
]

EVENT_NAMES = ("acc_overflow", "table_low", "table_high", "weight_clip", "bias_clip")
_INT64_MAX = (1 << 63) - 1


# ---------------------------------------------------------------------------------
# small value-keyed LRU caches
class _LRU:
    def __init__(self, size: int) -> None:
        self.size = size
        self.data: OrderedDict[Hashable, Any] = OrderedDict()
        self.lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    def get(self, key: Hashable, make: Callable[[], Any]) -> Any:
        with self.lock:
            if key in self.data:
                self.data.move_to_end(key)
                self.hits += 1
                return self.data[key]
        value = make()
        with self.lock:
            self.misses += 1
            self.data[key] = value
            while len(self.data) > self.size:
                self.data.popitem(last=False)
        return value

    def clear(self) -> None:
        with self.lock:
            self.data.clear()
            self.hits = self.misses = 0


_QUANT_CACHE = _LRU(64)
_INPUT_CACHE = _LRU(4)
_LAYER_CACHE = _LRU(12)
_FLOAT_CACHE = _LRU(4)
# first-layer exact sums by the integer weights' values: a change of the
# accumulator, table or output fields keeps them (the product gathers are skipped)
_SUM_CACHE = _LRU(4)


def clear_caches() -> None:
    """Empty every cache of the kernel (for benchmarks and tests)."""
    for c in (_QUANT_CACHE, _INPUT_CACHE, _LAYER_CACHE, _FLOAT_CACHE, _SUM_CACHE):
        c.clear()


def cache_stats() -> dict[str, tuple[int, int]]:
    """``{cache: (hits, misses)}`` of the kernel's caches."""
    return {
        "quantise": (_QUANT_CACHE.hits, _QUANT_CACHE.misses),
        "input": (_INPUT_CACHE.hits, _INPUT_CACHE.misses),
        "layer": (_LAYER_CACHE.hits, _LAYER_CACHE.misses),
        "float": (_FLOAT_CACHE.hits, _FLOAT_CACHE.misses),
        "sums": (_SUM_CACHE.hits, _SUM_CACHE.misses),
    }


# ---------------------------------------------------------------------------------
# the static integer network
@dataclass(frozen=True, eq=False)
class IntegerLayer:
    """One layer as hardware holds it (all integers; see ``semantics.md``).

    Attributes
    ----------
    q_w : (n_out, n_in) int64 weight codes (after clamp)
    q_b : (n_out,) int64 bias codes (after clamp to the accumulator range)
    q_b_raw : tuple of Python ints, bias codes before the clamp
    weight_clip, bias_clip : (n_out,) int64 static event counts
    in_frac, in_min, in_max : frac and reachable code range of the layer's inputs
    shift : k of steps 5 and 7 (right shift if positive, left if negative)
    table : (2**table_bits,) int64 entries in address order, or None (relu/identity)
    index_min, index_max : the clamp range of the table index (or of the output)
    sum_min, sum_max : per neuron, the interval bound of the exact sum s (clamped bias)
    safe_acc_bits : per neuron, the guaranteed-safe accumulator width
    """

    index: int
    activation: str
    plan: LayerPlan
    q_w: np.ndarray
    q_b: np.ndarray
    q_b_raw: tuple[int, ...]
    weight_clip: np.ndarray
    bias_clip: np.ndarray
    in_frac: int
    in_min: int
    in_max: int
    shift: int
    table: np.ndarray | None
    index_min: int
    index_max: int
    out_frac: int
    out_min: int
    out_max: int
    out_signed: bool
    sum_min: tuple[int, ...]
    sum_max: tuple[int, ...]
    safe_min: tuple[int, ...]
    safe_max: tuple[int, ...]
    safe_acc_bits: np.ndarray
    code_min: int
    code_max: int

    @property
    def n_in(self) -> int:
        return int(self.q_w.shape[1])

    @property
    def n_out(self) -> int:
        return int(self.q_w.shape[0])

    @property
    def acc_frac(self) -> int:
        """Fraction bits of the accumulator: ``in_frac + weight_frac``."""
        return self.in_frac + self.plan.weight_frac

    def table_address(self, index: np.ndarray) -> np.ndarray:
        """Offset-binary table address of a (clamped) index: ``a + 2**(T-1)``."""
        return np.asarray(index, dtype=np.int64) - self.index_min

    def describe(self) -> str:
        p = self.plan
        s = (
            f"layer {self.index + 1} ({self.activation}, {self.n_in}->{self.n_out}): "
            f"weights {q_notation(p.weight_bits, p.weight_frac)}, "
            f"accumulator {q_notation(p.acc_bits, self.acc_frac)} {p.acc_overflow}, "
        )
        if self.table is not None:
            assert p.table_bits is not None and p.table_frac is not None  # a table layer's plan has both
            index = q_notation(p.table_bits, p.table_frac)
            s += f"table {2 ** p.table_bits} x {p.out_bits} b (index {index}, shift {self.shift}), "
        else:
            s += f"shift {self.shift}, "
        s += f"output {q_notation(p.out_bits, self.out_frac, self.out_signed)}"
        return s


@dataclass(frozen=True, eq=False)
class IntegerNetwork:
    """The integer network of a (network, plan) pair."""

    network: Network
    plan: Plan
    layers: tuple[IntegerLayer, ...]
    input_bits: int
    threshold_code: int | None
    notes: tuple[str, ...]

    @property
    def safe_acc_bits(self) -> list[np.ndarray]:
        return [L.safe_acc_bits for L in self.layers]

    def operation_counts(self) -> dict[str, int]:
        """Per sample: multiplications (n_in per neuron), additions (n_in per neuron,
        the bias included) and tables (one per sigmoid/tanh neuron)."""
        return {
            "multiplications": sum(L.n_in * L.n_out for L in self.layers),
            "additions": sum(L.n_in * L.n_out for L in self.layers),
            "tables": sum(L.n_out for L in self.layers if L.table is not None),
        }


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


def _quantise_uncached(network: Network, plan: Plan) -> IntegerNetwork:
    plan.check(network)
    notes = []
    layers: list[IntegerLayer] = []
    in_frac = network.input_bits
    u_min, u_max = 0, (1 << network.input_bits) - 1
    for li, (L, lp) in enumerate(zip(network.layers, plan.layers)):
        where = f"layers[{li}]"
        w = np.asarray(L.weights, dtype=np.float64)
        if li == 0 and network.input_scale == "full":
            n = 1 << network.input_bits
            w = w * (n / (n - 1))
            notes.append(
                f"input scale 'full': layer-1 weights multiplied by 2^{network.input_bits}/(2^{network.input_bits}-1)"
                " before quantising"
            )
        # 1. weights
        with np.errstate(invalid="ignore"):  # inf (an overflow) rounds to inf and is clamped: weight_clip
            qw_f = round_float(_scaled(w, lp.weight_frac), lp.weight_round)
        wlo, whi = signed_range(lp.weight_bits)
        clipped = (qw_f < wlo) | (qw_f > whi)
        q_w = np.clip(qw_f, wlo, whi).astype(np.int64)
        weight_clip = clipped.sum(axis=1).astype(np.int64)
        # 2. bias (aligned to the product's scale)
        acc_frac = in_frac + lp.weight_frac
        with np.errstate(invalid="ignore"):
            qb_f = round_float(_scaled(np.asarray(L.bias, dtype=np.float64), acc_frac), lp.weight_round)
        # beyond float64 the product is an exact integer (b is then an integer and acc_frac > 0)
        q_b_raw = [int(v) if math.isfinite(v) else int(b) << acc_frac for v, b in zip(qb_f.tolist(), L.bias.tolist())]
        alo, ahi = signed_range(lp.acc_bits)
        q_b_list = [min(max(v, alo), ahi) for v in q_b_raw]
        bias_clip = np.array([int(v != c) for v, c in zip(q_b_raw, q_b_list)], dtype=np.int64)
        q_b = np.array(q_b_list, dtype=np.int64)
        # 3. int64-safety proof and the guaranteed-safe width
        sum_min, sum_max = _interval(q_w, u_min, u_max, q_b_list)
        worst = max(max(abs(v) for v in sum_min), max(abs(v) for v in sum_max))
        if worst > _INT64_MAX:
            raise ValueError(
                f"{where}: the exact sum can reach {worst}, which does not fit in int64; "
                "use fewer weight bits or a smaller input range"
            )
        # the safe width holds the sum interval and the raw bias itself (semantics.md, "Guaranteed-safe
        # accumulator width"), so at that width neither an overflow nor a bias clamp can happen
        s_lo, s_hi = _interval(q_w, u_min, u_max, q_b_raw)
        safe_min = [min(a, b) for a, b in zip(s_lo, q_b_raw)]
        safe_max = [max(a, b) for a, b in zip(s_hi, q_b_raw)]
        safe_bits = np.array([bits_for_range(a, b) for a, b in zip(safe_min, safe_max)], dtype=np.int64)
        # 5.-7. index, table, output
        out_lo, out_hi, out_signed = _code_range(L.activation, lp.out_bits)
        out_frac = lp.resolved_out_frac(L.activation)
        if L.activation in ("sigmoid", "tanh"):
            assert lp.table_bits is not None and lp.table_frac is not None
            k = acc_frac - lp.table_frac
            ilo, ihi = signed_range(lp.table_bits)
            table = build_table(TableSpec(L.activation, lp.table_bits, lp.table_frac, k, lp.index_round,
                                          lp.table_sample, out_frac, lp.table_round, out_lo, out_hi))  # fmt: skip
            code_min, code_max = int(table.min()), int(table.max())
        else:
            k = acc_frac - out_frac
            ilo, ihi = out_lo, out_hi
            table = None
            code_min, code_max = out_lo, out_hi
        for arr in (q_w, q_b, weight_clip, bias_clip, safe_bits):
            arr.setflags(write=False)
        layers.append(
            IntegerLayer(
                index=li, activation=L.activation, plan=lp, q_w=q_w, q_b=q_b, q_b_raw=tuple(q_b_raw),
                weight_clip=weight_clip, bias_clip=bias_clip, in_frac=in_frac, in_min=u_min, in_max=u_max,
                shift=k, table=table, index_min=ilo, index_max=ihi, out_frac=out_frac, out_min=out_lo,
                out_max=out_hi, out_signed=out_signed, sum_min=tuple(sum_min), sum_max=tuple(sum_max),
                safe_min=tuple(safe_min), safe_max=tuple(safe_max), safe_acc_bits=safe_bits,
                code_min=code_min, code_max=code_max,
            )
        )  # fmt: skip
        in_frac = out_frac
        u_min, u_max = code_min, code_max
    last = layers[-1]
    thr = None
    if last.n_out == 1:
        thr = math.ceil(network.threshold * 2.0**last.out_frac)
    return IntegerNetwork(network, plan, tuple(layers), network.input_bits, thr, tuple(notes))


def quantise(network: Network, plan: Plan) -> IntegerNetwork:
    """The integer network of ``(network, plan)`` (cached by value)."""
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if not isinstance(plan, Plan):
        raise TypeError(f"plan must be a Plan, not {type(plan).__name__}")
    return _QUANT_CACHE.get((network.digest, plan), lambda: _quantise_uncached(network, plan))


# ---------------------------------------------------------------------------------
# per-element arithmetic (steps 4-7) on exact sums
def _smallest_int(lo: int, hi: int) -> type:
    for dt in (np.int8, np.int16, np.int32):
        info = np.iinfo(dt)
        if info.min <= lo and hi <= info.max:
            return dt
    return np.int64


def post_accumulate(layer: IntegerLayer, s: np.ndarray, lo: int | None = None, hi: int | None = None) -> dict[str, Any]:
    """Steps 4-7 of the contract on exact sums ``s`` (any shape, int64).

    ``lo``/``hi`` optionally bound ``s`` (from interval analysis); steps that
    cannot change any value in that bound are skipped. Returns ``acc`` (s_A),
    ``codes`` and boolean arrays ``acc_overflow``, ``table_low``, ``table_high``
    (or None where no event is possible).
    """
    p = layer.plan
    s = np.asarray(s)
    if lo is None:
        lo, hi = (int(s.min()), int(s.max())) if s.size else (0, 0)
    assert hi is not None
    alo, ahi = signed_range(p.acc_bits)
    ov = None
    s_a = s
    if lo < alo or hi > ahi:
        s64 = s.astype(np.int64, copy=False)
        ov = (s64 < alo) | (s64 > ahi)
        if p.acc_overflow == "wrap":
            mask = np.int64((1 << p.acc_bits) - 1)
            s_a = ((s64 - np.int64(alo)) & mask) + np.int64(alo)
            lo, hi = alo, ahi
        else:
            s_a = np.clip(s64, alo, ahi)
            lo, hi = max(lo, alo), min(hi, ahi)
        s_a = s_a.astype(_smallest_int(alo, ahi), copy=False)
    k = layer.shift
    ilo, ihi = layer.index_min, layer.index_max
    low = high = None
    if k >= 0:
        if k > 0:
            a = shift_round(s_a, k, p.index_round)
            a_lo, a_hi = (int(v) for v in shift_round(np.array([lo, hi]), k, p.index_round))
        else:
            a, a_lo, a_hi = s_a, lo, hi
        if a_lo < ilo or a_hi > ihi:
            a = np.asarray(a, dtype=np.int64)
            low, high = a < ilo, a > ihi
            a = np.clip(a, ilo, ihi)
    else:
        m = -k
        if (lo << m) >= ilo and (hi << m) <= ihi:
            a = s_a.astype(np.int64) << np.int64(m)
        else:
            # decide the clamp in the unshifted domain so the shift cannot overflow
            c_hi = ihi >> m
            c_lo = -((-ilo) >> m)
            s64 = s_a.astype(np.int64)
            low, high = s64 < c_lo, s64 > c_hi
            a = np.clip(s64, c_lo, c_hi) << np.int64(m)
            a = np.where(low, ilo, np.where(high, ihi, a))
    if layer.table is not None:
        idx = np.asarray(a) - np.int64(ilo) if ilo != 0 else a  # int64: ilo may not fit a's dtype
        codes = layer.table[idx]
        codes = codes.astype(_smallest_int(layer.code_min, layer.code_max), copy=False)
    else:
        codes = np.asarray(a).astype(_smallest_int(ilo, ihi), copy=False)
    return {"acc": s_a, "codes": codes, "acc_overflow": ov, "table_low": low, "table_high": high}


# ---------------------------------------------------------------------------------
# the per-image decomposition (cached by value)
@dataclass(frozen=True, eq=False)
class _Prepared:
    key: str
    flat: np.ndarray  # N x n_in original codes (validated)
    shape: tuple[int, ...] | None
    columns: tuple[np.ndarray, ...]  # contiguous per-input codes, smallest unsigned dtype
    pairs: tuple[tuple[int, int, np.ndarray], ...]  # (i, j, index = u_i << bits | u_j)
    singles: tuple[int, ...]
    n: int


def _input_key(arr: np.ndarray, bits: int, n_in: int) -> str:
    h = hashlib.blake2b(digest_size=16)
    h.update(f"{arr.shape}|{arr.dtype.str}|{bits}|{n_in}|".encode())
    h.update(np.ascontiguousarray(arr).data)
    return h.hexdigest()


_PAIR_MIN_SAMPLES = 4096


def _prepare(codes: Any, bits: int, n_in: int) -> _Prepared:
    arr = np.asarray(codes)
    if arr.dtype == np.bool_ or arr.dtype.kind not in "iu":
        as_codes(arr, bits, n_in)  # raises the documented TypeError
    key = _input_key(arr, bits, n_in)

    def make() -> _Prepared:
        flat, shape = as_codes(arr, bits, n_in)
        cdt = np.uint8 if bits <= 8 else np.uint16
        cols = tuple(np.ascontiguousarray(flat[:, i]).astype(cdt, copy=False) for i in range(n_in))
        pairs = []
        singles = list(range(n_in))
        if bits <= 8 and n_in >= 2 and flat.shape[0] >= _PAIR_MIN_SAMPLES:
            singles = []
            for i in range(0, n_in - 1, 2):
                idx = cols[i].astype(np.uint16)
                idx <<= np.uint16(bits)
                idx |= cols[i + 1]
                pairs.append((i, i + 1, idx))
            if n_in % 2:
                singles.append(n_in - 1)
        if flat.base is None:
            flat.setflags(write=False)
        return _Prepared(key, flat, shape, cols, tuple(pairs), tuple(singles), int(flat.shape[0]))

    return _INPUT_CACHE.get(key, make)


# The exact sums are offset by the lower end of their interval (folded into the
# first product table), so they are non-negative and index the per-neuron
# look-up table of steps 4-7 directly.
_LUT_MAX = 1 << 21
_LUT_FRACTION = 1.0  # a table over more sums than samples costs more than it saves


def _offset_dtype(span: int) -> type:
    return np.int32 if span < (1 << 31) else np.int64


def _layer_sums(
    layer: IntegerLayer, prep: _Prepared | None, prev_codes: np.ndarray | None, bits: int
) -> list[np.ndarray]:
    """Per neuron, the exact sum minus ``sum_min`` (1-D arrays, non-negative)."""
    sums = []
    q_w = layer.q_w
    if prev_codes is None:
        assert prep is not None
        inputs = prep.columns
        u = np.arange(1 << bits, dtype=np.int64)
        n = prep.n
    else:
        inputs = tuple(prev_codes)
        u = np.arange(layer.in_min, layer.in_max + 1, dtype=np.int64)
        n = prev_codes.shape[1]
    span_in = len(u)
    use_tables = span_in * layer.n_in <= (1 << 22) and (n >= 2 * span_in or n >= 65536)
    if not use_tables:
        mat = np.stack(inputs, axis=1).astype(np.int64) if inputs else np.zeros((n, layer.n_in), np.int64)
        s = mat @ q_w.T + layer.q_b[None, :]
        for j in range(layer.n_out):
            lo, hi = layer.sum_min[j], layer.sum_max[j]
            sums.append((s[:, j] - np.int64(lo)).astype(_offset_dtype(hi - lo), copy=False))
        return sums
    off = 0 if prev_codes is None else layer.in_min
    pairs = prep.pairs if prev_codes is None and prep is not None else ()
    singles = prep.singles if prev_codes is None and prep is not None else tuple(range(layer.n_in))
    for j in range(layer.n_out):
        lo, hi = layer.sum_min[j], layer.sum_max[j]
        dt = _offset_dtype(hi - lo)
        base = int(layer.q_b[j]) - lo
        acc = None
        for i, k, idx in pairs:
            tab = (u[:, None] * q_w[j, i] + u[None, :] * q_w[j, k]).reshape(-1)
            if acc is None:
                tab = tab + base
            part = tab.astype(dt).take(idx)
            acc = part if acc is None else np.add(acc, part, out=acc)
        for i in singles:
            tab = u * q_w[j, i]
            if acc is None:
                tab = tab + base
            col = inputs[i]
            if off:
                col = col.astype(np.int64) - off
            part = tab.astype(dt).take(col)
            acc = part if acc is None else np.add(acc, part, out=acc)
        assert acc is not None
        sums.append(acc)
    return sums


def _frozen(arrays: list[np.ndarray]) -> list[np.ndarray]:
    for a in arrays:
        a.setflags(write=False)
    return arrays


class _LayerOut:
    """One layer's outputs, neurons along the first axis (lazy where it pays)."""

    def __init__(self, layer: IntegerLayer, shifted: list[np.ndarray], acc_direct: list[Any],
                 codes: np.ndarray, events: dict[str, np.ndarray],
                 observed: tuple[np.ndarray, np.ndarray]) -> None:
        self.layer = layer
        self._shifted = shifted  # exact sum minus sum_min, per neuron
        # s_A where it differs from the exact sum (an array, or a look-up table and its
        # indices, gathered only when s_A is read), else None
        self._acc_direct = acc_direct
        self.codes = codes  # (n_out, N)
        self.events = events
        self._acc: np.ndarray | None = None
        self.observed = observed  # per neuron, the min and max exact sum on the data

    @property
    def acc(self) -> np.ndarray:
        """s_A, (n_out, N)."""
        if self._acc is None:
            L = self.layer
            alo, ahi = signed_range(L.plan.acc_bits)
            n = self.codes.shape[1]
            dtype = _smallest_int(min(min(L.sum_min), alo), max(max(L.sum_max), ahi))
            out: np.ndarray = np.empty((L.n_out, n), dtype=dtype)
            for j in range(L.n_out):
                direct = self._acc_direct[j]
                if isinstance(direct, tuple):  # (s_A over the look-up domain, indices): gathered on first use
                    out[j] = direct[0].take(direct[1])
                elif direct is not None:
                    out[j] = direct
                else:
                    np.add(self._shifted[j], np.int64(L.sum_min[j]), out=out[j], casting="unsafe")
            out.setflags(write=False)
            self._acc = out
        return self._acc


def _run_layer(layer: IntegerLayer, shifted: list[np.ndarray]) -> _LayerOut:
    n = shifted[0].shape[0] if shifted else 0
    code_dt = _smallest_int(layer.code_min, layer.code_max)
    if layer.code_min >= 0 and layer.code_max <= 255:
        code_dt = np.uint8
    codes: np.ndarray = np.empty((layer.n_out, n), dtype=code_dt)
    counts = {name: np.zeros(layer.n_out, dtype=np.int64) for name in ("acc_overflow", "table_low", "table_high")}
    acc_direct: list[Any] = []
    obs_min = np.zeros(layer.n_out, dtype=np.int64)
    obs_max = np.zeros(layer.n_out, dtype=np.int64)
    for j, sp in enumerate(shifted):
        lo = layer.sum_min[j]
        # the look-up table covers only the sums seen on the data: [lo + m0, lo + m1]
        m0, m1 = (int(sp.min()), int(sp.max())) if n else (0, 0)
        if n:
            obs_min[j], obs_max[j] = lo + m0, lo + m1
        span = m1 - m0 + 1
        if span <= _LUT_MAX and m1 < _LUT_MAX and span <= _LUT_FRACTION * n + 1024:  # m1: the LUT length
            dom = np.arange(lo + m0, lo + m1 + 1, dtype=np.int64)
            out = post_accumulate(layer, dom, lo + m0, lo + m1)

            def lut(v: np.ndarray, dt: Any = None, m0: int = m0) -> np.ndarray:
                # indexed by sp directly: entries below m0 are never read
                full = np.empty(m0 + v.shape[0], dtype=v.dtype if dt is None else dt)
                full[m0:] = v
                return full

            np.take(lut(out["codes"], code_dt), sp, out=codes[j])
            acc_lut = out["acc"]
            changed = out["acc_overflow"] is not None
            acc_direct.append((lut(np.asarray(acc_lut)), sp) if changed else None)
            flags = [out[k] for k in ("acc_overflow", "table_low", "table_high")]
            if any(f is not None and f.any() for f in flags):
                ev = np.zeros(span, dtype=np.uint8)
                for bit, f in enumerate(flags):
                    if f is not None:
                        ev |= f.astype(np.uint8) << np.uint8(bit)
                hist = np.bincount(lut(ev).take(sp), minlength=8)
                for bit, name in enumerate(("acc_overflow", "table_low", "table_high")):
                    counts[name][j] = int(sum(int(hist[c]) for c in range(8) if c >> bit & 1))
        else:
            s = sp.astype(np.int64) + np.int64(lo)
            out = post_accumulate(layer, s, lo + m0, lo + m1)
            codes[j] = out["codes"]
            acc_direct.append(out["acc"] if out["acc_overflow"] is not None else None)
            for name in ("acc_overflow", "table_low", "table_high"):
                if out[name] is not None:
                    counts[name][j] = int(np.count_nonzero(out[name]))
    events = dict(counts)
    events["weight_clip"] = layer.weight_clip
    events["bias_clip"] = layer.bias_clip
    codes.setflags(write=False)
    return _LayerOut(layer, shifted, acc_direct, codes, events, (obs_min, obs_max))


# ---------------------------------------------------------------------------------
# the result
class _FloatRef:
    """The float reference of one (network, input): outputs, and decisions made once on first use."""

    def __init__(self, network: Network, out: np.ndarray) -> None:
        self.network = network
        self.out = out
        self._decisions: np.ndarray | None = None

    @property
    def decisions(self) -> np.ndarray:
        if self._decisions is None:
            dec = self.network.decide(self.out)
            dec.setflags(write=False)
            self._decisions = dec
        return self._decisions


class Emulation:
    """Result of :func:`emulate` (read-only arrays).

    Attributes
    ----------
    out_codes : (N, n_out) or (H, W, n_out) output codes of the last layer
    decisions : (N,) or (H, W) int64 decisions
    acc : list, per layer, of s_A arrays (N x n_out_l or H x W x n_out_l)
    codes : list, per layer, of output codes
    events : list, per layer, of ``{event name: (n_out_l,) int64 counts}``
    safe_acc_bits : list, per layer, of (n_out_l,) guaranteed-safe widths
    observed_min, observed_max : list, per layer, of the exact sum's range on the data
    float_out, float_decisions : the float reference (computed on first access, cached)
    """

    def __init__(self, intnet: IntegerNetwork, prep: _Prepared, outs: list[_LayerOut]) -> None:
        self.integer_network = intnet
        self.network = intnet.network
        self.plan = intnet.plan
        self._prep = prep
        self._outs = outs
        self.shape = prep.shape
        self.n = prep.n
        self.events = [o.events for o in outs]
        self.safe_acc_bits = [L.safe_acc_bits for L in intnet.layers]
        last = outs[-1].codes
        if last.shape[0] == 1:
            assert intnet.threshold_code is not None
            dec = (last[0] >= intnet.threshold_code).astype(np.int64)
        else:
            dec = np.argmax(last, axis=0).astype(np.int64)
        dec.setflags(write=False)
        self._decisions = dec

    def _shaped(self, a: np.ndarray, per_sample: bool = False) -> np.ndarray:
        # per-layer arrays are held neurons-first (n_out, N); present N x n_out views
        if not per_sample:
            a = a.T
        if self.shape is None:
            return a
        return a.reshape(self.shape) if per_sample else a.reshape(*self.shape, a.shape[-1])

    @property
    def observed_min(self) -> list[np.ndarray]:
        return [o.observed[0] for o in self._outs]

    @property
    def observed_max(self) -> list[np.ndarray]:
        return [o.observed[1] for o in self._outs]

    def neuron_acc(self, layer: int, neuron: int) -> np.ndarray:
        """s_A of one neuron as a flat contiguous (N,) array (fast for plots)."""
        return self._outs[layer].acc[neuron]

    def neuron_sums(self, layer: int, neuron: int) -> np.ndarray:
        """Exact sums ``s`` (before the accumulator) of one neuron as a flat (N,) int64 array.

        Where no accumulator overflow happened they equal :meth:`neuron_acc`.
        """
        shifted, offset = self._neuron_shifted(layer, neuron)
        return np.add(shifted, np.int64(offset), dtype=np.int64)

    def _neuron_shifted(self, layer: int, neuron: int) -> tuple[np.ndarray, int]:
        """``(d, offset)`` with ``s = d + offset``; ``d`` (N,) is non-negative, read-only, small dtype."""
        o = self._outs[layer]
        return o._shifted[neuron], int(o.layer.sum_min[neuron])

    def neuron_codes(self, layer: int, neuron: int) -> np.ndarray:
        """Output codes of one neuron as a flat contiguous (N,) array."""
        return self._outs[layer].codes[neuron]

    @property
    def inputs(self) -> np.ndarray:
        """The validated input codes (N x n_in)."""
        return self._prep.flat

    @property
    def out_codes(self) -> np.ndarray:
        return self._shaped(self._outs[-1].codes)

    @property
    def decisions(self) -> np.ndarray:
        return self._shaped(self._decisions, per_sample=True)

    @property
    def acc(self) -> list[np.ndarray]:
        return [self._shaped(o.acc) for o in self._outs]

    @property
    def codes(self) -> list[np.ndarray]:
        return [self._shaped(o.codes) for o in self._outs]

    @property
    def observed_acc_bits(self) -> list[np.ndarray]:
        """Per layer and neuron, the width that holds the exact sums seen on the data."""
        return [
            np.array([bits_for_range(a, b) for a, b in zip(mn.tolist(), mx.tolist())], dtype=np.int64)
            for mn, mx in zip(self.observed_min, self.observed_max)
        ]

    def _float_ref(self) -> _FloatRef:
        key = (self.network.digest, self._prep.key)
        return _FLOAT_CACHE.get(key, lambda: _FloatRef(self.network, self.network.predict(self._prep.flat)))

    @property
    def float_out(self) -> np.ndarray:
        out = self._float_ref().out
        return out if self.shape is None else out.reshape(*self.shape, out.shape[-1])

    @property
    def float_decisions(self) -> np.ndarray:
        """Decisions of the float network (read-only; computed once per network and input)."""
        dec = self._float_ref().decisions
        return dec if self.shape is None else dec.reshape(self.shape)

    @property
    def mismatch(self) -> int:
        """Number of samples whose fixed-point decision differs from float."""
        return int(np.count_nonzero(self.decisions != self.float_decisions))

    def event_totals(self) -> dict[str, int]:
        """Event counts summed over every neuron of every layer."""
        return {name: int(sum(int(e[name].sum()) for e in self.events)) for name in EVENT_NAMES}

    def summary_dict(self) -> dict[str, Any]:
        """A JSON-ready summary (deterministic)."""
        layers = []
        for L, e, mn, mx, ob in zip(
            self.integer_network.layers, self.events, self.observed_min, self.observed_max, self.observed_acc_bits
        ):
            layers.append(
                {
                    "layer": L.index + 1,
                    "activation": L.activation,
                    "format": L.describe(),
                    "acc_bits": L.plan.acc_bits,
                    "safe_acc_bits": L.safe_acc_bits.tolist(),
                    "observed_min": mn.tolist(),
                    "observed_max": mx.tolist(),
                    "observed_acc_bits": ob.tolist(),
                    "events": {k: v.tolist() for k, v in e.items()},
                }
            )
        return {
            "samples": self.n,
            "shape": list(self.shape) if self.shape is not None else None,
            "mismatch": self.mismatch,
            "mismatch_fraction": self.mismatch / self.n if self.n else 0.0,
            "events": self.event_totals(),
            "layers": layers,
            "notes": list(self.integer_network.notes),
        }

    def summary(self) -> str:
        """Deterministic text summary (for notebooks, reports and the CLI)."""
        d = self.summary_dict()
        shape = "x".join(map(str, self.shape)) + " image" if self.shape is not None else f"{self.n} samples"
        lines = [
            f"emulation of {shape}: {d['mismatch']} decisions differ from float "
            f"({100 * d['mismatch_fraction']:.3f} %)",
        ]
        for L in d["layers"]:
            lines.append("  " + L["format"])
            ev = ", ".join(f"{k} {sum(v)}" for k, v in L["events"].items())
            lines.append(f"    events: {ev}")
            lines.append(
                f"    safe accumulator width {L['safe_acc_bits']} (plan {L['acc_bits']}); "
                f"observed sums need {L['observed_acc_bits']}"
            )
        for note in d["notes"]:
            lines.append(f"  note: {note}")
        return "\n".join(lines)

    def npz_arrays(self) -> dict[str, np.ndarray]:
        """The arrays of the ``.npz`` result file, per ``semantics.md``."""
        out: dict[str, np.ndarray] = {
            "out_codes": self._outs[-1].codes.T.astype(np.int64),
            "decisions": self._decisions.astype(np.int64),
            "float_out": np.asarray(self.float_out, dtype=np.float64).reshape(self.n, self.network.n_out),
        }
        for l, o in enumerate(self._outs, start=1):
            out[f"acc_{l}"] = o.acc.T.astype(np.int64)
            out[f"codes_{l}"] = o.codes.T.astype(np.int64)
            for name in ("acc_overflow", "table_low", "table_high", "weight_clip"):
                out[f"{name}_{l}"] = np.asarray(o.events[name], dtype=np.int64)
        return out

    def __repr__(self) -> str:
        return f"<Emulation {self.n} samples, {self.mismatch} differ from float, events {self.event_totals()}>"


def emulate(network: Network, plan: Plan, codes: Any) -> Emulation:
    """Run the bit-exact integer network on unsigned input codes.

    Parameters
    ----------
    network, plan
        The float network and the fixed-point plan (checked against each other).
    codes
        N x n_in unsigned integer codes, or an H x W x n_in image (e.g. uint8 RGB).

    Returns
    -------
    Emulation
        Image input gives image-shaped arrays.
    """
    intnet = quantise(network, plan)
    prep = _prepare(codes, network.input_bits, network.n_in)
    outs: list[_LayerOut] = []
    prev: _LayerOut | None = None
    for li, layer in enumerate(intnet.layers):
        key = (network.digest, prep.key, plan.layers[: li + 1])

        def make(layer: IntegerLayer = layer, prev: _LayerOut | None = prev) -> _LayerOut:
            if prev is None:
                skey = (prep.key, network.input_bits, layer.q_w.shape, layer.q_w.tobytes(), layer.q_b.tobytes(),
                        layer.sum_min, layer.sum_max)  # fmt: skip
                sums = _SUM_CACHE.get(skey, lambda: _frozen(_layer_sums(layer, prep, None, network.input_bits)))
            else:
                sums = _layer_sums(layer, None, prev.codes, network.input_bits)
            return _run_layer(layer, sums)

        prev = _LAYER_CACHE.get(key, make)
        outs.append(prev)
    return Emulation(intnet, prep, outs)
