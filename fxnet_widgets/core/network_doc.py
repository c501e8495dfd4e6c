"""The network document and its layers: every check of the ``fxnet.network`` format (semantics.md).

:class:`Layer` and :func:`validated` share one layer check (:func:`check_layer`), so a layer is held
to the same limits whether it comes from a file, a dict or its own constructor.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .fileio import key_text

__all__ = ["ACTIVATIONS", "TABLE_ACTIVATIONS", "MAX_FAN_IN", "SCALES", "Layer", "check_layer", "validated"]

ACTIVATIONS = ("sigmoid", "tanh", "relu", "identity")
#: the activations hardware computes with a look-up table (contract step 6; relu/identity use step 7)
TABLE_ACTIVATIONS = ("sigmoid", "tanh")
SCALES = ("pow2", "full")
MAX_FAN_IN = 4096
_NETWORK_KEYS = {"kind", "version", "input", "layers", "output"}
_INPUT_KEYS = {"names", "bits", "scale"}
_LAYER_KEYS = {"weights", "bias", "activation"}
_OUTPUT_KEYS = {"classes", "threshold"}


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


def _check_columns(got: int, n_in: int | None, at: str, source: str) -> None:
    if n_in is not None and got != n_in:
        raise ValueError(f"{at}weights must have {n_in} columns ({source}), not {got}")


def check_layer(
    weights: Any, bias: Any, activation: Any, where: str = "", *, n_in: int | None = None, n_in_source: str = ""
) -> tuple[np.ndarray, np.ndarray]:
    """One layer's weights and bias checked against the contract's limits, as frozen float64 copies.

    Errors name ``where`` (``layers[1]``, or nothing for a bare :class:`Layer`); with ``n_in`` the
    weights must also have that many columns (``n_in_source`` says where the number comes from).
    """
    at = f"{where}." if where else ""
    if activation not in ACTIVATIONS:
        raise ValueError(f"{at}activation must be one of {', '.join(ACTIVATIONS)}, not {_short(activation)}")
    w = _matrix(weights, f"{at}weights")
    if w.shape[1] > MAX_FAN_IN:
        raise ValueError(f"{at}weights fan-in must be at most {MAX_FAN_IN}, not {w.shape[1]}")
    _check_columns(w.shape[1], n_in, at, n_in_source)
    return _frozen(w), _frozen(_vector(bias, f"{at}bias", w.shape[0]))


@dataclass(frozen=True, eq=False)
class Layer:
    """One fully connected layer: ``f(W @ h + b)``."""

    weights: np.ndarray
    bias: np.ndarray
    activation: str

    def __post_init__(self) -> None:
        # validated and frozen however it is built (the constructor included): a layer is a value
        w, b = check_layer(self.weights, self.bias, self.activation)
        object.__setattr__(self, "weights", w)
        object.__setattr__(self, "bias", b)

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
    def has_table(self) -> bool:
        """True for sigmoid and tanh: the layer's activation is a look-up table (contract step 6)."""
        return self.activation in TABLE_ACTIVATIONS

    @property
    def n_in(self) -> int:
        return int(self.weights.shape[1])

    @property
    def n_out(self) -> int:
        return int(self.weights.shape[0])


def validated(doc: Any) -> dict[str, Any]:
    """The checked fields of a network document (layers as frozen :class:`Layer` values), or its first problem.

    Entries of ``layers`` may be layer objects of the file format or :class:`Layer` values (already checked).
    """
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
        source = f"the outputs of layers[{li - 1}]"
        if isinstance(ld, Layer):  # checked when it was made: only its place in the chain is new
            _check_columns(ld.n_in, prev_out, f"{where}.", source)
            layers.append(ld)
            prev_out = ld.n_out
            continue
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
        w, b = check_layer(ld["weights"], ld["bias"], ld["activation"], where, n_in=prev_out, n_in_source=source)
        layers.append(Layer(w, b, ld["activation"]))
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
