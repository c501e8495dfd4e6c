"""The plan: its file round trip, defaults, per-field limits and layer checks (exact one-line errors)."""

import numpy as np
import pytest
from fxdocs import NET_DOC, PLAN_LAYER, write

import fxnet_widgets as fw


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
