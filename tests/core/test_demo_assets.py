"""The demo asset set in assets/: reproducible from seeds, and good enough for the demo."""

import json
from pathlib import Path

import numpy as np
import pytest

from fxnet_widgets.core.demo import CLASS_MAP_FILES, DEMO_FILES, suggest_plan, write_demo
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.core.labels import labels_from_class_map, labels_from_mask, load_class_table
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan

ASSETS = Path(__file__).resolve().parents[2] / "assets"


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory):
    d = tmp_path_factory.mktemp("demo")
    demo = write_demo(d, class_maps=True)
    return d, demo


def test_asset_set_is_exactly_the_named_files_and_small():
    names = sorted(p.name for p in ASSETS.iterdir())
    assert names == sorted(DEMO_FILES + CLASS_MAP_FILES)
    assert sum(p.stat().st_size for p in ASSETS.iterdir()) < 2 * 1024 * 1024


def test_regenerated_assets_match(regenerated):
    d, _ = regenerated
    for name in DEMO_FILES + CLASS_MAP_FILES:
        if name.endswith(".png"):
            a, b = read_image(ASSETS / name), read_image(d / name)
            np.testing.assert_array_equal(a.codes, b.codes, err_msg=name)
            assert a.note == b.note
        elif name == "network.json":
            a, b = Network.load(ASSETS / name), Network.load(d / name)
            assert a.to_dict()["input"] == b.to_dict()["input"] and a.classes == b.classes
            for la, lb in zip(a.layers, b.layers, strict=True):
                assert la.activation == lb.activation
                # float64 training: equal up to the last bits a different BLAS summation order may change
                np.testing.assert_allclose(la.weights, lb.weights, rtol=1e-9, atol=1e-12)
                np.testing.assert_allclose(la.bias, lb.bias, rtol=1e-9, atol=1e-12)
        else:
            assert json.loads((ASSETS / name).read_text()) == json.loads((d / name).read_text()), name


def test_demo_network_and_plan_on_the_test_scene():
    net = Network.load(ASSETS / "network.json")
    plan = Plan.load(ASSETS / "plan.json", net)
    assert net.shape == (3, 3, 1) and [L.activation for L in net.layers] == ["sigmoid", "sigmoid"]
    assert net.input_names == ("red", "green", "blue") and net.classes == ("other", "ripe")
    image = read_image(ASSETS / "scene-test.png")
    truth = labels_from_mask(image, ASSETS / "scene-test-mask.png").labels.reshape(image.shape)
    assert image.shape == (360, 640) and image.note == ""
    float_accuracy = np.mean(net.decide(net.predict(image.codes)) == truth)
    assert float_accuracy >= 0.97
    e = emulate(net, plan, image.codes)
    assert e.mismatch / e.n <= 0.01
    assert e.event_totals()["acc_overflow"] == 0


def test_suggested_plan_is_the_documented_one():
    net = Network.load(ASSETS / "network.json")
    plan = Plan.load(ASSETS / "plan.json", net)
    assert plan == suggest_plan(net)
    for lp, L in zip(plan.layers, net.layers, strict=True):
        assert (lp.weight_bits, lp.table_bits, lp.table_frac, lp.out_bits) == (10, 14, 10, 8)
        q = np.rint(L.weights * 2.0**lp.weight_frac)  # half-even, as the plan's weight_round
        assert q.max() <= 511 and q.min() >= -512  # 10-bit two's complement (common practice)
        q1 = np.rint(L.weights * 2.0 ** (lp.weight_frac + 1))
        assert q1.max() > 511 or q1.min() < -512  # one more fraction bit would clip


def test_class_maps_agree_with_the_masks():
    table = load_class_table(ASSETS / "classes.json")
    assert table.names == ("background", "ripe", "turning", "unripe", "stem", "leaf", "highlight")
    for scene in ("train", "test"):
        px = labels_from_class_map(ASSETS / f"scene-{scene}.png", ASSETS / f"scene-{scene}-classes.png", table)
        mask = labels_from_mask(ASSETS / f"scene-{scene}.png", ASSETS / f"scene-{scene}-mask.png")
        np.testing.assert_array_equal(px.labels == table.names.index("ripe"), mask.labels == 1)
