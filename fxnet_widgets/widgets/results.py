"""The records a session hands to its views: plain arrays and structured figures, nothing to parse.

Every figure a view shows arrives here already computed: decisions, event
counts per neuron (under the names a person reads, see :data:`EVENT_LABELS`),
the error metrics of each data set, the hardware cost, the guaranteed-safe
accumulator widths and the argmax ties. Views format these records; they never
call the kernel and never read text back.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..core.analysis.cost import HardwareCost
from ..core.analysis.metrics import ErrorMetrics
from ..core.kernel import EVENT_NAMES, Emulation
from ..core.network_doc import TABLE_ACTIVATIONS
from ..core.plan import Plan

__all__ = [
    "SLICES",
    "EVENT_LABELS",
    "WARNING_EVENTS",
    "ImageResult",
    "SampleResult",
    "SliceResult",
    "CubeResult",
    "NeuronResult",
    "DataFigures",
    "SessionResult",
    "layer_kind",
    "shown_events",
]

#: the three slices: (name, x input, y input, fixed input)
SLICES = (("R-G", 0, 1, 2), ("R-B", 0, 2, 1), ("G-B", 1, 2, 0))

#: the events as views name them (the contract's npz keys map onto these, see :func:`shown_events`)
EVENT_LABELS: dict[str, str] = {
    "acc_overflow": "accumulator overflows",
    "table_low": "table clamps low",
    "table_high": "table clamps high",
    "output_clamp": "output clamps",
    "off": "off (relu, negative input)",
    "weight_clip": "clipped weights",
    "bias_clip": "clipped biases",
}
#: the events that warn (the status line's total); relu "off" is the activation itself, not a warning
WARNING_EVENTS = ("acc_overflow", "table_low", "table_high", "output_clamp", "weight_clip", "bias_clip")


def layer_kind(activation: str) -> str:
    """``"table"`` (sigmoid, tanh: a value table), ``"relu"`` or ``"identity"``."""
    return "table" if activation in TABLE_ACTIVATIONS else activation


def shown_events(kind: str, raw: dict[str, int]) -> dict[str, int]:
    """The kernel's counts (npz keys) under the names a person reads.

    For a table layer ``table_low``/``table_high`` are table clamps. For relu,
    ``table_low`` (a negative pre-activation) is the activation itself, shown
    as ``off``, and ``table_high`` (the top of the output range) is an output
    clamp. For identity both ends are output clamps.

    >>> shown_events("relu", {"acc_overflow": 1, "table_low": 5, "table_high": 2, "weight_clip": 0, "bias_clip": 0})
    {'acc_overflow': 1, 'output_clamp': 2, 'off': 5, 'weight_clip': 0, 'bias_clip': 0}
    """
    out = {"acc_overflow": int(raw["acc_overflow"])}
    if kind == "table":
        out["table_low"], out["table_high"] = int(raw["table_low"]), int(raw["table_high"])
    elif kind == "relu":
        out["output_clamp"], out["off"] = int(raw["table_high"]), int(raw["table_low"])
    else:
        out["output_clamp"] = int(raw["table_low"]) + int(raw["table_high"])
    out["weight_clip"], out["bias_clip"] = int(raw["weight_clip"]), int(raw["bias_clip"])
    return out


def _differ(a: np.ndarray, b: np.ndarray) -> int:
    return int(np.count_nonzero(a != b))


@dataclass(frozen=True, eq=False)
class ImageResult:
    """The image part: the codes the kernel saw, both decisions and the labels (H x W)."""

    codes: np.ndarray
    fixed: np.ndarray
    float_: np.ndarray
    factor: int
    full_shape: tuple[int, int]
    note: str
    emulation: Emulation
    labels: np.ndarray | None = None

    @property
    def mismatch(self) -> int:
        return _differ(self.fixed, self.float_)


@dataclass(frozen=True, eq=False)
class SampleResult:
    """The samples: codes (N x n_in), labels (or None) and both decisions (N,)."""

    codes: np.ndarray
    labels: np.ndarray | None
    fixed: np.ndarray
    float_: np.ndarray
    emulation: Emulation


@dataclass(frozen=True, eq=False)
class SliceResult:
    """One slice of the input cube: ``fixed[iy, ix]`` at inputs (x[ix], y[iy], position).

    ``points_x``, ``points_y`` and ``points_class`` are the samples within
    ``tolerance`` codes of the slice (class = label, or fixed decision without labels).
    """

    name: str
    x_input: int
    y_input: int
    fixed_input: int
    position: int
    x: np.ndarray
    y: np.ndarray
    fixed: np.ndarray
    float_: np.ndarray
    points_x: np.ndarray
    points_y: np.ndarray
    points_class: np.ndarray
    tolerance: int

    @property
    def mismatch(self) -> int:
        return _differ(self.fixed, self.float_)


@dataclass(frozen=True, eq=False)
class CubeResult:
    """Decisions on a regular grid over the whole input cube, indexed [red, green, blue]."""

    grid: np.ndarray
    fixed: np.ndarray
    float_: np.ndarray

    @property
    def mismatch(self) -> int:
        return _differ(self.fixed, self.float_)


@dataclass(frozen=True, eq=False)
class NeuronResult:
    """Events and the histogram of exact accumulator sums of one neuron on the data.

    ``edges`` and the ``*_edges`` marks are in accumulator LSBs (integers);
    divide by ``2**acc_frac`` for real pre-activation values. The accumulator
    range is ``[acc_edges[0], acc_edges[1])``; the window of sums that are not
    clamped (the table window, or the output range of relu/identity; exact for
    ``floor`` index rounding) is ``[table_edges[0], table_edges[1])``.
    ``events`` holds the kernel's counts under the contract's npz keys;
    :attr:`shown` under the names a person reads.
    """

    layer: int
    neuron: int
    label: str
    kind: str
    events: dict[str, int]
    edges: np.ndarray
    counts: np.ndarray
    acc_frac: int
    acc_edges: tuple[int, int]
    table_edges: tuple[int, int]
    safe_acc_bits: int
    observed_min: int
    observed_max: int

    @property
    def shown(self) -> dict[str, int]:
        """The events under the names a person reads (see :func:`shown_events`)."""
        return shown_events(self.kind, self.events)

    def real(self, v: Any) -> np.ndarray:
        """Accumulator LSBs to real pre-activation values (float64)."""
        return np.ldexp(np.asarray(v, dtype=np.float64), -self.acc_frac)


@dataclass(frozen=True, eq=False)
class DataFigures:
    """The figures of one data set (image or samples), computed once per plan.

    ``metrics`` is :func:`~fxnet_widgets.core.analysis.metrics.error_metrics`;
    ``agreement[i][j]`` counts the points float calls class ``i`` and fixed point
    class ``j`` (n x n); ``ties`` counts, per class pair ``(i, j)`` with ``i < j``,
    the decisions where both outputs hold the largest code (fixed point then
    takes the lower index): empty for one output.
    """

    name: str
    metrics: ErrorMetrics
    agreement: tuple[tuple[int, ...], ...]
    ties: dict[tuple[int, int], int]

    @property
    def per_class_agreement(self) -> tuple[float | None, ...]:
        """Per class, the fraction of the points float calls that class where fixed point agrees (None: none)."""
        return tuple((row[i] / sum(row)) if sum(row) else None for i, row in enumerate(self.agreement))

    @property
    def tie_total(self) -> int:
        return sum(self.ties.values())


@dataclass(frozen=True, eq=False)
class SessionResult:
    """Everything the views draw, for one plan and one set of slice positions."""

    plan: Plan
    generation: int
    classes: tuple[str, ...]
    image: ImageResult | None
    samples: SampleResult | None
    slices: tuple[SliceResult, ...] | None
    cube: CubeResult | None
    neurons: tuple[NeuronResult, ...]
    data_name: str
    descriptions: tuple[str, ...]
    figures: tuple[DataFigures, ...]
    cost: HardwareCost
    layer_safe_acc_bits: tuple[int, ...]
    kinds: tuple[str, ...]

    @property
    def n_classes(self) -> int:
        return len(self.classes)

    def event_totals(self) -> dict[str, int]:
        """Totals under the contract's npz keys (:data:`~fxnet_widgets.core.kernel.EVENT_NAMES`)."""
        return {name: sum(nr.events[name] for nr in self.neurons) for name in EVENT_NAMES}

    def shown_totals(self) -> dict[str, int]:
        """Totals under the names a person reads (every key of :data:`EVENT_LABELS` present)."""
        out = dict.fromkeys(EVENT_LABELS, 0)
        for nr in self.neurons:
            for k, v in nr.shown.items():
                out[k] += v
        return out

    @property
    def warning_total(self) -> int:
        """Accumulator overflows, clamps and clipped values (relu "off" is not a warning)."""
        tot = self.shown_totals()
        return sum(tot[k] for k in WARNING_EVENTS)

    @property
    def tie_total(self) -> int:
        return sum(f.tie_total for f in self.figures)

