"""Starting plans: the largest fraction that keeps a range, safe accumulators, range-aware relu/identity formats.

Outside data: scikit-image's sample photo ``skimage.data.astronaut`` (public domain, NASA), classified into
three colour classes by scikit-learn's ``KMeans`` and learnt by scikit-learn's ``MLPClassifier``.
"""

import math
from pathlib import Path

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.demo import suggest_plan as demo_suggest_plan
from fxnet_widgets.core.starting import MARGIN, largest_frac, start_plan, starting_plan, suggest_plan

ASSETS = Path(__file__).resolve().parents[2] / "assets"


@pytest.fixture(scope="module")
def net():
    rng = np.random.default_rng(1)
    return fw.Network.from_layers([(rng.normal(0, 4, (3, 3)), rng.normal(0, 1, 3), "sigmoid"),
                                   (rng.normal(0, 4, (1, 3)), [0.0], "sigmoid")])  # fmt: skip


@pytest.fixture(scope="module")
def codes():
    return np.random.default_rng(7).integers(0, 256, (4000, 3), dtype=np.uint8)


def grid32() -> np.ndarray:
    """The explorer's 32^3 colour grid: cell centres 4, 12, ..., 252."""
    c = np.arange(32) * 8 + 4
    return np.stack(np.meshgrid(c, c, c, indexing="ij"), -1).reshape(-1, 3).astype(np.uint8)


def test_start_plan_cannot_overflow(net, codes):
    p = start_plan(net)
    intnet = fw.build_integer_network(net, p)
    assert [lp.acc_bits for lp in p.layers] == [int(L.safe_acc_bits.max()) for L in intnet.layers]
    assert all(lp.weight_bits == 16 for lp in p.layers)
    assert fw.emulate(net, p, codes).event_totals()["weight_clip"] == 0
    # the largest weight_frac without a clip: one more fraction bit would clip (by construction)
    more = p.replace(layer=0, weight_frac=p.layers[0].weight_frac + 1)
    assert fw.build_integer_network(net, more).layers[0].weight_clip.sum() > 0


@pytest.mark.parametrize("lo, hi, bits, signed", [(-1.0, 0.5, 8, True), (0.0, 1.0, 8, True), (0.0, 1.0, 8, False),
                                                  (-0.3, 5.7, 10, True), (0.0, 112.4, 16, False), (0.0, 0.0, 4, True)])
def test_largest_frac_keeps_the_range_and_one_more_bit_does_not(lo, hi, bits, signed):
    # two's complement range [-2^(b-1), 2^(b-1)-1], unsigned [0, 2^b-1] (semantics.md, Q notation: common practice)
    bottom, top = (-(2 ** (bits - 1)), 2 ** (bits - 1) - 1) if signed else (0, 2**bits - 1)
    f = largest_frac(lo, hi, bits, signed=signed)

    def fits(frac):
        return bottom <= round(lo * 2.0**frac) and round(hi * 2.0**frac) <= top  # Python round: half-even

    assert fits(f) and (f == 40 or not fits(f + 1))


def test_demo_plan_is_unchanged():
    # the committed demo plan (assets/plan.json) is what the starting rule gives the demo network
    demo = fw.Network.load(ASSETS / "network.json")
    assert suggest_plan(demo) == demo_suggest_plan(demo) == fw.Plan.load(ASSETS / "plan.json")


@pytest.fixture(scope="module")
def photo_net():
    sk_data = pytest.importorskip("skimage.data")
    cluster = pytest.importorskip("sklearn.cluster")
    neural = pytest.importorskip("sklearn.neural_network")
    image = np.ascontiguousarray(sk_data.astronaut()[..., :3])
    px = image.reshape(-1, 3)
    sub = px[np.random.default_rng(0).choice(len(px), 20000, replace=False)] / 255.0
    labels = cluster.KMeans(3, n_init=4, random_state=0).fit(sub).predict(sub)
    clf = neural.MLPClassifier((6, 4), activation="relu", max_iter=400, random_state=0).fit(sub, labels)
    return fw.from_sklearn(clf, trained_on="full"), image


def test_relu_photo_network_starts_in_agreement_with_float(photo_net):
    """Issue 20's goal: >= 99.5 % of the photo, >= 99 % of the 32^3 grid, no accumulator overflow."""
    net, image = photo_net
    assert [L.activation for L in net.layers] == ["relu", "relu", "identity"] and net.shape == (3, 6, 4, 3)
    plan = suggest_plan(net, image)
    on_image, on_grid = fw.emulate(net, plan, image), fw.emulate(net, plan, grid32())
    assert 1 - on_image.mismatch / on_image.n >= 0.995
    assert 1 - on_grid.mismatch / on_grid.n >= 0.99
    assert on_image.event_totals()["acc_overflow"] == on_grid.event_totals()["acc_overflow"] == 0
    intnet = fw.build_integer_network(net, plan)
    assert [lp.acc_bits for lp in plan.layers] == [int(L.safe_acc_bits.max()) for L in intnet.layers]
    # nothing saturates on the data: no clamp at the top of a relu, none at either end of the identity logits
    for i, L in enumerate(net.layers):
        assert on_image.events[i]["table_high"].sum() == 0
        if L.activation == "identity":
            assert on_image.events[i]["table_low"].sum() == 0


def test_without_data_nothing_can_saturate(photo_net):
    net, image = photo_net
    sp = starting_plan(net)
    assert all(r.source == "guaranteed" for r in sp.ranges)
    # the guaranteed range holds every input: the whole 32^3 grid and the photo
    for codes in (grid32(), image):
        e = fw.emulate(net, sp.plan, codes)
        assert all(e.events[i]["table_high"].sum() == 0 for i in range(len(net.layers)))
        assert e.events[-1]["table_low"].sum() == 0


def test_observed_range_with_margin_and_the_note_that_says_so():
    # one relu unit y = relu(x0) over inputs 0..255/256; the data reaches only x0 = 60/256
    net = fw.Network.from_layers([([[1.0, 0.0, 0.0]], [0.0], "relu"), ([[1.0], [-1.0]], [0.0, 0.0], "identity")],
                                 classes=["a", "b"])  # fmt: skip
    data = np.array([[0, 0, 0], [60, 9, 9]], dtype=np.uint8)
    sp = starting_plan(net, data)
    first = sp.ranges[0]
    assert first.source == "observed" and first.observed == (0.0, 60 / 256)
    assert first.kept == (0.0, (1 + MARGIN) * 60 / 256)
    lp = sp.plan.layers[0]
    # 8 fraction bits, and the smallest width whose top code (2^b - 1) / 2^8 holds 1.25 * 60/256 = 0.293
    assert lp.out_frac == 8 and lp.out_bits == math.ceil(math.log2(0.293 * 256 + 1))
    assert sp.notes[0].startswith("layer 1 (relu): UQ-1.8 (7 b) holds the observed range [0, 0.234] plus 25 %")
    assert "inputs unlike the data may saturate" in sp.notes[0]
    # without data the same layer holds its guaranteed range [0, 255/256]
    assert starting_plan(net).ranges[0].kept == (0.0, 255 / 256)
    with pytest.raises(ValueError, match=r"^margin must be a number between 0 and 16, not -1$"):
        starting_plan(net, data, margin=-1)
