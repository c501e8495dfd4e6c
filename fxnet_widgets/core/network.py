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

from .fileio import atomic_write_json, dumps_json, key_text, load_json

__all__ = ["ACTIVATIONS", "Layer", "Network", "as_codes", "activate"]

ACTIVATIONS = ("sigmoid", "tanh", "relu", "identity")
SCALES = ("pow2", "full")
MAX_FAN_IN = 4096
#: rows per block of :meth:`Network.predict` (bounds its temporaries; results do not depend on it)
PREDICT_ROWS = 1 << 16
_NETWORK_KEYS = {"kind", "version", "input", "layers", "output"}
_INPUT_KEYS = {"names", "bits", "scale"}
_LAYER_KEYS = {"weights", "bias", "activation"}
_OUTPUT_KEYS = {"classes", "threshold"}


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


def _is_int(v: Any) -> bool:
    return isinstance(v, (int, np.integer)) and not isinstance(v, (bool, np.bool_))


def _matrix(value: Any, where: str) -> np.ndarray:
    if isinstance(value, np.ndarray):
        arr = value
    else:
        if not isinstance(value, (list, tuple)) or not value:
            raise TypeError(f"{where} must be a non-empty list of rows, not {_short(value)}")
        for i, row in enumerate(value):
            if not isinstance(row, (list, tuple, np.ndarray)) or len(row) == 0:
                raise TypeError(f"{where}[{i}] must be a non-empty list of numbers, not {_short(row)}")
            for j, v in enumerate(row):
                if not isinstance(v, (int, float, np.integer, np.floating)) or isinstance(v, bool):
                    raise TypeError(f"{where}[{i}][{j}] must be a number, not {_short(v)}")
        lengths = {len(r) for r in value}
        if len(lengths) != 1:
            raise ValueError(f"{where} rows must all have the same length, not {sorted(lengths)}")
        for i, row in enumerate(value):
            for j, v in enumerate(row):
                _check_float_range(v, f"{where}[{i}][{j}]")
        arr = np.array(value, dtype=np.float64)
    if arr.ndim != 2 or arr.shape[0] == 0 or arr.shape[1] == 0:
        raise ValueError(f"{where} must be a 2-D array with at least one row and column, not shape {arr.shape}")
    if arr.dtype.kind not in "iuf" or arr.dtype == np.bool_:
        raise TypeError(f"{where} must hold numbers, not {arr.dtype}")
    arr = np.array(arr, dtype=np.float64)
    bad = np.argwhere(~np.isfinite(arr))
    if bad.size:
        i, j = (int(v) for v in bad[0])
        raise ValueError(f"{where}[{i}][{j}] must be finite, not {float(arr[i, j])!r}")
    return arr


def _vector(value: Any, where: str, n: int) -> np.ndarray:
    if isinstance(value, np.ndarray):
        arr = np.array(value, dtype=np.float64) if value.dtype.kind in "iuf" else None
        if arr is None:
            raise TypeError(f"{where} must hold numbers, not {value.dtype}")
    else:
        if not isinstance(value, (list, tuple)):
            raise TypeError(f"{where} must be a list of numbers, not {_short(value)}")
        for j, v in enumerate(value):
            if not isinstance(v, (int, float, np.integer, np.floating)) or isinstance(v, bool):
                raise TypeError(f"{where}[{j}] must be a number, not {_short(v)}")
            _check_float_range(v, f"{where}[{j}]")
        arr = np.array(value, dtype=np.float64)
    if arr.shape != (n,):
        raise ValueError(f"{where} must have {n} entries (one per neuron), not {arr.size}")
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        raise ValueError(f"{where}[{int(bad[0])}] must be finite, not {float(arr[bad[0]])!r}")
    return arr


def _check_float_range(v: Any, where: str) -> None:
    # a JSON integer beyond the float64 range would raise OverflowError in numpy
    if isinstance(v, int) and abs(v) > _FLOAT_MAX:
        raise ValueError(f"{where} must be finite, not {_short(v)}")


_FLOAT_MAX = int(np.finfo(np.float64).max)


def _short(v: Any) -> str:
    r = repr(v)
    return r if len(r) <= 40 else r[:37] + "..."


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=np.float64, copy=True)
    a.setflags(write=False)
    return a


def _validated(doc: Any) -> dict[str, Any]:
    """The checked fields of a network document (layers frozen), or the first problem as an error."""
    if not isinstance(doc, dict):
        raise TypeError(f"network must be a JSON object, not {_short(doc)}")
    unknown = sorted(set(doc) - _NETWORK_KEYS, key=str)
    if unknown:
        raise ValueError(f"{key_text(unknown[0])} is not a network key (known: {', '.join(sorted(_NETWORK_KEYS))})")
    if doc.get("kind", "fxnet.network") != "fxnet.network":
        raise ValueError(f"kind must be 'fxnet.network', not {doc.get('kind')!r}")
    if doc.get("version", 1) != 1 or isinstance(doc.get("version", 1), bool):
        raise ValueError(f"version must be 1, not {doc.get('version')!r}")
    inp = doc.get("input", {})
    if not isinstance(inp, dict):
        raise TypeError(f"input must be an object, not {_short(inp)}")
    unknown = sorted(set(inp) - _INPUT_KEYS, key=str)
    if unknown:
        raise ValueError(f"input.{key_text(unknown[0])} is not an input key (known: bits, names, scale)")
    bits = inp.get("bits", 8)
    if not _is_int(bits):
        raise TypeError(f"input.bits must be an integer, not {_short(bits)}")
    if not 1 <= bits <= 16:
        raise ValueError(f"input.bits must be between 1 and 16, not {bits!r}")
    scale = inp.get("scale", "pow2")
    if scale not in SCALES:
        raise ValueError(f"input.scale must be one of pow2, full, not {_short(scale)}")
    if "layers" not in doc:
        raise ValueError("layers is missing (a list of layer objects)")
    layers_doc = doc["layers"]
    if not isinstance(layers_doc, (list, tuple)) or not layers_doc:
        raise TypeError(f"layers must be a non-empty list, not {_short(layers_doc)}")
    layers: list[Layer] = []
    prev_out = None
    for li, ld in enumerate(layers_doc):
        where = f"layers[{li}]"
        if not isinstance(ld, dict):
            raise TypeError(f"{where} must be an object, not {_short(ld)}")
        unknown = sorted(set(ld) - _LAYER_KEYS, key=str)
        if unknown:
            raise ValueError(
                f"{where}.{key_text(unknown[0])} is not a layer key (known: activation, bias, weights)"
            )
        for key in ("weights", "bias", "activation"):
            if key not in ld:
                raise ValueError(f"{where}.{key} is missing")
        act = ld["activation"]
        if act not in ACTIVATIONS:
            raise ValueError(f"{where}.activation must be one of {', '.join(ACTIVATIONS)}, not {_short(act)}")
        w = _matrix(ld["weights"], f"{where}.weights")
        if w.shape[1] > MAX_FAN_IN:
            raise ValueError(f"{where}.weights fan-in must be at most {MAX_FAN_IN}, not {w.shape[1]}")
        if prev_out is not None and w.shape[1] != prev_out:
            raise ValueError(
                f"{where}.weights must have {prev_out} columns (the outputs of layers[{li - 1}]), not {w.shape[1]}"
            )
        b = _vector(ld["bias"], f"{where}.bias", w.shape[0])
        layers.append(Layer(_frozen(w), _frozen(b), act))
        prev_out = w.shape[0]
    n_in = layers[0].n_in
    names = inp.get("names")
    if names is None:
        names = ["red", "green", "blue"] if n_in == 3 else [f"x{i}" for i in range(n_in)]
    if not isinstance(names, (list, tuple)) or not all(isinstance(n, str) for n in names):
        raise TypeError(f"input.names must be a list of strings, not {_short(names)}")
    if len(names) != n_in:
        raise ValueError(
            f"input.names must have {n_in} entries (the columns of layers[0].weights), not {len(names)}"
        )
    out = doc.get("output", {})
    if not isinstance(out, dict):
        raise TypeError(f"output must be an object, not {_short(out)}")
    unknown = sorted(set(out) - _OUTPUT_KEYS, key=str)
    if unknown:
        raise ValueError(f"output.{key_text(unknown[0])} is not an output key (known: classes, threshold)")
    n_out = layers[-1].n_out
    classes = out.get("classes")
    if classes is None:
        classes = ["other", "target"] if n_out == 1 else [f"class{i}" for i in range(n_out)]
    if not isinstance(classes, (list, tuple)) or not all(isinstance(c, str) for c in classes):
        raise TypeError(f"output.classes must be a list of strings, not {_short(classes)}")
    want = 2 if n_out == 1 else n_out
    if len(classes) != want:
        raise ValueError(f"output.classes must have {want} names for {n_out} output(s), not {len(classes)}")
    thr = out.get("threshold", 0.5)
    if not isinstance(thr, (int, float)) or isinstance(thr, bool):
        raise TypeError(f"output.threshold must be a number, not {_short(thr)}")
    _check_float_range(thr, "output.threshold")
    if not np.isfinite(thr):
        raise ValueError(f"output.threshold must be finite, not {thr!r}")
    return {
        "layers": tuple(layers), "input_names": tuple(names), "input_bits": int(bits), "input_scale": scale,
        "classes": tuple(classes), "threshold": float(thr),
    }  # fmt: skip


@dataclass(frozen=True, eq=False)
class Layer:
    """One fully connected layer: ``f(W @ h + b)``."""

    weights: np.ndarray
    bias: np.ndarray
    activation: str

    def __post_init__(self) -> None:
        # validated and frozen however it is built (the constructor included): a layer is a value
        if not isinstance(self.activation, str) or self.activation not in ACTIVATIONS:
            raise ValueError(f"activation must be one of {', '.join(ACTIVATIONS)}, not {_short(self.activation)}")
        w = _matrix(self.weights, "weights")
        if w.shape[1] > MAX_FAN_IN:
            raise ValueError(f"weights fan-in must be at most {MAX_FAN_IN}, not {w.shape[1]}")
        b = _vector(self.bias, "bias", w.shape[0])
        object.__setattr__(self, "weights", _frozen(w))
        object.__setattr__(self, "bias", _frozen(b))

    def __eq__(self, other: object) -> bool:
        return (
            isinstance(other, Layer)
            and other.activation == self.activation
            and other.weights.shape == self.weights.shape
            and bool(np.array_equal(other.weights, self.weights))
            and bool(np.array_equal(other.bias, self.bias))
        )

    def __hash__(self) -> int:
        return hash((self.activation, self.weights.shape, self.weights.tobytes(), self.bias.tobytes()))

    @property
    def n_in(self) -> int:
        return int(self.weights.shape[1])

    @property
    def n_out(self) -> int:
        return int(self.weights.shape[0])


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
            raise TypeError(f"layers must be a non-empty sequence of layers, not {_short(layers)}")
        raw = [
            {"weights": L.weights, "bias": L.bias, "activation": L.activation} if isinstance(L, Layer) else L
            for L in layers
        ]
        names = self.input_names
        classes = self.classes
        doc: dict[str, Any] = {
            "input": {"bits": self.input_bits, "scale": self.input_scale},
            "layers": raw,
            "output": {"threshold": self.threshold},
        }
        if names is not None:
            doc["input"]["names"] = list(names) if isinstance(names, (list, tuple)) else names
        if classes is not None:
            doc["output"]["classes"] = list(classes) if isinstance(classes, (list, tuple)) else classes
        checked = _validated(doc)
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
        raw = []
        for item in layers:
            if isinstance(item, dict):
                raw.append(item)
            elif isinstance(item, Layer):
                raw.append({"weights": item.weights, "bias": item.bias, "activation": item.activation})
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
        checked = _validated(doc)
        return cls(checked["layers"], checked["input_names"], checked["input_bits"], checked["input_scale"],
                   checked["classes"], checked["threshold"])  # fmt: skip


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
        doc = self.to_dict()
        doc["layers"] = [
            {"weights": np.asarray(w).tolist(), "bias": np.asarray(b).tolist(), "activation": a}
            for (w, b, a) in ((L.weights, L.bias, L.activation) if isinstance(L, Layer) else L for L in layers)
        ]
        return Network.from_dict(doc)

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
