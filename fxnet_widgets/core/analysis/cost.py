"""Analytic hardware cost of a (network, plan) pair: adders, multipliers, memory, registers.

Every figure is a closed formula of the integer network (no synthesis, no vendor
data); the formulas are those of :func:`hardware_cost`.

Examples
--------
>>> from fxnet_widgets.core.network import Network
>>> from fxnet_widgets.core.plan import Plan
>>> net = Network.from_layers([([[0.5, -0.25, 0.875]], [0.0], "sigmoid")])
>>> plan = Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18,
...                     table_bits=14, table_frac=10, out_bits=8)
>>> c = hardware_cost(net, plan)
>>> c.layers[0].csd_digits, c.layers[0].adders, c.table_bits
(4, 3, 131072)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..kernel import build_integer_network
from ..network import Network
from ..plan import Plan
from .csd import csd_nonzero

__all__ = ["LayerCost", "HardwareCost", "hardware_cost", "COST_KEYS", "CALIBRATED_KEYS", "MULTIPLIER_MODES"]

MULTIPLIER_MODES = ("csd", "hard")
#: totals that can serve as the single cost figure of a search
_ANALYTIC_KEYS = (
    "total_bits", "logic_bits", "adder_bits", "adders", "multipliers", "table_bits", "table_blocks", "register_bits",
)  # fmt: skip
#: estimates of the reference datapath on a target, calibrated on synthesis runs (core/synth/calibration.py)
CALIBRATED_KEYS = ("luts", "ffs", "brams")
COST_KEYS = (*_ANALYTIC_KEYS, *CALIBRATED_KEYS)


@dataclass(frozen=True)
class LayerCost:
    """Cost of one layer (see :func:`hardware_cost` for every formula)."""

    layer: int
    activation: str
    n_in: int
    n_out: int
    input_bits: int
    input_signed: bool
    weight_bits: int
    nonzero_weights: int
    csd_digits: int
    weight_digits: tuple[tuple[int, ...], ...]
    product_adders: int
    tree_adders: int
    adders: int
    multipliers: int
    acc_bits: int
    tree_width: int
    adder_bits: int
    table_entries: int
    table_width: int
    tables: int
    table_bits: int
    table_blocks: int
    pipeline_stages: int
    register_bits: int

    def to_dict(self) -> dict[str, Any]:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["weight_digits"] = [list(r) for r in self.weight_digits]
        return d


@dataclass(frozen=True)
class HardwareCost:
    """Per-layer and total cost of a plan (immutable)."""

    layers: tuple[LayerCost, ...]
    multipliers_mode: str
    multiplier_size: tuple[int, int]
    block_bits: int
    pipeline_stages: int
    target: str = "ice40-up5k"  # the target of the calibrated estimates (CALIBRATED_KEYS)
    #: ``(network, plan)`` the cost is of: the calibrated estimates count from their generated datapath
    source: Any = field(default=None, repr=False, compare=False)
    _estimate: Any = field(default=None, init=False, repr=False, compare=False)

    def _sum(self, key: str) -> int:
        return int(sum(getattr(L, key) for L in self.layers))

    @property
    def adders(self) -> int:
        return self._sum("adders")

    @property
    def multipliers(self) -> int:
        return self._sum("multipliers")

    @property
    def adder_bits(self) -> int:
        return self._sum("adder_bits")

    @property
    def table_bits(self) -> int:
        return self._sum("table_bits")

    @property
    def table_blocks(self) -> int:
        return self._sum("table_blocks")

    @property
    def register_bits(self) -> int:
        return self._sum("register_bits")

    @property
    def logic_bits(self) -> int:
        """``adder_bits + register_bits``."""
        return self.adder_bits + self.register_bits

    @property
    def total_bits(self) -> int:
        """``adder_bits + register_bits + table_bits``: one crude size figure for searches."""
        return self.adder_bits + self.register_bits + self.table_bits

    @property
    def latency(self) -> int:
        """Clock cycles from input to decision: ``pipeline_stages`` per layer."""
        return self.pipeline_stages * len(self.layers)

    def totals(self) -> dict[str, int]:
        """Network totals, keyed as :data:`COST_KEYS` (plus ``latency``)."""
        out = {k: int(getattr(self, k)) for k in _ANALYTIC_KEYS}
        out["latency"] = self.latency
        return out

    def estimated(self) -> dict[str, int]:
        """LUTs, flip-flops, block RAMs and DSP blocks of the reference datapath on :attr:`target`, counted
        from its generated structure with the coefficients fitted on synthesis runs (estimates for that
        device and tool version, not sign-off; ``fxnet_widgets.core.synth.calibration``)."""
        from ..synth.calibration import calibrations  # lazily: only searches by a calibrated key need it

        cals = calibrations()
        if self.target not in cals:
            raise ValueError(f"target must be one of the calibrated targets ({', '.join(sorted(cals)) or 'none'}), "
                             f"not {self.target!r}")  # fmt: skip
        if self.source is None:
            raise ValueError("source must be the (network, plan) of the cost for a calibrated estimate, not None")
        if self._estimate is None:
            object.__setattr__(self, "_estimate", cals[self.target].estimate(*self.source))
        return dict(self._estimate)

    def value(self, key: str) -> int:
        """One total by name (one of :data:`COST_KEYS`)."""
        if key not in COST_KEYS:
            raise ValueError(f"cost must be one of {', '.join(COST_KEYS)}, not {key!r}")
        if key in CALIBRATED_KEYS:
            return self.estimated()[key]
        return int(getattr(self, key))

    def to_dict(self) -> dict[str, Any]:
        return {
            "multipliers_mode": self.multipliers_mode,
            "multiplier_size": list(self.multiplier_size),
            "block_bits": self.block_bits,
            "pipeline_stages": self.pipeline_stages,
            "totals": self.totals(),
            "layers": [L.to_dict() for L in self.layers],
        }

    def summary(self) -> str:
        """Deterministic text summary."""
        mode = (
            "constant weights as CSD shift-and-add"
            if self.multipliers_mode == "csd"
            else f"hard multipliers of {self.multiplier_size[0]}x{self.multiplier_size[1]} bits"
        )
        lines = [
            f"hardware cost ({mode}; memory blocks of {self.block_bits} bits; "
            f"{self.pipeline_stages} pipeline stage(s) per layer)"
        ]
        for L in self.layers:
            table = (
                f"{L.tables} table(s) of {L.table_entries} x {L.table_width} b = {L.table_bits} bits "
                f"in {L.table_blocks} block(s)"
                if L.tables
                else "no table"
            )
            lines.append(
                f"  layer {L.layer} ({L.activation}, {L.n_in}->{L.n_out}): {L.nonzero_weights} nonzero weights, "
                f"{L.csd_digits} CSD digits; adders {L.adders} ({L.product_adders} in products, "
                f"{L.tree_adders} in trees, {L.tree_width} b wide); multipliers {L.multipliers}; "
                f"accumulator {L.acc_bits} b; {table}; "
                f"registers {L.register_bits} bits"
            )
        t = self.totals()
        lines.append(
            f"  total: adders {t['adders']} ({t['adder_bits']} adder bits), multipliers {t['multipliers']}, "
            f"table bits {t['table_bits']} in {t['table_blocks']} block(s), register bits {t['register_bits']}, "
            f"latency {t['latency']} clocks; total bits {t['total_bits']}"
        )
        return "\n".join(lines)


def _positive_int(v: Any, what: str, lo: int = 1) -> int:
    if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
        raise TypeError(f"{what} must be an integer, not {v!r}")
    if v < lo:
        raise ValueError(f"{what} must be at least {lo}, not {v!r}")
    return int(v)


def _blocks(a: int, b: int, size: tuple[int, int]) -> int:
    ma, mb = size
    return min(math.ceil(a / ma) * math.ceil(b / mb), math.ceil(a / mb) * math.ceil(b / ma))


def hardware_cost(
    network: Network,
    plan: Plan,
    *,
    multipliers: str = "csd",
    multiplier_size: tuple[int, int] = (18, 18),
    block_bits: int = 18432,
    pipeline_stages: int = 3,
    target: str = "ice40-up5k",
) -> HardwareCost:
    """Analytic cost of the integer network of ``(network, plan)``.

    Per layer, with ``q_w`` the integer weights (n_out x n_in), ``Ww`` the weight
    width, ``A`` the accumulator width, ``T`` the table address width and ``Bo``
    the output width, and ``Wi`` the input width (layer 1: the input bits; later:
    the previous ``Bo``; plus one bit when unsigned, for a signed multiplier):

    * ``csd_digits`` = sum of the nonzero CSD digits of every ``q_w`` (zero weights
      have none and need no product);
    * ``multipliers="csd"`` (constant weights): ``product_adders`` = sum over
      weights of ``max(digits - 1, 0)``; ``multipliers = 0``;
    * ``multipliers="hard"``: every nonzero weight uses
      ``min(ceil(Ww/ma) ceil(Wi/mb), ceil(Ww/mb) ceil(Wi/ma))`` multipliers of
      ``multiplier_size = (ma, mb)``; ``product_adders = 0``;
    * ``tree_adders`` = sum over neurons of ``max(m + c - 1, 0)``, ``m`` its
      nonzero weights and ``c = 1`` if its bias is nonzero (an adder tree of
      ``m + c`` terms);
    * ``tree_width``: ``A`` for ``wrap`` (two's complement sums may wrap at every
      adder), ``max(A, safe width)`` for ``saturate`` (the full sum is needed
      before the clamp); ``adder_bits = (product_adders + tree_adders) x tree_width``;
    * tables (sigmoid/tanh, one per neuron): ``table_bits = n_out x 2**T x Bo``;
      ``table_blocks = n_out x ceil(2**T x Bo / block_bits)``; relu/identity have
      no table (a clamp);
    * registers, for ``S = pipeline_stages`` per layer: registers are placed, in
      this order, after the output (``Bo``), the accumulator (``A``), the table
      address (``T``, tables only), then inside the adder tree (``tree_width``
      each); ``register_bits = n_out x`` the sum of the first ``S`` widths.

    Totals are the sums over layers; ``logic_bits = adder_bits + register_bits``;
    ``total_bits = logic_bits + table_bits``; ``latency = S x layers`` clocks.

    Parameters
    ----------
    network, plan
        The float network and its fixed-point plan.
    multipliers
        ``"csd"`` (weights as constants, shift-and-add) or ``"hard"``.
    multiplier_size
        Operand widths of one hard multiplier (default 18 x 18).
    block_bits
        Bits of one memory block (default 18432).
    pipeline_stages
        Register stages per layer (default 3; 0 is purely combinational).
    target
        Synthesis target of the calibrated estimates ``luts``, ``ffs``, ``brams``
        (:meth:`HardwareCost.estimated`; see ``fxnet_widgets.core.synth.calibration``).
    """
    if multipliers not in MULTIPLIER_MODES:
        raise ValueError(f"multipliers must be one of csd, hard, not {multipliers!r}")
    if not isinstance(multiplier_size, (tuple, list)) or len(multiplier_size) != 2:
        raise TypeError(f"multiplier_size must be a pair of integers, not {multiplier_size!r}")
    size = (
        _positive_int(multiplier_size[0], "multiplier_size[0]", 2),
        _positive_int(multiplier_size[1], "multiplier_size[1]", 2),
    )
    block_bits = _positive_int(block_bits, "block_bits")
    stages = _positive_int(pipeline_stages, "pipeline_stages", 0)
    intnet = build_integer_network(network, plan)
    in_bits, in_signed = network.input_bits, False
    layers = []
    for L in intnet.layers:
        p = L.plan
        q_w = np.asarray(L.q_w)
        digits = tuple(tuple(csd_nonzero(int(v)) for v in row) for row in q_w.tolist())
        csd_total = int(sum(map(sum, digits)))
        nonzero = (q_w != 0).sum(axis=1)
        terms = nonzero + (np.asarray(L.q_b) != 0)
        tree_adders = int(np.maximum(terms - 1, 0).sum())
        if multipliers == "csd":
            product_adders = int(sum(max(d - 1, 0) for row in digits for d in row))
            mults = 0
        else:
            product_adders = 0
            wi = in_bits + (0 if in_signed else 1)
            mults = int(nonzero.sum()) * _blocks(p.weight_bits, wi, size)
        safe = int(np.max(L.safe_acc_bits))
        tree_width = p.acc_bits if p.acc_overflow == "wrap" else max(p.acc_bits, safe)
        adders = product_adders + tree_adders
        if L.table is not None:
            assert p.table_bits is not None
            entries, tables = 1 << p.table_bits, L.n_out
            per_table = entries * p.out_bits
            table_bits, table_blocks = tables * per_table, tables * math.ceil(per_table / block_bits)
            cuts = [p.out_bits, p.acc_bits, p.table_bits]
        else:
            entries = tables = table_bits = table_blocks = 0
            cuts = [p.out_bits, p.acc_bits]
        cuts += [tree_width] * max(stages - len(cuts), 0)
        layers.append(
            LayerCost(
                layer=L.index + 1, activation=L.activation, n_in=L.n_in, n_out=L.n_out, input_bits=in_bits,
                input_signed=in_signed, weight_bits=p.weight_bits, nonzero_weights=int(nonzero.sum()),
                csd_digits=csd_total, weight_digits=digits, product_adders=product_adders,
                tree_adders=tree_adders, adders=adders, multipliers=mults, acc_bits=p.acc_bits,
                tree_width=tree_width, adder_bits=adders * tree_width, table_entries=entries,
                table_width=p.out_bits if tables else 0, tables=tables, table_bits=table_bits,
                table_blocks=table_blocks, pipeline_stages=stages, register_bits=L.n_out * sum(cuts[:stages]),
            )
        )  # fmt: skip
        in_bits, in_signed = p.out_bits, L.out_signed
    if not isinstance(target, str):
        raise TypeError(f"target must be a target name, not {target!r}")
    return HardwareCost(tuple(layers), multipliers, size, block_bits, stages, target, (network, plan))
