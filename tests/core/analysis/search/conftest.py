"""A grid and its sweep, shared by the search tests."""

import pytest

from fxnet_widgets.core.analysis import SerialExecutor, sweep

GRID = {"weight_frac": [1, 2, 3, 4], "table_bits": [5, 6, 7, 8, 9]}


@pytest.fixture(scope="session")
def grid():
    return GRID


@pytest.fixture(scope="module")
def records(net, codes):
    return sweep(net, codes, GRID, executor=SerialExecutor())
