"""Small invented demo data for the widget tests: a produce-sorting line camera.

A 3-3-1 sigmoid network that calls a pixel "ripe" when red clearly beats green,
a small belt image and a few labelled pixels (invented for the demo scenario).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan

sys.path.insert(0, str(Path(__file__).parent))  # widget_checks: shared checks of these tests


@pytest.fixture(scope="session")
def fruit_net() -> Network:
    return Network.from_layers(
        [
            ([[9.2, -12.4, -2.9], [8.9, -11.6, -3.2], [-9.4, 12.8, 2.8]], [-0.36, -0.36, 0.4], "sigmoid"),
            ([[6.1, 5.7, -6.3]], [-2.9], "sigmoid"),
        ],
        classes=["other", "ripe"],
    )


@pytest.fixture(scope="session")
def fruit_plan(fruit_net: Network) -> Plan:
    return Plan.uniform(
        fruit_net, weight_bits=10, weight_frac=5, acc_bits=18, out_bits=8, table_bits=12, table_frac=8
    ).replace(layer=1, weight_frac=7, acc_bits=19)


@pytest.fixture(scope="session")
def belt_image() -> np.ndarray:
    """24 x 40 RGB: a green-to-red ramp (fruit ripening along x) with some blue noise."""
    rng = np.random.default_rng(5)
    h, w = 24, 40
    x = np.linspace(0, 1, w)[None, :]
    red = np.clip(60 + 190 * x + rng.normal(0, 12, (h, w)), 0, 255)
    green = np.clip(200 - 150 * x + rng.normal(0, 12, (h, w)), 0, 255)
    blue = np.clip(40 + rng.normal(0, 25, (h, w)), 0, 255)
    img = np.stack([red, green, blue], axis=-1).astype(np.uint8)
    img.setflags(write=False)
    return img


@pytest.fixture(scope="session")
def labelled_samples() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(11)
    codes = rng.integers(0, 256, (60, 3)).astype(np.uint8)
    labels = (codes[:, 0].astype(int) > codes[:, 1].astype(int) + 20).astype(np.int64)
    return codes, labels


@pytest.fixture(scope="session")
def colour_net() -> Network:
    """A 3-4-3 network (relu hidden layer, identity outputs): three produce classes by colour (invented)."""
    rng = np.random.default_rng(8)
    return Network.from_layers(
        [(rng.normal(0, 2, (4, 3)), rng.normal(0, 0.3, 4), "relu"),
         (rng.normal(0, 2, (3, 4)), np.zeros(3), "identity")],  # fmt: skip
        classes=["unripe", "turning", "ripe"],
    )
