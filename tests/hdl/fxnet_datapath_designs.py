"""Seeded random networks and plans for the datapath tests.

``random_case(seed)`` draws 1-3 layers, 1-8 inputs of 1-12 bits (fan-in up to
8), 1-4 neurons per layer (so one output or several), every activation,
rounding (weight, index, table) and overflow mode, ``edge`` and ``mid``
tables, negative fractions, left shifts (``k < 0``) and right shifts, and
accumulators 0-4 bits narrower than the safe width (so wrap and saturate
happen) or, one case in four, up to 62 bits wide with 24-32-bit weights and
16-bit inputs. Returns ``(network, plan, codes)``: every input when there are
at most 2^10, else 200 seeded random ones and the corners.
"""

from __future__ import annotations

import itertools

import numpy as np

from fxnet_widgets.core.formats import ROUNDINGS
from fxnet_widgets.core.kernel import build_integer_network
from fxnet_widgets.core.network import ACTIVATIONS, Network
from fxnet_widgets.core.plan import LayerPlan, Plan


def _codes(rng: np.random.Generator, n_in: int, bits: int) -> np.ndarray:
    hi = (1 << bits) - 1
    if n_in * bits <= 10:
        return np.array(list(itertools.product(range(hi + 1), repeat=n_in)), dtype=np.int64)
    corners = np.array([[0] * n_in, [hi] * n_in, [hi * (i % 2) for i in range(n_in)]])
    return np.vstack([corners, rng.integers(0, hi + 1, (200, n_in))]).astype(np.int64)


def _draw(rng: np.random.Generator, wide: bool) -> tuple[Network, list[dict]]:
    n_layers = int(rng.integers(1, 4))
    input_bits = 16 if wide else int(rng.choice([1, 2, 3, 4, 6, 8, 12]))
    n_in = int(rng.integers(1, 9))
    layers, docs = [], []
    width, in_frac = n_in, input_bits
    for _ in range(n_layers):
        act = str(rng.choice(ACTIVATIONS))
        n_out = int(rng.integers(1, 5))
        layers.append((rng.normal(0.0, 2.0, (n_out, width)), rng.normal(0.0, 1.0, n_out), act))
        wb = int(rng.integers(24, 33)) if wide else int(rng.integers(1, 13))
        wf = int(np.clip(wb - 1 - int(rng.integers(-2, 5)), -40, 40))
        k = int(rng.integers(-4, 11))
        doc = {
            "weight_bits": wb, "weight_frac": wf, "weight_round": str(rng.choice(ROUNDINGS)),
            "acc_bits": 62, "acc_overflow": str(rng.choice(["wrap", "saturate"])),
            "index_round": str(rng.choice(ROUNDINGS)), "out_bits": int(rng.integers(1, 13)),
        }  # fmt: skip
        if act in ("sigmoid", "tanh"):
            doc["table_bits"] = int(rng.integers(1, 11))
            doc["table_frac"] = int(np.clip(in_frac + wf - k, -40, 40))
            doc["table_round"] = str(rng.choice(ROUNDINGS))
            doc["table_sample"] = str(rng.choice(["edge", "mid"]))
            if rng.random() < 0.3:
                doc["out_frac"] = doc["out_bits"] - int(rng.integers(-1, 3))
            default = doc["out_bits"] if act == "sigmoid" else doc["out_bits"] - 1
            out_frac = doc.get("out_frac", default)
        else:
            doc["out_frac"] = int(np.clip(in_frac + wf - k, -40, 40))
            out_frac = doc["out_frac"]
        docs.append(doc)
        width, in_frac = n_out, out_frac
    return Network.from_layers(layers, input_bits=input_bits), docs


def random_case(seed: int) -> tuple[Network, Plan, np.ndarray]:
    """``(network, plan, codes)`` for ``seed`` (deterministic)."""
    rng = np.random.default_rng(5000 + seed)
    while True:
        net, docs = _draw(rng, wide=seed % 4 == 3)
        try:
            safe = build_integer_network(net, Plan(tuple(LayerPlan.from_dict(d) for d in docs)))
        except ValueError:  # the exact sum does not fit int64: draw again
            continue
        for d, L in zip(docs, safe.layers):
            d["acc_bits"] = int(min(62, max(1, int(L.safe_acc_bits.max()) - int(rng.integers(0, 5)))))
        try:
            plan = Plan(tuple(LayerPlan.from_dict(d) for d in docs))
            build_integer_network(net, plan)
        except ValueError:
            continue
        return net, plan, _codes(rng, net.n_in, net.input_bits)
