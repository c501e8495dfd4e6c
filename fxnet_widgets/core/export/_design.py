"""What the hand-off files describe: the integer network laid out for hardware.

:func:`describe` turns an :class:`~fxnet_widgets.core.kernel.IntegerNetwork`
into plain values (Python ints, lists and numpy arrays) that every writer
(manifest, VHDL, Verilog, C, memory images) prints without further arithmetic,
so the files cannot disagree with one another.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..formats import ROUNDINGS
from ..kernel import IntegerNetwork
from ._names import unique_identifiers

__all__ = ["LayerDesign", "Design", "describe", "PREFIX", "FILES", "table_file", "vector_file"]

#: prefix of every constant in the VHDL package, the Verilog include and the C header
PREFIX = "FXNET"
#: fixed file names of the export directory
FILES = {
    "manifest": "manifest.json",
    "network": "network.json",
    "plan": "plan.json",
    "vhdl": "fxnet_design_pkg.vhd",
    "verilog": "fxnet_design.vh",
    "c": "fxnet_design.h",
    "csv": "vectors/golden.csv",
}
VHDL_PACKAGE = "fxnet_design_pkg"


def table_file(layer: int) -> str:
    """Relative name of the memory image of layer ``layer`` (1-based)."""
    return f"tables/layer{layer}_table.memh"


def vector_file(what: str) -> str:
    """Relative name of a golden-vector memory image (``inputs``, ``layer1_acc``...)."""
    return f"vectors/{what}.memh"


@dataclass(frozen=True)
class LayerDesign:
    """One layer, ready to print (``number`` is 1-based; ``name`` is e.g. ``L1``)."""

    number: int
    name: str
    activation: str
    n_in: int
    n_out: int
    weight_bits: int
    weight_frac: int
    weights: np.ndarray  # (n_out, n_in) int64
    biases: np.ndarray  # (n_out,) int64, acc_bits wide
    acc_bits: int
    acc_frac: int
    acc_overflow: str
    shift: int
    index_round: str
    index_min: int
    index_max: int
    table: np.ndarray | None  # (2**table_bits,) int64 in address order
    table_bits: int | None
    table_frac: int | None
    out_bits: int
    out_frac: int
    out_signed: bool
    out_min: int
    out_max: int
    safe_acc_bits: tuple[int, ...]
    plan: dict[str, object]  # the layer's plan object, as in plan.json

    @property
    def table_file(self) -> str | None:
        return table_file(self.number) if self.table is not None else None

    @property
    def index_round_code(self) -> int:
        return ROUNDINGS.index(self.index_round)


@dataclass(frozen=True)
class Design:
    """The whole integer network, ready to print."""

    input_names: tuple[str, ...]
    input_ids: tuple[str, ...]
    input_bits: int
    input_frac: int
    classes: tuple[str, ...]
    class_ids: tuple[str, ...]
    threshold: float
    threshold_code: int | None  # exact ceil(threshold * 2**Fo), one output only
    threshold_word: int | None  # the same decision, clamped to [out_min, out_max + 1]
    decision_bits: int
    layers: tuple[LayerDesign, ...]

    @property
    def n_inputs(self) -> int:
        return len(self.input_names)

    @property
    def n_outputs(self) -> int:
        return self.layers[-1].n_out


def describe(intnet: IntegerNetwork) -> Design:
    """The :class:`Design` of an integer network."""
    net = intnet.network
    layers = []
    for L in intnet.layers:
        p = L.plan
        layers.append(
            LayerDesign(
                number=L.index + 1, name=f"L{L.index + 1}", activation=L.activation, n_in=L.n_in,
                n_out=L.n_out, weight_bits=p.weight_bits, weight_frac=p.weight_frac,
                weights=np.asarray(L.q_w, dtype=np.int64), biases=np.asarray(L.q_b, dtype=np.int64),
                acc_bits=p.acc_bits, acc_frac=L.acc_frac, acc_overflow=p.acc_overflow, shift=int(L.shift),
                index_round=p.index_round, index_min=int(L.index_min), index_max=int(L.index_max),
                table=None if L.table is None else np.asarray(L.table, dtype=np.int64),
                table_bits=p.table_bits if L.table is not None else None,
                table_frac=p.table_frac if L.table is not None else None,
                out_bits=p.out_bits, out_frac=int(L.out_frac), out_signed=bool(L.out_signed),
                out_min=int(L.out_min), out_max=int(L.out_max),
                safe_acc_bits=tuple(int(v) for v in L.safe_acc_bits.tolist()),
                plan=p.to_dict(),
            )
        )  # fmt: skip
    last = layers[-1]
    thr_code = intnet.threshold_code
    thr_word = None if thr_code is None else min(max(int(thr_code), last.out_min), last.out_max + 1)
    decision_bits = 1 if last.n_out == 1 else max(1, (last.n_out - 1).bit_length())
    return Design(
        input_names=tuple(net.input_names),
        input_ids=tuple(unique_identifiers(net.input_names)),
        input_bits=net.input_bits,
        input_frac=net.input_bits,
        classes=tuple(net.classes),
        class_ids=tuple(unique_identifiers(net.classes)),
        threshold=float(net.threshold),
        threshold_code=None if thr_code is None else int(thr_code),
        threshold_word=thr_word,
        decision_bits=decision_bits,
        layers=tuple(layers),
    )
