"""The fixed-point plan: every width, fraction and mode of every layer.

A :class:`Plan` is an immutable value (frozen dataclasses): equal plans compare
and hash equal, ``repr`` reads as code that rebuilds it, and changing a width
makes a new plan::

    >>> p = Plan((LayerPlan(weight_bits=8, weight_frac=5, acc_bits=18, out_bits=8,
    ...                     table_bits=14, table_frac=9),))
    >>> p.replace(acc_bits=16).layers[0].acc_bits
    16
    >>> p == Plan.from_dict(p.to_dict())
    True

Keys, defaults and limits are those of ``semantics.md``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, fields, replace
from typing import TYPE_CHECKING, Any

from .fileio import atomic_write_json, key_text, load_json
from .formats import OVERFLOWS, ROUNDINGS

if TYPE_CHECKING:
    from .network import Network

__all__ = ["LayerPlan", "Plan", "PLAN_FIELDS", "INT_LIMITS", "CHOICES", "check_field"]

#: integer fields and their inclusive limits
INT_LIMITS: dict[str, tuple[int, int]] = {
    "weight_bits": (1, 32),
    "weight_frac": (-40, 40),
    "acc_bits": (1, 62),
    "table_bits": (1, 20),
    "table_frac": (-40, 40),
    "out_bits": (1, 16),
    "out_frac": (-40, 40),
}
#: choice fields and their allowed values
CHOICES: dict[str, tuple[str, ...]] = {
    "weight_round": ROUNDINGS,
    "acc_overflow": OVERFLOWS,
    "index_round": ROUNDINGS,
    "table_round": ROUNDINGS,
    "table_sample": ("edge", "mid"),
}
DEFAULTS: dict[str, Any] = {
    "weight_round": "half-even",
    "acc_overflow": "wrap",
    "index_round": "floor",
    "table_round": "half-even",
    "table_sample": "edge",
    "table_bits": None,
    "table_frac": None,
    "out_frac": None,
}
ALWAYS_REQUIRED = ("weight_bits", "weight_frac", "acc_bits", "out_bits")
PLAN_FIELDS = (
    "weight_bits", "weight_frac", "weight_round", "acc_bits", "acc_overflow",
    "table_bits", "table_frac", "index_round", "out_bits", "out_frac",
    "table_round", "table_sample",
)  # fmt: skip


def check_field(name: str, value: Any, where: str) -> Any:
    """One plan field checked against the contract's limits (``where`` prefixes the error); returns it.

    The one set of limit checks: plans, grids and tune's moves all use it.
    """
    if name in INT_LIMITS:
        if value is None and name in DEFAULTS:
            return None
        if not isinstance(value, int) or isinstance(value, bool):
            raise TypeError(f"{where}{name} must be an integer, not {value!r}")
        lo, hi = INT_LIMITS[name]
        if not lo <= value <= hi:
            raise ValueError(f"{where}{name} must be between {lo} and {hi}, not {value!r}")
        return int(value)
    if name in CHOICES:
        if not isinstance(value, str) or value not in CHOICES[name]:
            raise ValueError(f"{where}{name} must be one of {', '.join(CHOICES[name])}, not {value!r}")
        return value
    raise ValueError(f"{where}{key_text(name)} is not a plan key (known: {', '.join(PLAN_FIELDS)})")


@dataclass(frozen=True)
class LayerPlan:
    """Fixed-point settings of one layer (see ``semantics.md`` for each key)."""

    weight_bits: int
    weight_frac: int
    acc_bits: int
    out_bits: int
    table_bits: int | None = None
    table_frac: int | None = None
    out_frac: int | None = None
    weight_round: str = "half-even"
    acc_overflow: str = "wrap"
    index_round: str = "floor"
    table_round: str = "half-even"
    table_sample: str = "edge"

    def __post_init__(self) -> None:
        for f in fields(self):
            check_field(f.name, getattr(self, f.name), "")

    @classmethod
    def from_dict(cls, doc: Any, where: str = "") -> LayerPlan:
        if not isinstance(doc, dict):
            raise TypeError(f"{where.rstrip('.') or 'layer plan'} must be an object, not {doc!r}")
        for key in doc:
            if key not in PLAN_FIELDS:
                raise ValueError(f"{where}{key_text(key)} is not a plan key (known: {', '.join(PLAN_FIELDS)})")
        for key in ALWAYS_REQUIRED:
            if key not in doc:
                raise ValueError(f"{where}{key} is missing")
        values = {k: check_field(k, v, where) for k, v in doc.items()}
        return cls(**values)

    def to_dict(self) -> dict[str, Any]:
        return {k: getattr(self, k) for k in PLAN_FIELDS if getattr(self, k) is not None}

    def __repr__(self) -> str:
        parts = []
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name in ALWAYS_REQUIRED or v != DEFAULTS.get(f.name):
                parts.append(f"{f.name}={v!r}")
        return f"LayerPlan({', '.join(parts)})"

    def resolved_out_frac(self, activation: str) -> int:
        """``out_frac``, or its default: sigmoid ``out_bits``, tanh ``out_bits - 1``."""
        if self.out_frac is not None:
            return self.out_frac
        if activation == "sigmoid":
            return self.out_bits
        if activation == "tanh":
            return self.out_bits - 1
        raise ValueError(f"out_frac is required for a {activation} layer")


@dataclass(frozen=True)
class Plan:
    """A per-layer fixed-point plan (immutable value)."""

    layers: tuple[LayerPlan, ...]

    def __post_init__(self) -> None:
        if not isinstance(self.layers, tuple):
            object.__setattr__(self, "layers", tuple(self.layers))
        if not self.layers:
            raise ValueError("layers must hold at least one layer plan")
        for i, lp in enumerate(self.layers):
            if not isinstance(lp, LayerPlan):
                raise TypeError(f"layers[{i}] must be a LayerPlan, not {lp!r}")

    def __repr__(self) -> str:
        inner = ", ".join(repr(lp) for lp in self.layers)
        return f"Plan(({inner},))"

    # -- construction -------------------------------------------------------------
    @classmethod
    def uniform(cls, network: Network, **values: Any) -> Plan:
        """The same fields on every layer (table keys are dropped for relu/identity).

        >>> from fxnet_widgets.core.network import Network
        >>> net = Network.from_layers([([[1.0]], [0.0], "sigmoid")], input_names=["x"])
        >>> Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=16, out_bits=8,
        ...              table_bits=10, table_frac=6).layers[0].table_bits
        10
        """
        layers: list[LayerPlan] = []
        for L in network.layers:
            doc = dict(values)
            if L.activation in ("relu", "identity"):
                doc.pop("table_bits", None)
                doc.pop("table_frac", None)
            layers.append(LayerPlan.from_dict(doc, f"layers[{len(layers)}]."))
        plan = cls(tuple(layers))
        plan.check(network)
        return plan

    @classmethod
    def from_dict(cls, doc: Any) -> Plan:
        """Validate a plan document (the parsed JSON file)."""
        if not isinstance(doc, dict):
            raise TypeError(f"plan must be a JSON object, not {doc!r}")
        for key in doc:
            if key not in ("kind", "version", "layers"):
                raise ValueError(f"{key_text(key)} is not a plan file key (known: kind, layers, version)")
        if doc.get("kind", "fxnet.plan") != "fxnet.plan":
            raise ValueError(f"kind must be 'fxnet.plan', not {doc.get('kind')!r}")
        if doc.get("version", 1) != 1 or isinstance(doc.get("version", 1), bool):
            raise ValueError(f"version must be 1, not {doc.get('version')!r}")
        if "layers" not in doc:
            raise ValueError("layers is missing (a list of layer objects)")
        layers = doc["layers"]
        if not isinstance(layers, list) or not layers:
            raise TypeError(f"layers must be a non-empty list, not {layers!r}")
        return cls(tuple(LayerPlan.from_dict(ld, f"layers[{i}].") for i, ld in enumerate(layers)))

    @classmethod
    def load(cls, path: str | os.PathLike[str], network: Network | None = None) -> Plan:
        """Read a plan file (and check it against ``network`` if given)."""
        doc = load_json(path)
        try:
            plan = cls.from_dict(doc)
            if network is not None:
                plan.check(network)
        except (TypeError, ValueError) as exc:
            raise type(exc)(f"{os.fspath(path)}: {exc}") from None
        return plan

    def to_dict(self) -> dict[str, Any]:
        return {"kind": "fxnet.plan", "version": 1, "layers": [lp.to_dict() for lp in self.layers]}

    def save(self, path: str | os.PathLike[str]) -> None:
        """Write the plan file atomically (temporary file, then rename)."""
        atomic_write_json(path, self.to_dict())

    # -- derivation ---------------------------------------------------------------
    def replace(self, layer: int | None = None, **values: Any) -> Plan:
        """A new plan with ``values`` changed on one layer (or all: ``layer=None``)."""
        if layer is not None and (not isinstance(layer, int) or not -len(self.layers) <= layer < len(self.layers)):
            raise ValueError(f"layer must be None or an index below {len(self.layers)}, not {layer!r}")
        for k, v in values.items():
            check_field(k, v, "")
        idx = range(len(self.layers)) if layer is None else [layer % len(self.layers)]
        layers = list(self.layers)
        for i in idx:
            layers[i] = replace(layers[i], **values)
        return Plan(tuple(layers))

    def check(self, network: Network) -> Plan:
        """Raise unless this plan fits ``network`` (layer count, required keys)."""
        if len(self.layers) != len(network.layers):
            raise ValueError(
                f"layers must have {len(network.layers)} entries (one per network layer), not {len(self.layers)}"
            )
        for i, (lp, L) in enumerate(zip(self.layers, network.layers)):
            if L.has_table:
                for key in ("table_bits", "table_frac"):
                    if getattr(lp, key) is None:
                        raise ValueError(f"layers[{i}].{key} is missing (required for a {L.activation} layer)")
            elif lp.out_frac is None:
                raise ValueError(f"layers[{i}].out_frac is missing (required for a {L.activation} layer)")
        return self
