"""The hand-worked 3-3-1 sigmoid network of tests/core/test_kernel.py, shared by several tests.

Its integer values at 5 weight fraction bits are worked by hand in
``test_hand_computed_pixel_331_sigmoid``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

import fxnet_widgets as fw
from fxnet_widgets.core.images import save_png

W1 = [[0.5, -0.25, 0.125], [1.0, 0.0, -1.0], [-0.75, 0.5, 0.25]]
B1 = [0.1, -0.2, 0.3]
W2 = [[1.5, -2.0, 0.5]]
B2 = [0.25]


def hand_network(**kw) -> fw.Network:
    return fw.Network.from_layers([(W1, B1, "sigmoid"), (W2, B2, "sigmoid")], **kw)


def hand_files(directory: Path, *, seed: int = 0, shape=(6, 7), **plan_fields):
    """Write net.json, plan.json, img.png and codes.npy of the hand network into ``directory``."""
    net = hand_network()
    fields = dict(weight_bits=8, weight_frac=5, acc_bits=18, table_bits=14, table_frac=9, out_bits=8)
    fields.update(plan_fields)
    plan = fw.Plan.uniform(net, **fields)
    net.save(directory / "net.json")
    plan.save(directory / "plan.json")
    img = np.random.default_rng(seed).integers(0, 256, (*shape, 3), dtype=np.uint8)
    save_png(directory / "img.png", img)
    np.save(directory / "codes.npy", img.reshape(-1, 3).astype(np.int64))
    return net, plan, img
