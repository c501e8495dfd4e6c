"""Starting plans: the largest fraction that keeps a range, the safe accumulators, the start of tune."""

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.starting import start_plan


@pytest.fixture(scope="module")
def net():
    rng = np.random.default_rng(1)
    return fw.Network.from_layers([(rng.normal(0, 4, (3, 3)), rng.normal(0, 1, 3), "sigmoid"),
                                   (rng.normal(0, 4, (1, 3)), [0.0], "sigmoid")])  # fmt: skip


@pytest.fixture(scope="module")
def codes():
    return np.random.default_rng(7).integers(0, 256, (4000, 3), dtype=np.uint8)


def test_start_plan_cannot_overflow(net, codes):
    p = start_plan(net)
    intnet = fw.quantise(net, p)
    assert [lp.acc_bits for lp in p.layers] == [int(L.safe_acc_bits.max()) for L in intnet.layers]
    assert all(lp.weight_bits == 16 for lp in p.layers)
    assert fw.emulate(net, p, codes).event_totals()["weight_clip"] == 0
    # the largest weight_frac without a clip: one more fraction bit would clip (by construction)
    more = p.replace(layer=0, weight_frac=p.layers[0].weight_frac + 1)
    assert fw.quantise(net, more).layers[0].weight_clip.sum() > 0
