"""ONNX in and out: :func:`load_onnx` reads a fully connected ONNX graph, :func:`save_onnx` writes one.

The ``onnx`` package is imported inside the functions, so the core does not need
it until a model is read or written.

Supported graphs (one input, a chain of nodes to one output, opsets 9 to the current one)
    ``Gemm`` (``transA``, ``transB``, ``alpha``, ``beta``), ``MatMul`` followed by an
    optional ``Add`` of a constant bias, ``Sigmoid``, ``Relu``, ``Tanh``,
    ``Identity``, ``Flatten`` / ``Reshape`` that keep an N x n input as it is,
    ``Cast`` to float or double (values are read in float64),
    ``BatchNormalization`` (inference mode) directly after a ``Gemm`` or ``MatMul``
    (folded exactly into that layer: ``s = scale / sqrt(var + eps)``,
    ``W' = s * W``, ``b' = s * (b - mean) + B``), ``Constant`` nodes and a final
    ``Softmax``. The softmax is imported as ``identity`` outputs (the logits), as
    for scikit-learn: softmax is monotonic, so the argmax decision is unchanged,
    and a softmax of ``Network.predict`` equals the model's output. ``transA=1``
    is accepted on the graph input only: the input is then n_in x N (batch on axis 1).
    Initializers may be raw data or external data files in the model's directory.

Leading input scaling
    ``Div``, ``Mul``, ``Sub`` or ``Add`` by constants (scalars or one value per
    input) before the first layer form an affine map ``x' = a * x + c`` of the
    model's input ``x``; it is folded into layer 1 in float64:
    ``W1' = W1 * a`` (per column) and ``b1' = b1 + W1 @ c``.
    ``input_scale`` then says what ``x`` itself is, as ``trained_on`` of
    :func:`~fxnet_widgets.core.imports.from_arrays`: ``"pow2"`` (code / 2**bits,
    the default), ``"full"`` (code / (2**bits - 1)) or ``"codes"`` (raw codes).
    A model that takes codes and divides by 255 itself: ``input_scale="codes"``.

Refused, with one line naming the node, its op type and why
    Convolutions and every other op, a batch norm that does not follow a layer,
    a second input, dynamic dimensions other than the batch axis, branches.

:func:`save_onnx` writes the float network (opset 13, float32 by default): one input
``input`` of shape ``[N, n_in]`` holding the real-valued inputs
(``codes * Network.input_factor()``, what :meth:`Network.forward` takes), one
``Gemm`` and one activation node per layer, output ``output`` (the last layer's
activations). The input names, classes and threshold are kept in the model's
metadata (``fxnet.input_names`` and ``fxnet.classes`` as JSON lists, ``fxnet.threshold``) and read
back by :func:`load_onnx`.
"""

from __future__ import annotations

import os
from typing import Any

import numpy as np

from .fileio import FileFormatError, atomic_write_bytes, dumps_json, first_line, loads_json
from .imports import TRAINED_ON, from_arrays
from .network import Network

__all__ = ["load_onnx", "save_onnx", "ONNX_OPS"]

#: op types :func:`load_onnx` reads
ONNX_OPS = (
    "Gemm", "MatMul", "Add", "Sub", "Mul", "Div", "Sigmoid", "Relu", "Tanh", "Identity",
    "Flatten", "Reshape", "Cast", "BatchNormalization", "Softmax", "Constant",
)
_ACT = {"Sigmoid": "sigmoid", "Relu": "relu", "Tanh": "tanh"}
_OP_ACT = {"sigmoid": "Sigmoid", "relu": "Relu", "tanh": "Tanh", "identity": "Identity"}
_MIN_OPSET = 9
_FLOAT_TYPES = (1, 11)  # TensorProto.FLOAT, TensorProto.DOUBLE


def _read(path_or_model: Any) -> tuple[Any, str]:
    import onnx

    if isinstance(path_or_model, onnx.ModelProto):
        return path_or_model, "model"
    if not isinstance(path_or_model, (str, os.PathLike)):
        raise TypeError(f"model must be an ONNX file name or onnx.ModelProto, not {type(path_or_model).__name__}")
    name = os.fspath(path_or_model)
    if not os.path.isfile(name):
        raise FileFormatError(f"{name}: no such file")
    try:
        model = onnx.load(name, load_external_data=True)
    except Exception as exc:  # protobuf DecodeError, missing external file, ...
        raise FileFormatError(f"{name}: is not a readable ONNX model ({first_line(exc)})") from None
    return model, name


class _Chain:
    """The graph walked node by node: input scaling, finished layers, one pending linear map."""

    def __init__(self, name: str, n_in: int, transposed: bool) -> None:
        self.name, self.width, self.transposed = name, n_in, transposed
        self.a = np.ones(n_in)
        self.c = np.zeros(n_in)
        self.layers: list[tuple[np.ndarray, np.ndarray, str]] = []
        self.lin: tuple[np.ndarray, np.ndarray] | None = None
        self.softmax = False

    def refuse(self, node: Any, index: int, why: str) -> FileFormatError:
        label = node.name or f"#{index}"
        return FileFormatError(f"{self.name}: node {label!r} ({node.op_type}) is not supported: {why}")

    def vector(self, value: np.ndarray, n: int, node: Any, index: int, what: str) -> np.ndarray:
        v = np.asarray(value, dtype=np.float64)
        if v.size == 1:
            return np.full(n, float(v.ravel()[0]))
        if v.size != n or (v.ndim > 1 and any(d != 1 for d in v.shape[:-1])):
            raise self.refuse(node, index, f"{what} must have 1 or {n} values along the features, not shape {v.shape}")
        return v.reshape(n)

    def start_layer(self, w: np.ndarray, b: np.ndarray, node: Any, index: int) -> None:
        if self.lin is not None:
            raise self.refuse(node, index, "two linear maps in a row (an activation must come between them)")
        if w.shape[1] != self.width:
            raise self.refuse(node, index, f"the weights take {w.shape[1]} inputs, but the tensor has {self.width}")
        if not self.layers:  # fold the leading input scaling x' = a * x + c
            b = b + w @ self.c
            w = w * self.a[None, :]
        self.lin = (w, b)
        self.width = w.shape[0]

    def finish(self, act: str) -> None:
        assert self.lin is not None
        self.layers.append((self.lin[0], self.lin[1], act))
        self.lin = None


def _attrs(node: Any) -> dict[str, Any]:
    import onnx

    return {a.name: onnx.helper.get_attribute_value(a) for a in node.attribute}


def _step(ch: _Chain, node: Any, index: int, consts: dict[str, np.ndarray], cur: str) -> None:
    op, at = node.op_type, _attrs(node)
    ins = [i for i in node.input if i]
    data = [i for i in ins if i not in consts]
    if data != [cur]:
        raise ch.refuse(node, index, f"it must take the chain's tensor {cur!r} and constants, not inputs {ins}")
    if ch.softmax and op not in ("Identity", "Cast"):
        raise ch.refuse(node, index, "nothing may follow the final Softmax")
    if ch.transposed and op not in ("Gemm", "Mul", "Div", "Identity") and not (op in ("Add", "Sub") and not ch.layers):
        raise ch.refuse(node, index, "an n_in x N input must go straight into Gemm with transA=1")
    if op == "Gemm":
        if ins[0] != cur:
            raise ch.refuse(node, index, "the data must be input A (weights in B)")
        if at.get("transA", 0) and not (ch.transposed and not ch.layers and ch.lin is None):
            raise ch.refuse(node, index, "transA=1 is accepted only on the graph input (n_in x N)")
        if ch.transposed and not at.get("transA", 0):
            raise ch.refuse(node, index, "an n_in x N input needs transA=1")
        bm = np.asarray(consts[ins[1]], dtype=np.float64)
        if bm.ndim != 2:
            raise ch.refuse(node, index, f"B must be a 2-D matrix, not shape {bm.shape}")
        w = float(at.get("alpha", 1.0)) * (bm if at.get("transB", 0) else bm.T)
        bias = np.zeros(w.shape[0])
        if len(ins) > 2:
            bias = float(at.get("beta", 1.0)) * ch.vector(consts[ins[2]], w.shape[0], node, index, "C")
        ch.transposed = False
        ch.start_layer(w, bias, node, index)
    elif op == "MatMul":
        if ins[0] != cur:
            raise ch.refuse(node, index, "the data must be the first input (weights second)")
        bm = np.asarray(consts[ins[1]], dtype=np.float64)
        if bm.ndim != 2:
            raise ch.refuse(node, index, f"the weights must be a 2-D matrix, not shape {bm.shape}")
        ch.start_layer(bm.T.copy(), np.zeros(bm.shape[1]), node, index)
    elif op in ("Add", "Sub", "Mul", "Div"):
        other = consts[ins[1] if ins[0] == cur else ins[0]]
        if ch.transposed and np.asarray(other).size != 1:
            raise ch.refuse(node, index, "an n_in x N input can be scaled by scalars only")
        v = ch.vector(other, ch.width, node, index, "the constant")
        if ch.lin is not None and (op == "Add" or op == "Sub" and ins[0] == cur):
            w, b = ch.lin
            ch.lin = (w, b + (v if op == "Add" else -v))
        elif ch.layers or ch.lin is not None:
            raise ch.refuse(node, index, "Div/Mul/Sub by constants are supported before the first layer only "
                            "(input scaling) and Add/Sub of a bias after MatMul or Gemm")
        elif op == "Div" and ins[0] != cur:
            raise ch.refuse(node, index, "a constant divided by the input is not an input scaling")
        elif op == "Sub" and ins[0] != cur:
            ch.a, ch.c = -ch.a, v - ch.c
        else:
            if op == "Div" and np.any(v == 0):
                raise ch.refuse(node, index, "division by zero")
            m = {"Mul": v, "Div": 1.0 / v}.get(op, np.ones(ch.width))
            ch.a, ch.c = ch.a * m, ch.c * m + {"Add": v, "Sub": -v}.get(op, 0.0)
    elif op in _ACT or op == "Identity":
        if ch.lin is not None:
            ch.finish(_ACT.get(op, "identity"))
        elif op != "Identity":
            raise ch.refuse(node, index, "an activation must follow a Gemm or MatMul")
    elif op == "BatchNormalization":
        if ch.lin is None:
            raise ch.refuse(node, index, "batch norm can be folded only directly after a Gemm or MatMul")
        if at.get("training_mode", 0) or len([o for o in node.output if o]) > 1:
            raise ch.refuse(node, index, "batch norm in training mode")
        n = ch.width
        scale, beta, mean, var = (ch.vector(consts[i], n, node, index, "a batch norm parameter") for i in ins[1:5])
        s = scale / np.sqrt(var + float(at.get("epsilon", 1e-5)))
        w, b = ch.lin
        ch.lin = (w * s[:, None], s * (b - mean) + beta)
    elif op == "Softmax":
        if at.get("axis", 1) not in (1, -1):
            raise ch.refuse(node, index, f"softmax over axis {at['axis']} (only the features, axis 1)")
        if ch.lin is not None:
            ch.finish("identity")
        elif not ch.layers:
            raise ch.refuse(node, index, "a softmax must follow a layer")
        ch.softmax = True
    elif op == "Cast":
        if at.get("to") not in _FLOAT_TYPES:
            raise ch.refuse(node, index, f"a cast to ONNX type {at.get('to')} (only float and double keep the values)")
    elif op == "Flatten":
        if at.get("axis", 1) not in (1, -1):
            raise ch.refuse(node, index, f"flatten at axis {at['axis']} changes the N x n tensor")
    elif op == "Reshape":
        shape = [int(d) for d in np.asarray(consts[ins[1]]).ravel()]
        keeps = shape[:1] in ([-1], [0]) and shape[1:] == [ch.width] or shape == [0, -1]
        if len(shape) != 2 or not keeps:
            raise ch.refuse(node, index, f"reshape to {shape} changes the N x {ch.width} tensor")
    else:
        why = "convolutions are not fully connected layers" if op.startswith("Conv") else "not a fully connected op"
        raise ch.refuse(node, index, f"{why} (supported: {', '.join(ONNX_OPS)})")


def _input_shape(name: str, vi: Any) -> list[int | None]:
    t = vi.type.tensor_type
    if not vi.type.HasField("tensor_type") or t.elem_type not in _FLOAT_TYPES:
        raise FileFormatError(f"{name}: input {vi.name!r} must be a float or double tensor")
    return [d.dim_value if d.HasField("dim_value") else None for d in t.shape.dim]


def _meta(meta: dict[str, str], opts: dict[str, Any]) -> None:
    if "fxnet.input_names" in meta:
        opts["input_names"] = loads_json(meta["fxnet.input_names"], "metadata fxnet.input_names")
    if "fxnet.classes" in meta:
        opts["classes"] = loads_json(meta["fxnet.classes"], "metadata fxnet.classes")
    if "fxnet.threshold" in meta:
        opts["threshold"] = float(meta["fxnet.threshold"])


def _pick_output(name: str, g: Any, output: str | None) -> str:
    names = [o.name for o in g.output]
    if output is not None:
        if output not in names:
            known = ", ".join(names)
            raise FileFormatError(f"{name}: output must be one of the graph's outputs ({known}), not {output!r}")
        return output
    floats = [o.name for o in g.output if o.type.tensor_type.elem_type in _FLOAT_TYPES]
    if len(names) == 1 or len(floats) == 1:
        return names[0] if len(names) == 1 else floats[0]
    raise FileFormatError(f"{name}: the graph has {len(names)} outputs ({', '.join(names)}); say which with output=")


def load_onnx(
    path_or_model: Any, *, input_bits: int = 8, input_scale: str = "pow2", output: str | None = None
) -> Network:
    """A network equal to a fully connected ONNX model (see the module text for what is read).

    Parameters
    ----------
    path_or_model : str, os.PathLike or onnx.ModelProto
        ``.onnx`` file (external data next to it) or a loaded model.
    input_bits : int
        Bits of the input codes.
    input_scale : str
        What the model's input is: ``"pow2"`` (code / 2**bits), ``"full"``
        (code / (2**bits - 1)) or ``"codes"``.
    output : str, optional
        Graph output to read when there are several (default: the only one, or the
        only float one, e.g. the probabilities beside a label); only the nodes it
        depends on are read.

    Returns
    -------
    Network
        ``predict(codes)`` equals the model run on the scaled codes (identity
        logits in place of a final softmax).
    """
    import onnx
    from onnx import numpy_helper

    if input_scale not in TRAINED_ON:
        raise ValueError(f"input_scale must be one of {', '.join(TRAINED_ON)}, not {input_scale!r}")
    model, name = _read(path_or_model)
    g = model.graph
    opset = next((o.version for o in model.opset_import if o.domain in ("", "ai.onnx")), None)
    newest = onnx.defs.onnx_opset_version()
    if opset is None or not _MIN_OPSET <= opset <= newest:
        raise FileFormatError(f"{name}: the ONNX opset must be {_MIN_OPSET} to {newest}, not {opset!r}")
    base = os.path.dirname(os.path.abspath(name)) if name != "model" else None
    try:
        consts = {t.name: numpy_helper.to_array(t, base) if base else numpy_helper.to_array(t) for t in g.initializer}
    except Exception as exc:
        raise FileFormatError(f"{name}: an initializer cannot be read ({first_line(exc)})") from None
    inputs = [vi for vi in g.input if vi.name not in consts]
    if len(inputs) != 1:
        names = ", ".join(i.name for i in inputs)
        raise FileFormatError(f"{name}: the graph must have one input, not {len(inputs)} ({names})")
    out_name = _pick_output(name, g, output)
    needed, wanted = [], {out_name}
    for node in reversed(g.node):  # the nodes the chosen output depends on (others, e.g. a label, are left out)
        if wanted.intersection(node.output):
            needed.append(node)
            wanted.update(i for i in node.input if i)
    needed.reverse()
    shape = _input_shape(name, inputs[0])
    first = next((n for n in needed if n.op_type != "Constant"), None)
    transposed = first is not None and first.op_type == "Gemm" and bool(_attrs(first).get("transA", 0))
    feat = 0 if transposed else 1
    if len(shape) != 2 or shape[feat] is None or not 1 <= (shape[feat] or 0) <= 4096:
        raise FileFormatError(
            f"{name}: input {inputs[0].name!r} must be N x n_in (a fixed n_in of 1 to 4096), not {shape}"
        )
    ch = _Chain(name, int(shape[feat] or 0), transposed)
    cur = inputs[0].name
    for index, node in enumerate(needed):
        if node.domain not in ("", "ai.onnx"):
            raise ch.refuse(node, index, f"op domain {node.domain!r} is not the standard one")
        if node.op_type == "Constant":
            at = _attrs(node)
            if "value" not in at:
                raise ch.refuse(node, index, "only tensor constants (value) are read")
            consts[node.output[0]] = numpy_helper.to_array(at["value"])
            continue
        try:
            _step(ch, node, index, consts, cur)
        except (KeyError, IndexError, TypeError, ValueError) as exc:
            if isinstance(exc, FileFormatError):
                raise
            raise ch.refuse(node, index, f"malformed ({first_line(exc)})") from None
        cur = node.output[0]
    if ch.lin is not None:
        ch.finish("identity")
    if cur != out_name or not ch.layers:
        raise FileFormatError(f"{name}: the graph output {out_name!r} is not the end of a chain of layers")
    meta = {p.key: p.value for p in model.metadata_props}
    opts: dict[str, Any] = {}
    try:
        _meta(meta, opts)
    except (ValueError, TypeError):
        raise FileFormatError(f"{name}: the fxnet metadata is not readable") from None
    try:
        return from_arrays(
            [w for w, _, _ in ch.layers], [b for _, b, _ in ch.layers], [a for _, _, a in ch.layers],
            trained_on=input_scale, input_bits=input_bits, **opts,
        )
    except (TypeError, ValueError) as exc:
        raise FileFormatError(f"{name}: {first_line(exc)}") from None


def to_onnx(network: Network, *, dtype: str = "float32") -> Any:
    """The float network as an ``onnx.ModelProto`` (see the module text); ``dtype`` float32 or float64."""
    import onnx
    from onnx import TensorProto, helper, numpy_helper

    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if dtype not in ("float32", "float64"):
        raise ValueError(f"dtype must be 'float32' or 'float64', not {dtype!r}")
    elem = TensorProto.FLOAT if dtype == "float32" else TensorProto.DOUBLE
    nodes, inits, cur = [], [], "input"
    for i, L in enumerate(network.layers, start=1):
        inits += [
            numpy_helper.from_array(np.asarray(L.weights, dtype=dtype), f"layer{i}_weights"),
            numpy_helper.from_array(np.asarray(L.bias, dtype=dtype), f"layer{i}_bias"),
        ]
        nodes.append(helper.make_node("Gemm", [cur, f"layer{i}_weights", f"layer{i}_bias"], [f"layer{i}_sum"],
                                      name=f"layer{i}_gemm", transB=1))
        last = i == len(network.layers)
        cur = "output" if last else f"layer{i}_out"
        nodes.append(helper.make_node(_OP_ACT[L.activation], [f"layer{i}_sum"], [cur], name=f"layer{i}_{L.activation}"))
    graph = helper.make_graph(
        nodes, "fxnet_network",
        [helper.make_tensor_value_info("input", elem, ["N", network.n_in])],
        [helper.make_tensor_value_info("output", elem, ["N", network.n_out])],
        initializer=inits,
        doc_string=f"inputs {', '.join(network.input_names)} = codes * {network.input_factor()!r}",
    )
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid("", 13)], producer_name="fxnet-widgets")
    model.ir_version = 7
    for key, value in (
        ("fxnet.input_names", dumps_json(list(network.input_names))),
        ("fxnet.classes", dumps_json(list(network.classes))),
        ("fxnet.threshold", repr(float(network.threshold))),
        ("fxnet.input_bits", str(network.input_bits)),
        ("fxnet.input_scale", network.input_scale),
    ):
        model.metadata_props.add(key=key, value=value)
    onnx.checker.check_model(model, full_check=True)
    return model


def save_onnx(network: Network, path: str | os.PathLike[str], *, dtype: str = "float32") -> None:
    """Write the float network as a standard ONNX model (atomic; checked by ``onnx.checker``).

    Parameters
    ----------
    network : Network
    path : str or os.PathLike
        ``.onnx`` file to write.
    dtype : str
        Tensor type: ``"float32"`` (the usual one) or ``"float64"``.
    """
    atomic_write_bytes(path, to_onnx(network, dtype=dtype).SerializeToString())
