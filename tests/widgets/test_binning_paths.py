"""A neuron histogram's counts on both kernel paths equal numpy's own histogram of the exact sums."""

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.kernel import _compiled
from fxnet_widgets.widgets.binning import BinCounter


@pytest.mark.parametrize("path", ["numpy", "numba"])
@pytest.mark.parametrize("shift", [0, 3])
def test_bin_counts_equal_numpy_histogram(path, shift, monkeypatch):
    monkeypatch.setenv("FXNET_KERNEL", path)
    monkeypatch.setattr(_compiled, "MIN_SAMPLES", 0)
    rng = np.random.default_rng(shift)
    net = fw.Network.from_layers([(rng.normal(0, 3, (3, 3)), rng.normal(0, 1, 3), "sigmoid"),
                                  (rng.normal(0, 3, (1, 3)), [0.0], "sigmoid")])  # fmt: skip
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=10, table_frac=6, out_bits=8)
    emu = fw.emulate(net, plan, rng.integers(0, 256, (40, 50, 3)).astype(np.uint8))
    for layer, neuron in ((0, 1), (1, 0)):
        d, offset = emu.neuron_shifted(layer, neuron)
        s = d.astype(np.int64) + offset
        origin = int(s.min()) - 5
        n_bins = ((int(s.max()) - origin) >> shift) + 1
        got = BinCounter().counts(emu, layer, neuron, origin, shift, n_bins)
        # numpy.histogram over bins [origin + q * 2**shift, origin + (q + 1) * 2**shift): integer sums, so
        # each bin holds exactly the sums whose (s - origin) >> shift is q
        edges = origin + (np.arange(n_bins + 1, dtype=np.int64) << shift) - 0.5
        want, _ = np.histogram(s, bins=edges)
        assert got.tolist() == want.tolist() and int(got.sum()) == s.size
