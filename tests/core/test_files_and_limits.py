"""Network and plan files, contract limits and bad input: exact one-line errors."""

import json
import re

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.fileio import FileFormatError, load_json

NET_DOC = {
    "kind": "fxnet.network",
    "version": 1,
    "input": {"names": ["red", "green", "blue"], "bits": 8, "scale": "pow2"},
    "layers": [
        {"weights": [[0.1, -2.0, 3.5], [1, 1, 1], [0, 0, 1]], "bias": [0.2, 0.0, -1.0], "activation": "sigmoid"},
        {"weights": [[1.0, -1.0, 0.5]], "bias": [0.0], "activation": "sigmoid"},
    ],
    "output": {"classes": ["other", "target"], "threshold": 0.5},
}
PLAN_LAYER = {"weight_bits": 8, "weight_frac": 5, "acc_bits": 18, "out_bits": 8, "table_bits": 14, "table_frac": 9}


def write(tmp_path, name, obj):
    p = tmp_path / name
    p.write_text(obj if isinstance(obj, str) else json.dumps(obj))
    return p


def test_network_round_trip(tmp_path):
    net = fw.Network.from_dict(NET_DOC)
    net.save(tmp_path / "n.json")
    again = fw.Network.load(tmp_path / "n.json")
    assert again == net and again.to_dict() == net.to_dict()
    assert net.shape == (3, 3, 1)


def test_plan_round_trip_and_defaults(tmp_path):
    p = write(tmp_path, "plan.json", {"kind": "fxnet.plan", "version": 1, "layers": [PLAN_LAYER, PLAN_LAYER]})
    plan = fw.Plan.load(p, fw.Network.from_dict(NET_DOC))
    L = plan.layers[0]
    # defaults named in semantics.md
    assert (L.weight_round, L.acc_overflow, L.index_round, L.table_round, L.table_sample) == (
        "half-even", "wrap", "floor", "half-even", "edge",
    )  # fmt: skip
    plan.save(tmp_path / "again.json")
    assert fw.Plan.load(tmp_path / "again.json") == plan


def net_error(tmp_path, mutate):
    doc = json.loads(json.dumps(NET_DOC))
    mutate(doc)
    p = write(tmp_path, "net.json", json.dumps(doc).replace('"__NAN__"', "NaN"))
    with pytest.raises((TypeError, ValueError)) as info:
        fw.Network.load(p)
    return str(info.value).replace(str(p), "net.json")


@pytest.mark.parametrize(
    "mutate,message",
    [
        (lambda d: d["layers"][0]["weights"][1].__setitem__(2, "__NAN__"),
         "net.json: NaN is not valid JSON (numbers must be finite)"),
        (lambda d: d["layers"][0]["weights"][1].__setitem__(2, 1e400),
         "net.json: Infinity is not valid JSON (numbers must be finite)"),
        (lambda d: d["layers"][1].__setitem__("weights", [[1.0, 2.0]]),
         "net.json: layers[1].weights must have 3 columns (the outputs of layers[0]), not 2"),
        (lambda d: d["layers"][0].__setitem__("bias", [0.0]),
         "net.json: layers[0].bias must have 3 entries (one per neuron), not 1"),
        (lambda d: d["layers"][0].__setitem__("activation", "softsign"),
         "net.json: layers[0].activation must be one of sigmoid, tanh, relu, identity, not 'softsign'"),
        (lambda d: d["input"].__setitem__("bits", 17), "net.json: input.bits must be between 1 and 16, not 17"),
        (lambda d: d["input"].__setitem__("bits", "8"), "net.json: input.bits must be an integer, not '8'"),
        (lambda d: d["layers"][0].__setitem__("extra", 1),
         "net.json: layers[0].extra is not a layer key (known: activation, bias, weights)"),
        (lambda d: d["layers"][0].pop("weights"), "net.json: layers[0].weights is missing"),
        (lambda d: d["layers"][0]["weights"].__setitem__(0, [1.0]),
         "net.json: layers[0].weights rows must all have the same length, not [1, 3]"),
        (lambda d: d["output"].__setitem__("classes", ["a"]),
         "net.json: output.classes must have 2 names for 1 output(s), not 1"),
    ],
)  # fmt: skip
def test_network_errors(tmp_path, mutate, message):
    assert net_error(tmp_path, mutate) == message


def test_non_finite_weights_from_python():
    with pytest.raises(ValueError, match=r"^layers\[0\]\.weights\[0\]\[1\] must be finite, not inf$"):
        fw.Network.from_layers([([[0.0, np.inf]], [0.0], "relu")], input_names=["a", "b"])
    with pytest.raises(ValueError, match=r"^layers\[0\]\.bias\[0\] must be finite, not nan$"):
        fw.Network.from_layers([([[0.0, 1.0]], [np.nan], "relu")], input_names=["a", "b"])


def test_fan_in_limit():
    with pytest.raises(ValueError, match=r"^layers\[0\]\.weights fan-in must be at most 4096, not 4097$"):
        fw.Network.from_layers([(np.zeros((1, 4097)), [0.0], "relu")])


@pytest.mark.parametrize(
    "key,value,message",
    [
        ("weight_bits", 33, "weight_bits must be between 1 and 32, not 33"),
        ("weight_bits", 0, "weight_bits must be between 1 and 32, not 0"),
        ("acc_bits", 0, "acc_bits must be between 1 and 62, not 0"),
        ("acc_bits", 63, "acc_bits must be between 1 and 62, not 63"),
        ("table_bits", 21, "table_bits must be between 1 and 20, not 21"),
        ("out_bits", 17, "out_bits must be between 1 and 16, not 17"),
        ("weight_frac", 41, "weight_frac must be between -40 and 40, not 41"),
        ("table_frac", -41, "table_frac must be between -40 and 40, not -41"),
        ("acc_overflow", "clamp", "acc_overflow must be one of wrap, saturate, not 'clamp'"),
        ("index_round", "nearest",
         "index_round must be one of floor, trunc, half-up, half-away, half-even, not 'nearest'"),
        ("table_sample", "centre", "table_sample must be one of edge, mid, not 'centre'"),
        ("acc_bits", 18.0, "acc_bits must be an integer, not 18.0"),
        ("acc_bits", True, "acc_bits must be an integer, not True"),
        ("guard_bits", 2, "guard_bits is not a plan key (known: weight_bits, weight_frac, weight_round, acc_bits, "
         "acc_overflow, table_bits, table_frac, index_round, out_bits, out_frac, table_round, table_sample)"),
    ],
)  # fmt: skip
def test_plan_limits_name_the_field(tmp_path, key, value, message):
    layer = dict(PLAN_LAYER)
    layer[key] = value
    p = write(tmp_path, "plan.json", {"kind": "fxnet.plan", "version": 1, "layers": [PLAN_LAYER, layer]})
    with pytest.raises((TypeError, ValueError)) as info:
        fw.Plan.load(p)
    assert str(info.value) == f"{p}: layers[1].{message}"


def test_plan_layer_count_and_required_keys(tmp_path):
    net = fw.Network.from_dict(NET_DOC)
    p = write(tmp_path, "plan.json", {"layers": [PLAN_LAYER]})
    message = r"^.*plan\.json: layers must have 2 entries \(one per network layer\), not 1$"
    with pytest.raises(ValueError, match=message):
        fw.Plan.load(p, net)
    missing = {k: v for k, v in PLAN_LAYER.items() if k != "table_frac"}
    p = write(tmp_path, "plan.json", {"layers": [PLAN_LAYER, missing]})
    with pytest.raises(ValueError, match=r"^.*: layers\[1\]\.table_frac is missing \(required for a sigmoid layer\)$"):
        fw.Plan.load(p, net)
    p = write(tmp_path, "plan.json", {"layers": [PLAN_LAYER, {"weight_bits": 8}]})
    with pytest.raises(ValueError, match=r"^.*: layers\[1\]\.weight_frac is missing$"):
        fw.Plan.load(p)


def test_relu_needs_out_frac():
    net = fw.Network.from_layers([(np.eye(3), np.zeros(3), "relu")])
    with pytest.raises(ValueError, match=r"^layers\[0\]\.out_frac is missing \(required for a relu layer\)$"):
        fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, out_bits=8)


@pytest.mark.parametrize(
    "codes,exc,message",
    [
        (np.array([[300, 0, 0]]), ValueError, "codes must be between 0 and 255 (8-bit unsigned), not 300"),
        (np.array([[-1, 0, 0]]), ValueError, "codes must be between 0 and 255 (8-bit unsigned), not -1"),
        (np.array([[0.5, 0, 0]]), TypeError, "codes must be an array of unsigned integer codes, not float64"),
        (np.zeros((2, 4), np.int64), ValueError, "codes must have 3 columns (one per network input), not 4"),
        (np.zeros((2, 2, 4), np.uint8), ValueError, "codes image must have 3 channels, not 4"),
        (np.zeros(3, np.uint8), ValueError, "codes must be N x 3 or H x W x 3, not shape (3,)"),
    ],
)
def test_bad_codes_are_errors_never_wraps(codes, exc, message):
    net = fw.Network.from_dict(NET_DOC)
    plan = fw.Plan.uniform(net, **PLAN_LAYER)
    with pytest.raises(exc, match="^" + re.escape(message) + "$"):
        fw.emulate(net, plan, codes)


def test_json_loader_bounds(tmp_path):
    p = write(tmp_path, "deep.json", "[" * 100 + "]" * 100)
    with pytest.raises(FileFormatError, match=r"deep\.json: JSON nesting deeper than 64 levels$"):
        load_json(p)
    p = write(tmp_path, "dup.json", '{"a": 1, "a": 2}')
    with pytest.raises(FileFormatError, match=r"dup\.json: duplicate key 'a'$"):
        load_json(p)
    p = tmp_path / "bin.json"
    p.write_bytes(b"\xff\xfe{}")
    with pytest.raises(FileFormatError, match=r"bin\.json: not UTF-8 text \(byte 0\)$"):
        load_json(p)
    with pytest.raises(FileFormatError, match=r"nope\.json: no such file$"):
        load_json(tmp_path / "nope.json")


def test_truncated_image_is_a_clear_error(tmp_path):
    from fxnet_widgets.core.images import image_to_png_bytes, read_image

    data = image_to_png_bytes(np.zeros((20, 20, 3), np.uint8))
    p = tmp_path / "cut.png"
    p.write_bytes(data[:-20])  # the image data and end chunks cut off
    with pytest.raises(FileFormatError, match=r"cut\.png: broken or truncated image \(.*\)$"):
        read_image(p)


def test_int64_proof_refuses_impossible_plans():
    # the worst case cannot exceed int64 within the contract's limits; the proof still runs:
    net = fw.Network.from_layers([(np.full((1, 4096), 1e10), [0.0], "identity")], input_bits=16)
    plan = fw.Plan.uniform(net, weight_bits=32, weight_frac=0, acc_bits=62, out_bits=16, out_frac=0)
    q = fw.build_integer_network(net, plan)
    # 4096 * (2^31 - 1) * (2^16 - 1) < 2^63: the largest sum the limits allow
    assert q.layers[0].sum_max[0] == 4096 * (2**31 - 1) * (2**16 - 1) < 2**63
