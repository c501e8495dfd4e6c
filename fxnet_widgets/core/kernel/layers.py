"""The integer network as hardware holds it: value records, one per stage of a layer."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import numpy as np

from ..formats import q_notation
from ..network import Network
from ..plan import LayerPlan, Plan

__all__ = ["DATA_EVENTS", "STATIC_EVENTS", "EVENT_NAMES", "CodeFormat", "Bounds", "IntegerLayer", "IntegerNetwork"]

#: events counted per sample (contract steps 4, 5 and 7)
DATA_EVENTS: Final = ("acc_overflow", "table_low", "table_high")
#: events of the integer network itself, counted once (steps 1 and 2)
STATIC_EVENTS: Final = ("weight_clip", "bias_clip")
EVENT_NAMES: Final = DATA_EVENTS + STATIC_EVENTS


@dataclass(frozen=True)
class CodeFormat:
    """Integer codes of one stage: fraction bits and the range ``[lo, hi]``."""

    frac: int
    lo: int
    hi: int
    signed: bool = True


@dataclass(frozen=True)
class Bounds:
    """Per neuron ``j``, the integer interval ``[lo[j], hi[j]]``."""

    lo: tuple[int, ...]
    hi: tuple[int, ...]


@dataclass(frozen=True, eq=False)
class IntegerLayer:
    """One layer as hardware holds it (all integers; see ``semantics.md``).

    Attributes
    ----------
    index, activation, plan : the layer's position, activation and plan
    q_w : (n_out, n_in) int64 weight codes (after clamp)
    q_b : (n_out,) int64 bias codes (after clamp to the accumulator range)
    q_b_raw : tuple of Python ints, bias codes before the clamp
    weight_clip, bias_clip : (n_out,) int64 static event counts
    inputs : the layer's input codes (frac, reachable range)
    sums : per neuron, the interval of the exact sum s (clamped bias)
    safe : per neuron, the interval the guaranteed-safe width holds (raw bias included)
    safe_acc_bits : per neuron, the guaranteed-safe accumulator width
    shift : k of steps 5 and 7 (right shift if positive, left if negative)
    address : the clamp range of the table index (or of the output, relu/identity)
    table : (2**table_bits,) int64 entries in address order, or None (relu/identity)
    output : the output code format (frac, out range, signedness)
    reachable : the output codes the layer can produce (its table's entries, or the out range)
    """

    index: int
    activation: str
    plan: LayerPlan
    q_w: np.ndarray
    q_b: np.ndarray
    q_b_raw: tuple[int, ...]
    weight_clip: np.ndarray
    bias_clip: np.ndarray
    inputs: CodeFormat
    sums: Bounds
    safe: Bounds
    safe_acc_bits: np.ndarray
    shift: int
    address: CodeFormat
    table: np.ndarray | None
    output: CodeFormat
    reachable: CodeFormat

    # shorthands read across the package
    @property
    def n_in(self) -> int:
        return int(self.q_w.shape[1])

    @property
    def n_out(self) -> int:
        return int(self.q_w.shape[0])

    @property
    def in_frac(self) -> int:
        return self.inputs.frac

    @property
    def acc_frac(self) -> int:
        """Fraction bits of the accumulator: ``in_frac + weight_frac``."""
        return self.inputs.frac + self.plan.weight_frac

    @property
    def sum_min(self) -> tuple[int, ...]:
        return self.sums.lo

    @property
    def sum_max(self) -> tuple[int, ...]:
        return self.sums.hi

    @property
    def safe_min(self) -> tuple[int, ...]:
        return self.safe.lo

    @property
    def safe_max(self) -> tuple[int, ...]:
        return self.safe.hi

    @property
    def index_min(self) -> int:
        return self.address.lo

    @property
    def index_max(self) -> int:
        return self.address.hi

    @property
    def out_frac(self) -> int:
        return self.output.frac

    @property
    def out_min(self) -> int:
        return self.output.lo

    @property
    def out_max(self) -> int:
        return self.output.hi

    @property
    def out_signed(self) -> bool:
        return self.output.signed

    @property
    def code_min(self) -> int:
        return self.reachable.lo

    @property
    def code_max(self) -> int:
        return self.reachable.hi

    def table_address(self, index: np.ndarray) -> np.ndarray:
        """Offset-binary table address of a (clamped) index: ``a + 2**(T-1)``."""
        return np.asarray(index, dtype=np.int64) - self.address.lo

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
        s += f"output {q_notation(p.out_bits, self.output.frac, self.output.signed)}"
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
