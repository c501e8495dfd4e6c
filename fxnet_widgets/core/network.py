"""The float network: the reference that every fixed-point plan is judged against.

A :class:`Network` is an immutable value: fully connected layers with float64
weights, biases and an activation each, the input format (unsigned codes of
``bits`` bits, scaled by ``2**bits`` or by ``2**bits - 1``) and the output
classes. It loads, validates and saves the ``fxnet.network`` JSON file of
``semantics.md`` and computes the float64 forward pass.

Examples
--------
>>> net = Network.from_layers([([[1.0, -1.0, 0.5]], [0.0], "sigmoid")])
>>> net.predict(np.array([[128, 0, 0]])).round(6).tolist()
[[0.622459]]
>>> net.decide(net.predict(np.array([[128, 0, 0]]))).tolist()
[1]
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .fileio import atomic_write_json, dumps_json, load_json
from .network_doc import ACTIVATIONS, Layer, validated

__all__ = ["ACTIVATIONS", "Layer", "Network", "as_codes", "activate"]

#: rows per block of :meth:`Network.predict` (bounds its temporaries; results do not depend on it)
PREDICT_ROWS = 1 << 16


def activate(x: np.ndarray, activation: str) -> np.ndarray:
    """Apply an activation in float64 (sigmoid written to avoid overflow)."""
    x = np.asarray(x, dtype=np.float64)
    if activation == "sigmoid":
        e = np.exp(-np.abs(x))
        return np.where(x >= 0, 1.0 / (1.0 + e), e / (1.0 + e))
    if activation == "tanh":
        return np.tanh(x)
    if activation == "relu":
        return np.maximum(x, 0.0)
    if activation == "identity":
        return x
    raise ValueError(f"activation must be one of {', '.join(ACTIVATIONS)}, not {activation!r}")


@dataclass(frozen=True, eq=False)
class Network:
    """A validated float network (immutable; equal by value).

    Every way of building one (the constructor, :meth:`from_layers`, :meth:`from_dict`,
    :meth:`load`, :meth:`replace_layers`) validates it and fingerprints its whole content
    (``digest``), which equality, hashing and every cache key use.
    """

    layers: tuple[Layer, ...]
    input_names: tuple[str, ...]
    input_bits: int = 8
    input_scale: str = "pow2"
    classes: tuple[str, ...] = ("other", "target")
    threshold: float = 0.5
    digest: str = field(default="", compare=False, init=False)

    def __post_init__(self) -> None:
        layers = self.layers
        if isinstance(layers, (str, bytes)) or not isinstance(layers, Iterable):
            raise TypeError(f"layers must be a non-empty sequence of layers, not {layers!r:.40}")
        doc: dict[str, Any] = {
            "input": {"bits": self.input_bits, "scale": self.input_scale},
            "layers": list(layers),  # Layer values pass as they are; (w, b, act) dicts are checked
            "output": {"threshold": self.threshold},
        }
        for key, part, value in (("names", "input", self.input_names), ("classes", "output", self.classes)):
            if value is not None:
                doc[part][key] = list(value) if isinstance(value, (list, tuple)) else value
        checked = validated(doc)
        for name, value in checked.items():
            object.__setattr__(self, name, value)
        digest = hashlib.blake2b(dumps_json(self.to_dict()).encode(), digest_size=16).hexdigest()
        object.__setattr__(self, "digest", digest)

    # -- construction -------------------------------------------------------------
    @classmethod
    def from_layers(
        cls,
        layers: Iterable[Any],
        *,
        input_names: Sequence[str] | None = None,
        input_bits: int = 8,
        input_scale: str = "pow2",
        classes: Sequence[str] | None = None,
        threshold: float = 0.5,
    ) -> Network:
        """Build a network from ``(weights, bias, activation)`` triples or dicts.

        >>> Network.from_layers([(np.eye(3), np.zeros(3), "relu"),
        ...                      ([[1, 1, 1]], [0], "sigmoid")]).shape
        (3, 3, 1)
        """
        raw: list[Any] = []
        for item in layers:
            if isinstance(item, dict):
                raw.append(item)
            elif isinstance(item, Layer):
                raw.append(item)  # already checked
            else:
                w, b, act = item
                raw.append({"weights": w, "bias": b, "activation": act})
        doc: dict[str, Any] = {
            "kind": "fxnet.network",
            "version": 1,
            "input": {"bits": input_bits, "scale": input_scale},
            "layers": raw,
            "output": {"threshold": threshold},
        }
        if input_names is not None:
            doc["input"]["names"] = list(input_names)
        if classes is not None:
            doc["output"]["classes"] = list(classes)
        return cls.from_dict(doc)

    @classmethod
    def from_dict(cls, doc: Any) -> Network:
        """Validate a network document (the parsed JSON file)."""
        return cls(**validated(doc))


    @classmethod
    def load(cls, path: str | os.PathLike[str]) -> Network:
        """Read and validate a network file; errors start with the file name."""
        doc = load_json(path)
        try:
            return cls.from_dict(doc)
        except (TypeError, ValueError) as exc:
            raise type(exc)(f"{os.fspath(path)}: {exc}") from None

    def to_dict(self) -> dict[str, Any]:
        """The network file's JSON document."""
        return {
            "kind": "fxnet.network",
            "version": 1,
            "input": {"names": list(self.input_names), "bits": self.input_bits, "scale": self.input_scale},
            "layers": [
                {"weights": L.weights.tolist(), "bias": L.bias.tolist(), "activation": L.activation}
                for L in self.layers
            ],
            "output": {"classes": list(self.classes), "threshold": self.threshold},
        }

    def save(self, path: str | os.PathLike[str]) -> None:
        """Write the network file atomically (temporary file, then rename)."""
        atomic_write_json(path, self.to_dict())

    def replace_layers(self, layers: Sequence[Any]) -> Network:
        """A new network with other layers and the same input/output description."""
        return Network.from_layers(layers, input_names=self.input_names, input_bits=self.input_bits,
                                   input_scale=self.input_scale, classes=self.classes, threshold=self.threshold)

    # -- value semantics ----------------------------------------------------------
    def __eq__(self, other: object) -> bool:
        return isinstance(other, Network) and other.digest == self.digest

    def __hash__(self) -> int:
        return hash(self.digest)

    def __repr__(self) -> str:
        acts = "-".join(L.activation for L in self.layers)
        shape = "-".join(map(str, self.shape))
        return f"<Network {shape} {acts}, inputs {self.input_bits} b {self.input_scale}, digest {self.digest[:8]}>"

    # -- properties ---------------------------------------------------------------
    @property
    def shape(self) -> tuple[int, ...]:
        """``(n_in, n_hidden..., n_out)``."""
        return (self.layers[0].n_in,) + tuple(L.n_out for L in self.layers)

    @property
    def n_in(self) -> int:
        return self.layers[0].n_in

    @property
    def n_out(self) -> int:
        return self.layers[-1].n_out

    def input_factor(self) -> float:
        """Value of one input LSB: ``2**-bits`` (pow2) or ``1/(2**bits-1)`` (full)."""
        if self.input_scale == "pow2":
            return 2.0 ** -self.input_bits
        return 1.0 / (2**self.input_bits - 1)

    # -- forward pass -------------------------------------------------------------
    def predict(self, codes: Any) -> np.ndarray:
        """Float64 outputs for unsigned input codes (N x n_in, or an image).

        Image input (H x W x n_in) gives H x W x n_out. Rows are computed in
        blocks of :data:`PREDICT_ROWS`, so a 4K frame needs memory for its
        outputs and one block of temporaries, not for a dozen full-size ones.
        """
        flat, shape = as_codes(codes, self.input_bits, self.n_in)
        out = np.empty((flat.shape[0], self.n_out), dtype=np.float64)
        factor = self.input_factor()
        for start in range(0, flat.shape[0], PREDICT_ROWS):
            block = flat[start : start + PREDICT_ROWS]
            out[start : start + PREDICT_ROWS] = self.forward(block.astype(np.float64) * factor)[-1]
        return out if shape is None else out.reshape(*shape, self.n_out)

    def forward(self, x: np.ndarray) -> list[np.ndarray]:
        """Every layer's float64 output for real-valued inputs ``x`` (N x n_in)."""
        h = np.asarray(x, dtype=np.float64)
        outs = []
        for L in self.layers:
            h = activate(h @ L.weights.T + L.bias, L.activation)
            outs.append(h)
        return outs

    def decide(self, outputs: np.ndarray) -> np.ndarray:
        """Decisions from float outputs: ``>= threshold`` (one output) or argmax."""
        outputs = np.asarray(outputs)
        if outputs.shape[-1] == 1:
            return (outputs[..., 0] >= self.threshold).astype(np.int64)
        return np.argmax(outputs, axis=-1).astype(np.int64)


def as_codes(codes: Any, bits: int, n_in: int, *, what: str = "codes") -> tuple[np.ndarray, tuple[int, ...] | None]:
    """Validate unsigned input codes; return ``(N x n_in array, image shape or None)``.

    Accepts an N x n_in integer array or an H x W x n_in image. Values outside
    ``[0, 2**bits - 1]`` are an error (never a silent wrap).
    """
    arr = np.asarray(codes)
    if arr.dtype == np.bool_ or arr.dtype.kind not in "iu":
        raise TypeError(f"{what} must be an array of unsigned integer codes, not {arr.dtype}")
    if arr.ndim == 3:
        shape: tuple[int, ...] | None = arr.shape[:2]
        if arr.shape[2] != n_in:
            raise ValueError(f"{what} image must have {n_in} channels, not {arr.shape[2]}")
        flat = arr.reshape(-1, n_in)
    elif arr.ndim == 2:
        shape = None
        if arr.shape[1] != n_in:
            raise ValueError(f"{what} must have {n_in} columns (one per network input), not {arr.shape[1]}")
        flat = arr
    else:
        raise ValueError(f"{what} must be N x {n_in} or H x W x {n_in}, not shape {arr.shape}")
    if flat.size:
        hi = (1 << bits) - 1
        if arr.dtype.kind == "i" or np.iinfo(arr.dtype).max > hi:
            lo_v, hi_v = int(flat.min()), int(flat.max())
            if lo_v < 0 or hi_v > hi:
                bad = lo_v if lo_v < 0 else hi_v
                raise ValueError(f"{what} must be between 0 and {hi} ({bits}-bit unsigned), not {bad}")
    return flat, shape
