"""Float networks from elsewhere: scikit-learn, plain numpy arrays, an ``.npz`` file.

scikit-learn ``MLPClassifier``
    Hidden activations ``logistic`` (-> ``sigmoid``), ``tanh``, ``relu`` and
    ``identity``. A binary classifier has one logistic output, the probability
    of ``classes_[1]``: it becomes one ``sigmoid`` output, and
    ``Network.predict`` equals ``predict_proba[:, 1]``. A multi-class classifier
    ends in a softmax, which the contract does not have; it is not needed for
    the decision (softmax is monotonic, so the argmax is unchanged): the last
    layer is imported as ``identity`` (its outputs are the logits), the argmax
    decision equals ``predict``, and a softmax of ``Network.predict`` equals
    ``predict_proba``. Multi-label classifiers are refused.

Input scale
    Say what the model was trained on with ``trained_on``:

    * ``"pow2"``: ``code / 2**bits`` -- the contract's default scale, nothing changes;
    * ``"full"``: ``code / (2**bits - 1)`` (e.g. ``code / 255``): the network gets
      ``input.scale = "full"``, or with ``fold=True`` a ``pow2`` network whose
      first-layer weights are multiplied by ``2**bits / (2**bits - 1)`` in float64
      (what the kernel does itself for a ``full`` network);
    * ``"codes"``: raw codes: first-layer weights are multiplied by ``2**bits``
      (exact) and the network uses ``pow2``.

Plain arrays (:func:`from_arrays`) and ``.npz`` files (:func:`load_npz`)
    Weights are ``n_out x n_in`` (the contract's layout; ``layout="in_out"`` takes
    the transposed layout of scikit-learn, Keras and most frameworks). The
    ``.npz`` keys, for layers ``l = 1..L``: ``weights_l`` (n_out x n_in float),
    ``bias_l`` (n_out), ``activation_l`` (a string: sigmoid, tanh, relu,
    identity); optional ``input_bits`` (int), ``input_scale`` (``pow2`` or
    ``full``), ``input_names`` and ``classes`` (string arrays), ``threshold``
    (float). Strings are saved by numpy without pickle, so
    ``np.savez(path, weights_1=W1, bias_1=b1, activation_1="sigmoid", ...)``
    from any framework's arrays writes a file :func:`load_npz` reads.

Examples
--------
>>> net = from_arrays([np.ones((1, 3))], [np.zeros(1)], ["sigmoid"])
>>> net.shape
(3, 1)
"""

from __future__ import annotations

import io
import os
import re
from collections.abc import Sequence
from typing import Any

import numpy as np

from .fileio import FileFormatError, atomic_write_bytes, load_npz_arrays
from .network import ACTIVATIONS, Network

__all__ = ["from_sklearn", "from_arrays", "load_npz", "save_npz", "TRAINED_ON"]

#: input scalings a model can have been trained on
TRAINED_ON = ("pow2", "full", "codes")
_SK_ACT = {"logistic": "sigmoid", "tanh": "tanh", "relu": "relu", "identity": "identity"}
_NPZ_OPTIONAL = ("input_bits", "input_scale", "input_names", "classes", "threshold")
_NPZ_LAYER = re.compile(r"^(weights|bias|activation)_([1-9][0-9]*)$")


def _scale_first(weights: list[np.ndarray], trained_on: str, fold: bool, bits: int) -> tuple[list[np.ndarray], str]:
    if trained_on not in TRAINED_ON:
        raise ValueError(f"trained_on must be one of {', '.join(TRAINED_ON)}, not {trained_on!r}")
    if not isinstance(fold, bool):
        raise TypeError(f"fold must be True or False, not {fold!r}")
    weights = list(weights)
    if trained_on == "pow2":
        return weights, "pow2"
    if trained_on == "codes":
        weights[0] = weights[0] * float(2**bits)
        return weights, "pow2"
    if not fold:
        return weights, "full"
    weights[0] = weights[0] * (2.0**bits / (2.0**bits - 1))
    return weights, "pow2"


def from_arrays(
    weights: Sequence[Any],
    biases: Sequence[Any],
    activations: Sequence[str],
    *,
    layout: str = "out_in",
    trained_on: str = "pow2",
    fold: bool = False,
    input_bits: int = 8,
    input_names: Sequence[str] | None = None,
    classes: Sequence[str] | None = None,
    threshold: float = 0.5,
) -> Network:
    """A network from per-layer weight matrices, bias vectors and activation names.

    Parameters
    ----------
    weights : sequence of array_like
        One matrix per layer: ``n_out x n_in`` (``layout="out_in"``) or
        ``n_in x n_out`` (``layout="in_out"``).
    biases : sequence of array_like
        One vector per layer.
    activations : sequence of str
        sigmoid, tanh, relu or identity per layer.
    trained_on, fold : str, bool
        Input scale the weights expect (see the module text).
    input_bits, input_names, classes, threshold
        As :meth:`Network.from_layers`.
    """
    if layout not in ("out_in", "in_out"):
        raise ValueError(f"layout must be 'out_in' or 'in_out', not {layout!r}")
    ws, bs, acts = list(weights), list(biases), list(activations)
    if not (len(ws) == len(bs) == len(acts)) or not ws:
        raise ValueError(
            f"weights, biases and activations must have the same non-zero length, "
            f"not {len(ws)}, {len(bs)} and {len(acts)}"
        )
    mats = []
    for i, w in enumerate(ws):
        a = np.asarray(w)
        if a.ndim != 2:
            raise ValueError(f"weights[{i}] must be a 2-D matrix, not shape {a.shape}")
        if a.dtype.kind not in "iuf" or a.dtype == np.bool_:
            raise TypeError(f"weights[{i}] must hold numbers, not {a.dtype}")
        mats.append(np.array(a.T if layout == "in_out" else a, dtype=np.float64))
    if not isinstance(input_bits, int) or isinstance(input_bits, bool) or not 1 <= input_bits <= 16:
        raise ValueError(f"input_bits must be an integer between 1 and 16, not {input_bits!r}")
    mats, scale = _scale_first(mats, trained_on, fold, input_bits)
    return Network.from_layers(
        [(w, np.asarray(b, dtype=np.float64), a) for w, b, a in zip(mats, bs, acts, strict=True)],
        input_names=input_names,
        input_bits=input_bits,
        input_scale=scale,
        classes=classes,
        threshold=threshold,
    )


def from_sklearn(
    model: Any,
    *,
    trained_on: str = "pow2",
    fold: bool = False,
    input_bits: int = 8,
    input_names: Sequence[str] | None = None,
    classes: Sequence[str] | None = None,
) -> Network:
    """A network equal to a fitted scikit-learn ``MLPClassifier``.

    Parameters
    ----------
    model : sklearn.neural_network.MLPClassifier
        Fitted, binary or multi-class (not multi-label).
    trained_on : str
        What the model's inputs were: ``"pow2"`` (code / 2**bits), ``"full"``
        (code / (2**bits - 1), e.g. code / 255) or ``"codes"``.
    fold : bool
        With ``trained_on="full"``: fold the factor into the first layer and
        give a ``pow2`` network instead of a ``full`` one.
    input_bits, input_names
        Input description; names default to red/green/blue for 3 inputs.
    classes : sequence of str, optional
        Class names; default ``str`` of the model's ``classes_``.

    Returns
    -------
    Network
        Binary: one sigmoid output = ``predict_proba[:, 1]``. Multi-class: identity
        outputs (logits) whose softmax is ``predict_proba`` and whose argmax is
        ``predict``.
    """
    for attr in ("coefs_", "intercepts_", "activation", "out_activation_", "classes_"):
        if not hasattr(model, attr):
            raise TypeError(
                f"model must be a fitted scikit-learn MLPClassifier, not {type(model).__name__} (no {attr})"
            )
    hidden = model.activation
    if hidden not in _SK_ACT:
        raise ValueError(f"model.activation must be one of {', '.join(_SK_ACT)}, not {hidden!r}")
    out = model.out_activation_
    n_classes = len(model.classes_)
    if out == "logistic" and n_classes == 2 and model.coefs_[-1].shape[1] == 1:
        out_act = "sigmoid"
    elif out == "softmax":
        out_act = "identity"
    else:
        raise ValueError(
            f"model must be a binary or multi-class MLPClassifier, not one with "
            f"{out!r} output and {model.coefs_[-1].shape[1]} outputs (multi-label is not supported)"
        )
    names = list(classes) if classes is not None else [str(c) for c in model.classes_]
    acts = [_SK_ACT[hidden]] * (len(model.coefs_) - 1) + [out_act]
    return from_arrays(
        [np.asarray(w, dtype=np.float64) for w in model.coefs_],
        [np.asarray(b, dtype=np.float64) for b in model.intercepts_],
        acts,
        layout="in_out",
        trained_on=trained_on,
        fold=fold,
        input_bits=input_bits,
        input_names=input_names,
        classes=names,
    )


def _str(arr: np.ndarray, key: str, name: str) -> str:
    if arr.dtype.kind != "U" or arr.ndim != 0:
        raise FileFormatError(f"{name}: {key} must be a string, not {arr.dtype} of shape {arr.shape}")
    return str(arr)


def load_npz(path: str | os.PathLike[str]) -> Network:
    """Read a network from an ``.npz`` of arrays (keys in the module text; no pickle)."""
    name = os.fspath(path)
    arrays = load_npz_arrays(name)
    layers: dict[int, dict[str, np.ndarray]] = {}
    for key, arr in arrays.items():
        m = _NPZ_LAYER.match(key)
        if m:
            layers.setdefault(int(m.group(2)), {})[m.group(1)] = arr
        elif key not in _NPZ_OPTIONAL:
            raise FileFormatError(
                f"{name}: {key} is not a network array (known: weights_l, bias_l, activation_l, "
                f"{', '.join(_NPZ_OPTIONAL)})"
            )
    if not layers:
        raise FileFormatError(f"{name}: no layers (weights_1, bias_1, activation_1 are missing)")
    if sorted(layers) != list(range(1, len(layers) + 1)):
        missing = min(set(range(1, max(layers) + 1)) - set(layers))
        raise FileFormatError(f"{name}: layer {missing} is missing (weights_{missing})")
    ws, bs, acts = [], [], []
    for li in range(1, len(layers) + 1):
        d = layers[li]
        for part in ("weights", "bias", "activation"):
            if part not in d:
                raise FileFormatError(f"{name}: {part}_{li} is missing")
        act = _str(d["activation"], f"activation_{li}", name)
        if act not in ACTIVATIONS:
            raise FileFormatError(f"{name}: activation_{li} must be one of {', '.join(ACTIVATIONS)}, not {act!r}")
        ws.append(d["weights"])
        bs.append(d["bias"])
        acts.append(act)
    opts: dict[str, Any] = {}
    try:
        if "input_bits" in arrays:
            a = arrays["input_bits"]
            if a.ndim != 0 or a.dtype.kind not in "iu":
                raise FileFormatError(f"{name}: input_bits must be one integer, not {a.dtype} of shape {a.shape}")
            opts["input_bits"] = int(a)
        if "input_scale" in arrays:
            scale = _str(arrays["input_scale"], "input_scale", name)
            if scale not in ("pow2", "full"):
                raise FileFormatError(f"{name}: input_scale must be pow2 or full, not {scale!r}")
            opts["trained_on"] = scale
        for key in ("input_names", "classes"):
            if key in arrays:
                a = arrays[key]
                if a.dtype.kind != "U" or a.ndim != 1:
                    raise FileFormatError(f"{name}: {key} must be a 1-D array of strings, not {a.dtype}")
                opts[key] = [str(v) for v in a]
        if "threshold" in arrays:
            a = arrays["threshold"]
            if a.ndim != 0 or a.dtype.kind not in "iuf":
                raise FileFormatError(f"{name}: threshold must be a number, not {a.dtype}")
            opts["threshold"] = float(a)
        return from_arrays(ws, bs, acts, **opts)
    except FileFormatError:
        raise
    except (TypeError, ValueError) as exc:
        raise type(exc)(f"{name}: {exc}") from None


def save_npz(path: str | os.PathLike[str], network: Network) -> None:
    """Write a network as an ``.npz`` of arrays that :func:`load_npz` reads (atomic)."""
    arrays: dict[str, Any] = {
        "input_bits": np.array(network.input_bits),
        "input_scale": np.array(network.input_scale),
        "input_names": np.array(network.input_names),
        "classes": np.array(network.classes),
        "threshold": np.array(network.threshold),
    }
    for i, L in enumerate(network.layers, start=1):
        arrays[f"weights_{i}"] = np.asarray(L.weights)
        arrays[f"bias_{i}"] = np.asarray(L.bias)
        arrays[f"activation_{i}"] = np.array(L.activation)
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    atomic_write_bytes(path, buf.getvalue())
