"""Random networks and plans for the hand-off tests, and the demo design.

``random_design(seed)`` draws a small network (1-3 layers, 1-4 inputs of 4-12
bits, 1-4 neurons per layer) and a plan whose accumulators are up to 3 bits
narrower than the guaranteed-safe width, so wrap and saturate really happen.
The seed picks the first layer's activation (``seed % 4``), the index rounding
of every layer (``seed % 5``), the overflow mode (``seed % 2``) and, for
``seed % 3 == 0``, a left shift (``k < 0``) in the first layer, so any 20
consecutive seeds cover every activation, rounding mode, overflow mode and
both shift directions.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from fxnet_widgets.core.formats import ROUNDINGS
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.kernel import build_integer_network
from fxnet_widgets.core.network import ACTIVATIONS, Network
from fxnet_widgets.core.plan import LayerPlan, Plan

ASSETS = Path(__file__).resolve().parents[2] / "assets"


def _clip(v: int, lo: int = -40, hi: int = 40) -> int:
    return int(min(max(v, lo), hi))


def random_design(seed: int, n_vectors: int = 300) -> tuple[Network, Plan, np.ndarray]:
    """``(network, plan, input codes)`` for ``seed`` (deterministic)."""
    rng = np.random.default_rng(1000 + seed)
    n_layers = int(rng.integers(1, 4))
    input_bits = int(rng.choice([4, 6, 8, 10, 12]))
    n_in = int(rng.integers(1, 5))
    layers = []
    width = n_in
    for li in range(n_layers):
        act = ACTIVATIONS[seed % 4] if li == 0 else str(rng.choice(ACTIVATIONS))
        n_out = int(rng.integers(1, 5))
        w = rng.normal(0.0, 1.5, (n_out, width))
        b = rng.normal(0.0, 1.0, n_out)
        layers.append((w, b, act))
        width = n_out
    net = Network.from_layers(layers, input_bits=input_bits)
    rounding = ROUNDINGS[seed % 5]
    overflow = ("wrap", "saturate")[seed % 2]
    docs = []
    in_frac = input_bits
    for li, (_, _, act) in enumerate(layers):
        wb = int(rng.integers(2, 15))
        wf = _clip(wb - 1 - int(rng.integers(0, 4)))
        k = -int(rng.integers(1, 4)) if (li == 0 and seed % 3 == 0) else int(rng.integers(-2, 9))
        doc = {
            "weight_bits": wb, "weight_frac": wf, "weight_round": str(rng.choice(ROUNDINGS)),
            "acc_bits": 62, "acc_overflow": overflow, "index_round": rounding,
            "out_bits": int(rng.integers(2, 13)),
        }  # fmt: skip
        if act in ("sigmoid", "tanh"):
            doc["table_bits"] = int(rng.integers(3, 12))
            doc["table_frac"] = _clip(in_frac + wf - k)
            doc["table_round"] = str(rng.choice(ROUNDINGS))
            doc["table_sample"] = str(rng.choice(["edge", "mid"]))
            if rng.random() < 0.3:
                doc["out_frac"] = doc["out_bits"] - int(rng.integers(0, 3))
            out_frac = doc.get("out_frac", doc["out_bits"] if act == "sigmoid" else doc["out_bits"] - 1)
        else:
            doc["out_frac"] = _clip(in_frac + wf - k)
            out_frac = doc["out_frac"]
        docs.append(doc)
        in_frac = out_frac
    plan = Plan(tuple(LayerPlan.from_dict(d) for d in docs))
    safe = build_integer_network(net, plan)
    for li, L in enumerate(safe.layers):
        docs[li]["acc_bits"] = int(min(62, max(2, int(L.safe_acc_bits.max()) - int(rng.integers(0, 4)))))
    plan = Plan(tuple(LayerPlan.from_dict(d) for d in docs))
    hi = (1 << input_bits) - 1
    codes = rng.integers(0, hi + 1, (n_vectors, n_in))
    corners = np.array([[0] * n_in, [hi] * n_in, [hi if i % 2 else 0 for i in range(n_in)]])
    return net, plan, np.vstack([corners, codes]).astype(np.int64)


def demo_design(max_vectors: int = 1500, use_assets: bool = True) -> tuple[Network, Plan, np.ndarray, str]:
    """The demo (assets/network.json, plan.json and a subsample of scene-test.png) or, while
    those files do not exist yet, an invented ripe-fruit 3-3-1 sigmoid network on a
    synthetic colour ramp. Returns ``(network, plan, codes N x 3, description)``."""
    net_file, plan_file, image = ASSETS / "network.json", ASSETS / "plan.json", ASSETS / "scene-test.png"
    if use_assets and net_file.exists() and plan_file.exists() and image.exists():
        net = Network.load(net_file)
        plan = Plan.load(plan_file, net)
        codes = read_image(image).codes.reshape(-1, 3)
        step = max(1, codes.shape[0] // max_vectors)
        return net, plan, np.ascontiguousarray(codes[::step][:max_vectors]), "assets demo"
    # invented demo data: a produce-sorting camera flags ripe (red, not green) fruit
    net = Network.from_layers(
        [
            ([[6.0, -5.0, -1.0], [-2.0, 7.0, -3.0], [1.0, 1.0, 4.0]], [-1.0, -2.0, -3.0], "sigmoid"),
            ([[7.0, -6.0, -2.0]], [-0.5], "sigmoid"),
        ],
        classes=["other", "ripe"],
    )
    plan = Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=16, table_bits=10, table_frac=6, out_bits=8)
    rng = np.random.default_rng(7)
    codes = rng.integers(0, 256, (max_vectors, 3))
    return net, plan, codes.astype(np.int64), "invented demo"


def extreme_designs() -> dict[str, tuple[Network, Plan, np.ndarray]]:
    """Hand-picked corners: the widest words, shifts beyond 62 bits, 1-bit words."""
    rng = np.random.default_rng(99)
    out = {}
    net = Network.from_layers(
        [
            (rng.normal(0, 0.5, (3, 2)), [0.25, -0.5, 0.0], "tanh"),
            (rng.normal(0, 0.5, (2, 3)), [0.1, -0.1], "identity"),
        ],
        input_bits=16,
    )
    plan = Plan(
        (
            LayerPlan(weight_bits=32, weight_frac=30, acc_bits=62, out_bits=16, table_bits=14, table_frac=10),
            LayerPlan(weight_bits=32, weight_frac=31, acc_bits=50, out_bits=16, out_frac=12, acc_overflow="saturate",
                      index_round="half-even"),
        )
    )  # fmt: skip
    codes = np.vstack([[[0, 0], [65535, 65535], [65535, 0]], rng.integers(0, 65536, (200, 2))])
    out["wide-words"] = (net, plan, codes)
    net = Network.from_layers([([[3.0, -2.0]], [0.5], "sigmoid")], input_bits=16)
    plan = Plan((LayerPlan(weight_bits=20, weight_frac=40, acc_bits=62, out_bits=12, table_bits=2, table_frac=-40,
                           index_round="half-up"),))  # fmt: skip
    out["shift-beyond-62"] = (
        net,
        plan,
        np.vstack([[[0, 0], [65535, 0], [0, 65535]], rng.integers(0, 65536, (100, 2))]),
    )
    net = Network.from_layers([([[1.0, -1.0, 0.5]], [0.0], "relu")], input_bits=1)
    plan = Plan((LayerPlan(weight_bits=1, weight_frac=0, acc_bits=1, out_bits=1, out_frac=-3, index_round="trunc"),))
    out["one-bit"] = (net, plan, np.array([[a, b, c] for a in (0, 1) for b in (0, 1) for c in (0, 1)]))
    net = Network.from_layers(
        [([[2.0, -1.0, 0.5], [-1.0, 3.0, 1.0], [0.5, 0.5, -2.0]], [0.0, 0.1, -0.1], "tanh")],
        input_names=["signal", "Signal", "3d"],
        classes=["module", "int", "ripe fruit!"],
    )
    plan = Plan((LayerPlan(weight_bits=6, weight_frac=3, acc_bits=12, out_bits=3, table_bits=4, table_frac=2,
                           index_round="half-away"),))  # fmt: skip
    out["argmax-ties"] = (net, plan, np.vstack([[[0, 0, 0], [255, 255, 255]], rng.integers(0, 256, (300, 3))]))
    return out
