"""Small random networks and data for the analysis tests (seeded, so every run is the same)."""

import numpy as np
import pytest

import fxnet_widgets as fw


def random_net(seed: int = 1, shape=(3, 3, 1), acts=("sigmoid", "sigmoid")) -> fw.Network:
    """A random network whose decision splits uniform random codes about in half."""
    rng = np.random.default_rng(seed)
    layers = []
    for n_in, n_out, act in zip(shape[:-1], shape[1:], acts):
        layers.append([rng.normal(0, 4, (n_out, n_in)), rng.normal(0, 1, n_out), act])
    net = fw.Network.from_layers(layers)
    if shape[-1] == 1 and acts[-1] == "sigmoid":
        x = rng.integers(0, 256, (4000, shape[0])) / 256.0
        pre = net.forward(x)[-2] @ layers[-1][0].T
        layers[-1][1] = -np.median(pre, axis=0)
        net = fw.Network.from_layers(layers)
    return net


@pytest.fixture(scope="session")
def net() -> fw.Network:
    return random_net(1)


@pytest.fixture(scope="session")
def codes() -> np.ndarray:
    return np.random.default_rng(7).integers(0, 256, (4000, 3), dtype=np.uint8)


@pytest.fixture(scope="session")
def plan(net) -> fw.Plan:
    return fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=16, out_bits=8, table_bits=10, table_frac=6)
