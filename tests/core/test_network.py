"""The network: its file round trip, its document's checks and limits (exact one-line errors)."""

import json

import numpy as np
import pytest
from fxdocs import NET_DOC, write

import fxnet_widgets as fw


def test_network_round_trip(tmp_path):
    net = fw.Network.from_dict(NET_DOC)
    net.save(tmp_path / "n.json")
    again = fw.Network.load(tmp_path / "n.json")
    assert again == net and again.to_dict() == net.to_dict()
    assert net.shape == (3, 3, 1)


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
