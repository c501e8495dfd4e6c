"""ONNX in and out, checked against ONNX Runtime (the outside reference that runs the ONNX file itself).

Models are built here with ``onnx.helper``; ONNX Runtime runs the original model and
``Network.predict`` after :func:`load_onnx` must agree. Double-precision models are
compared to 1e-6 relative (ONNX Runtime computes them in float64 like ``predict``); the
float32 models get an absolute allowance of 1e-6 on top (float32 rounding, ~6e-8 per
operation, common practice).
"""

from pathlib import Path

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.fileio import FileFormatError

onnx = pytest.importorskip("onnx")
ort = pytest.importorskip("onnxruntime")
from onnx import TensorProto, helper, numpy_helper  # noqa: E402

ASSETS = Path(__file__).resolve().parents[2] / "assets"
D, F = TensorProto.DOUBLE, TensorProto.FLOAT
NEWEST = onnx.defs.onnx_opset_version()
RNG = np.random.default_rng(18)


def _model(nodes, inits, n_in, n_out, *, opset=13, elem=D, inputs=None, in_shape=None, check=True):
    dtype = np.float64 if elem == D else np.float32
    graph = helper.make_graph(
        nodes,
        "g",
        inputs or [helper.make_tensor_value_info("x", elem, in_shape or ["N", n_in])],
        [helper.make_tensor_value_info("y", elem, ["N", n_out])],
        initializer=[numpy_helper.from_array(np.asarray(v, dtype=dtype), k) for k, v in inits.items()],
    )
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid("", opset)])
    model.ir_version = 7 if opset < 21 else 10
    if check:
        onnx.checker.check_model(model, full_check=True)
    return model


def _run(model, x):
    src = str(model) if isinstance(model, Path) else model.SerializeToString()
    sess = ort.InferenceSession(src, providers=["CPUExecutionProvider"])
    name = sess.get_inputs()[0].name
    dtype = np.float64 if "double" in sess.get_inputs()[0].type else np.float32
    return sess.run(None, {name: x.astype(dtype)})[0].astype(np.float64)


def _softmax(z):
    e = np.exp(z - z.max(axis=-1, keepdims=True))
    return e / e.sum(axis=-1, keepdims=True)


def _codes(n=300, n_in=3, bits=8):
    return RNG.integers(0, 2**bits, size=(n, n_in))


def _mlp(opset=13, elem=D, trans_b=0):
    w1, b1 = RNG.normal(size=(3, 6)), RNG.normal(size=6)
    w2, b2 = RNG.normal(size=(6, 1)), RNG.normal(size=1)
    nodes = [
        helper.make_node("Gemm", ["x", "W1", "b1"], ["h"], name="dense1", transB=trans_b),
        helper.make_node("Tanh", ["h"], ["t"]),
        helper.make_node("Gemm", ["t", "W2", "b2"], ["z"], transB=trans_b, alpha=0.75, beta=1.5),
        helper.make_node("Sigmoid", ["z"], ["y"]),
    ]
    inits = {"W1": w1.T if trans_b else w1, "b1": b1, "W2": w2.T if trans_b else w2, "b2": b2}
    return _model(nodes, inits, 3, 1, opset=opset, elem=elem)


@pytest.mark.parametrize("opset", [9, 13, NEWEST])
@pytest.mark.parametrize("trans_b", [0, 1])
def test_gemm_chain_matches_onnx_runtime(opset, trans_b):
    model = _mlp(opset, trans_b=trans_b)
    net = fw.load_onnx(model)
    codes = _codes()
    assert net.shape == (3, 6, 1) and [L.activation for L in net.layers] == ["tanh", "sigmoid"]
    np.testing.assert_allclose(net.predict(codes), _run(model, codes / 256.0), rtol=1e-6)


def test_gemm_trans_a_takes_features_by_batch():
    # Gemm(transA=1): the graph input is n_in x N (ONNX operator spec, Gemm: A' = transpose(A))
    w, b = RNG.normal(size=(3, 4)), RNG.normal(size=4)
    nodes = [helper.make_node("Gemm", ["x", "W", "b"], ["h"], transA=1), helper.make_node("Relu", ["h"], ["y"])]
    model = _model(nodes, {"W": w, "b": b}, 3, 4, in_shape=[3, "N"])
    net = fw.load_onnx(model)
    codes = _codes()
    np.testing.assert_allclose(net.predict(codes), _run(model, (codes / 256.0).T), rtol=1e-6)


def test_matmul_add_scaled_input_softmax_head_on_every_scene_pixel():
    # a model taking raw codes: (x - 10) / 255, MatMul + Add, Relu, Gemm, Softmax
    w1, b1, w2, b2 = RNG.normal(size=(3, 8)), RNG.normal(size=8), RNG.normal(size=(8, 3)), RNG.normal(size=3)
    nodes = [
        helper.make_node("Sub", ["x", "off"], ["xc"]),
        helper.make_node("Div", ["xc", "s"], ["xs"]),
        helper.make_node("Flatten", ["xs"], ["xf"], axis=1),
        helper.make_node("MatMul", ["xf", "W1"], ["m"]),
        helper.make_node("Add", ["m", "b1"], ["h"]),
        helper.make_node("Relu", ["h"], ["r"]),
        helper.make_node("Identity", ["r"], ["ri"]),
        helper.make_node("Gemm", ["ri", "W2", "b2"], ["z"]),
        helper.make_node("Softmax", ["z"], ["y"], axis=1),
    ]
    inits = {"off": [10.0, 10.0, 10.0], "s": 255.0, "W1": w1, "b1": b1, "W2": w2, "b2": b2}
    model = _model(nodes, inits, 3, 3)
    net = fw.load_onnx(model, input_scale="codes")
    assert [L.activation for L in net.layers] == ["relu", "identity"]
    codes = fw.read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    ref = _run(model, codes.astype(np.float64))
    z = net.predict(codes)
    np.testing.assert_allclose(_softmax(z), ref, rtol=1e-6)
    # softmax is monotonic: the argmax decision of the logits is the model's argmax
    np.testing.assert_array_equal(net.decide(z), np.argmax(ref, axis=1))


def test_float32_model_on_every_scene_pixel():
    model = _mlp(NEWEST, elem=F)
    net = fw.load_onnx(model, input_scale="full")
    assert net.input_scale == "full"
    codes = fw.read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    np.testing.assert_allclose(net.predict(codes), _run(model, codes / 255.0), rtol=1e-6, atol=1e-6)


def test_batch_norm_after_gemm_is_folded_exactly():
    n = 5
    inits = {
        "W": RNG.normal(size=(n, 3)), "b": RNG.normal(size=n), "sc": RNG.uniform(0.5, 2, n),
        "bb": RNG.normal(size=n), "mu": RNG.normal(size=n), "var": RNG.uniform(0.1, 3, n),
    }
    nodes = [
        helper.make_node("Mul", ["x", "k"], ["xs"]),
        helper.make_node("Gemm", ["xs", "W", "b"], ["h"], transB=1),
        helper.make_node("BatchNormalization", ["h", "sc", "bb", "mu", "var"], ["n"], epsilon=1e-3),
        helper.make_node("Sigmoid", ["n"], ["y"]),
    ]
    inits["k"] = 4.0
    for opset in (9, 13, NEWEST):
        model = _model(nodes, inits, 3, n, opset=opset)
        codes = _codes()
        np.testing.assert_allclose(fw.load_onnx(model).predict(codes), _run(model, codes / 256.0), rtol=1e-6)


def test_external_data_in_the_same_directory(tmp_path):
    model = _mlp()
    path = tmp_path / "m.onnx"
    onnx.save_model(model, path, save_as_external_data=True, all_tensors_to_one_file=True,
                    location="m.weights", size_threshold=0)
    assert (tmp_path / "m.weights").exists()
    codes = _codes()
    np.testing.assert_allclose(fw.load_onnx(path).predict(codes), _run(path, codes / 256.0), rtol=1e-6)


@pytest.mark.parametrize("dtype", ["float32", "float64"])
def test_save_onnx_round_trip_through_onnx_runtime(tmp_path, dtype):
    net = fw.Network.load(ASSETS / "network.json")
    path = tmp_path / "net.onnx"
    fw.save_onnx(net, path, dtype=dtype)
    model = onnx.load(path)
    onnx.checker.check_model(model, full_check=True)
    assert [i.name for i in model.graph.input] == ["input"]
    codes = fw.read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    tol = {"rtol": 1e-6} if dtype == "float64" else {"rtol": 1e-6, "atol": 1e-6}
    np.testing.assert_allclose(_run(model, codes * net.input_factor()), net.predict(codes), **tol)
    back = fw.load_onnx(path, input_scale=net.input_scale)
    assert back.input_names == net.input_names and back.classes == net.classes
    if dtype == "float64":
        assert back == net


def test_sklearn_model_through_skl2onnx():
    skl2onnx = pytest.importorskip("skl2onnx", reason="skl2onnx is not installed")
    from sklearn.neural_network import MLPClassifier

    x = RNG.integers(0, 256, size=(200, 3)) / 256.0
    y = (x[:, 0] > x[:, 1]).astype(int) + (x[:, 2] > 0.5)
    clf = MLPClassifier(hidden_layer_sizes=(6,), max_iter=300, random_state=0).fit(x, y)
    from skl2onnx.common.data_types import DoubleTensorType

    model = skl2onnx.convert_sklearn(clf, initial_types=[("x", DoubleTensorType([None, 3]))],
                                     options={id(clf): {"zipmap": False}})
    # skl2onnx writes a label output (ArgMax, ai.onnx.ml ArrayFeatureExtractor) beside the probabilities:
    # only the float output and the nodes it depends on are read
    net = fw.load_onnx(model)
    codes = _codes()
    z = net.predict(codes)
    np.testing.assert_allclose(_softmax(z), clf.predict_proba(codes / 256.0), rtol=1e-6)
    sess = ort.InferenceSession(model.SerializeToString(), providers=["CPUExecutionProvider"])
    label, proba = sess.run(["label", "probabilities"], {"x": codes / 256.0})
    np.testing.assert_allclose(_softmax(z), proba, rtol=1e-6)
    np.testing.assert_array_equal(clf.classes_[net.decide(z)], label)
    with pytest.raises(FileFormatError, match=r"^model: node '.*' \(ArgMax\) is not supported"):
        fw.load_onnx(model, output="label")


def _refusal(model):
    with pytest.raises(FileFormatError) as info:
        fw.load_onnx(model)
    return str(info.value)


def test_refusals_name_the_node_its_op_and_why(tmp_path):
    conv = _model([helper.make_node("Conv", ["x", "W"], ["y"], name="c1")], {"W": np.ones((1, 3, 1))}, 3, 1,
                  in_shape=["N", 3, 4], check=False)
    assert _refusal(conv) == "model: input 'x' must be N x n_in (a fixed n_in of 1 to 4096), not [None, 3, 4]"
    conv2 = _model([helper.make_node("Conv", ["x", "W"], ["y"], name="c1")], {"W": np.ones((1, 3))}, 3, 1, check=False)
    assert _refusal(conv2).startswith(
        "model: node 'c1' (Conv) is not supported: convolutions are not fully connected layers (supported: Gemm,"
    )
    two = [helper.make_tensor_value_info("x", D, ["N", 3]), helper.make_tensor_value_info("x2", D, ["N", 3])]
    m2 = _model([helper.make_node("Add", ["x", "x2"], ["y"])], {}, 3, 3, inputs=two, check=False)
    assert _refusal(m2) == "model: the graph must have one input, not 2 (x, x2)"
    bn = _model([helper.make_node("BatchNormalization", ["x", "a", "a", "a", "a"], ["y"], name="bn")],
                {"a": np.ones(3)}, 3, 3, check=False)
    assert _refusal(bn) == (
        "model: node 'bn' (BatchNormalization) is not supported: batch norm can be folded only directly after a "
        "Gemm or MatMul"
    )
    dyn = _model([helper.make_node("Relu", ["x"], ["y"])], {}, 3, 3, in_shape=["N", "C"], check=False)
    assert _refusal(dyn) == "model: input 'x' must be N x n_in (a fixed n_in of 1 to 4096), not [None, None]"
    bad = tmp_path / "cut.onnx"
    bad.write_bytes(_mlp().SerializeToString()[:57])
    msg = str(pytest.raises(FileFormatError, fw.load_onnx, bad).value)
    assert msg.startswith(f"{bad}: is not a readable ONNX model (") and "\n" not in msg
    with pytest.raises(ValueError, match=r"^input_scale must be one of pow2, full, codes, not 'raw'$"):
        fw.load_onnx(_mlp(), input_scale="raw")


def test_wrong_types_and_shapes_are_one_line(tmp_path):
    ints = [helper.make_tensor_value_info("x", TensorProto.INT64, ["N", 3])]
    m = _model([helper.make_node("Relu", ["x"], ["y"])], {}, 3, 3, inputs=ints, check=False)
    assert _refusal(m) == "model: input 'x' must be a float or double tensor"
    w = _model([helper.make_node("Gemm", ["x", "W"], ["y"], name="g")], {"W": np.ones((4, 2))}, 3, 2, check=False)
    assert _refusal(w) == "model: node 'g' (Gemm) is not supported: the weights take 4 inputs, but the tensor has 3"
    big = _model([helper.make_node("Relu", ["x"], ["y"])], {}, 10**7, 3, check=False)
    assert _refusal(big) == "model: input 'x' must be N x n_in (a fixed n_in of 1 to 4096), not [None, 10000000]"
    old = _mlp()
    old.opset_import[0].version = 7
    assert _refusal(old) == f"model: the ONNX opset must be 9 to {NEWEST}, not 7"
    junk = tmp_path / "junk.onnx"
    junk.write_bytes(bytes(np.random.default_rng(1).integers(0, 256, 300, dtype=np.uint8)))
    with pytest.raises(FileFormatError, match=r"^.*junk\.onnx: ") as info:
        fw.load_onnx(junk)
    assert "\n" not in str(info.value)


def test_core_import_does_not_load_onnx():
    import subprocess
    import sys

    code = "import sys, fxnet_widgets, fxnet_widgets.core.onnx_io; print('onnx' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", code], capture_output=True, text=True).stdout.strip() == "False"
