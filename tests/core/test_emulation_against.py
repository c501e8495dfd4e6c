"""`Emulation.against`: the same integers, another network's float pass as "float" (the refine swap)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan

ASSETS = Path(__file__).resolve().parents[2] / "assets"


@pytest.fixture(scope="module")
def fruit_net():
    return Network.load(ASSETS / "network.json")


@pytest.fixture(scope="module")
def fruit_plan(fruit_net):
    return Plan.load(ASSETS / "plan.json", fruit_net)


def _scaled(net, factor):
    first = net.layers[0]
    return net.replace_layers([dataclasses.replace(first, weights=np.asarray(first.weights) * factor),
                               *net.layers[1:]])  # fmt: skip


def test_float_side_is_the_reference_networks_own_pass(fruit_net, fruit_plan):
    rng = np.random.default_rng(7)
    codes = rng.integers(0, 256, size=(4000, 3), dtype=np.uint8)
    other = _scaled(fruit_net, 1.5)
    emu = emulate(other, fruit_plan, codes)
    moved = emu.against(fruit_net)
    # outside reference: the float network's own float64 forward pass (Network.predict), thresholded
    want = (fruit_net.predict(codes)[:, 0] >= fruit_net.threshold).astype(np.uint8)
    assert np.array_equal(moved.float_decisions, want)
    assert np.array_equal(moved.float_out, fruit_net.predict(codes))
    assert not np.array_equal(emu.float_decisions, want)  # the scaled network's float differs (else no proof)
    # the integers are shared, untouched
    assert moved.decisions is emu.decisions and moved.events == emu.events
    assert moved.mismatch == int(np.count_nonzero(emu.decisions != want))
    assert emu.against(other) is emu and moved.against(fruit_net) is moved
    assert emu.float_network == other and moved.float_network == fruit_net


def test_a_reference_of_another_shape_is_refused(fruit_net, fruit_plan):
    emu = emulate(fruit_net, fruit_plan, np.zeros((3, 3), np.uint8))
    two = Network.from_layers([{"weights": [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]], "bias": [0.0, 0.0],
                                "activation": "identity"}], input_names=("R", "G", "B"))  # fmt: skip
    with pytest.raises(ValueError, match="^reference must have 3 inputs and 1 outputs, not 3 and 2$"):
        emu.against(two)
