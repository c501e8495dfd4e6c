"""Values cannot lie: a network built any public way is validated and fingerprinted, so caches keyed by
value never hand one network's answer to another."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core.network import Layer, Network

PLAN = fw.Plan((fw.LayerPlan(weight_bits=8, weight_frac=4, acc_bits=16, out_bits=8, table_bits=8, table_frac=4),))


def _net(sign):
    return Network((Layer(np.array([[sign, sign, sign]], dtype=float), np.zeros(1), "sigmoid"),), ("r", "g", "b"))


def test_constructor_networks_with_different_weights_differ_and_emulate_differently():
    plus, minus = _net(1.0), _net(-1.0)
    assert plus != minus and hash(plus) != hash(minus) and plus.digest and minus.digest
    x = np.array([[100, 100, 120]], dtype=np.uint8)
    # worked by hand from the contract (steps 1-3): q_w = round(+-1 * 2^4) = +-16, q_b = 0,
    # s = +-16 * (100 + 100 + 120) = +-5120, inside the 16-bit accumulator
    assert int(fw.emulate(plus, PLAN, x).acc[0][0, 0]) == 5120
    assert int(fw.emulate(minus, PLAN, x).acc[0][0, 0]) == -5120


def test_constructor_equals_from_layers_and_load_round_trip(tmp_path):
    a = _net(1.0)
    b = Network.from_layers([([[1.0, 1.0, 1.0]], [0.0], "sigmoid")], input_names=["r", "g", "b"])
    assert a == b and a.digest == b.digest
    a.save(tmp_path / "n.json")
    assert Network.load(tmp_path / "n.json") == a


def test_constructor_validates():
    with pytest.raises(ValueError, match=r"^activation must be one of sigmoid, tanh, relu, identity, not 'soft'$"):
        Layer(np.ones((1, 3)), np.zeros(1), "soft")
    with pytest.raises(ValueError, match=r"^layers\[1\]\.weights must have 1 columns"):
        Network((Layer(np.ones((1, 3)), np.zeros(1), "relu"), Layer(np.ones((1, 2)), np.zeros(1), "sigmoid")),
                ("r", "g", "b"))  # fmt: skip
    with pytest.raises(ValueError, match=r"^input\.bits must be between 1 and 16, not 0$"):
        Network((Layer(np.ones((1, 3)), np.zeros(1), "sigmoid"),), ("r", "g", "b"), input_bits=0)


def test_arrays_are_frozen_copies():
    w = np.ones((1, 3))
    net = Network((Layer(w, np.zeros(1), "sigmoid"),), ("r", "g", "b"))
    w[0, 0] = 5.0  # the caller's array changes; the network does not
    assert net.layers[0].weights[0, 0] == 1.0 and not net.layers[0].weights.flags.writeable


weights = st.lists(st.integers(-40, 40), min_size=3, max_size=3).map(lambda v: [x / 8 for x in v])


@given(w1=weights, w2=weights, b=st.integers(-8, 8))
def test_every_constructor_agrees_on_identity(w1, w2, b):
    made = [
        Network((Layer(np.array([w]), np.array([b / 4]), "sigmoid"),), ("r", "g", "b")) for w in (w1, w2)
    ]
    via_layers = [Network.from_layers([([w], [b / 4], "sigmoid")], input_names=["r", "g", "b"]) for w in (w1, w2)]
    via_dict = [Network.from_dict(n.to_dict()) for n in made]
    for i in range(2):
        assert made[i] == via_layers[i] == via_dict[i]
    same = w1 == w2
    assert (made[0] == made[1]) == same and (made[0].digest == made[1].digest) == same
    x = np.array([[255, 0, 0], [0, 255, 0], [0, 0, 255]], dtype=np.uint8)
    acc = [fw.emulate(n, PLAN, x).acc[0] for n in made]
    # q_w = round(w * 16) differs whenever w differs (w on a 1/8 grid), so the sums on unit inputs differ
    assert np.array_equal(acc[0], acc[1]) == same
