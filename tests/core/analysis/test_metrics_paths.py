"""error_metrics through its value table equals the straightforward float64 formulas."""

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.analysis.metrics import error_metrics
from fxnet_widgets.core.kernel import _compiled


def _case(act, n_out, out_bits, out_frac=3):
    rng = np.random.default_rng(n_out * 10 + out_bits)
    classes = ["other", "ripe"] if n_out == 1 else [f"c{i}" for i in range(n_out)]
    net = fw.Network.from_layers(
        [(rng.normal(0, 2, (3, 3)), rng.normal(0, 1, 3), "sigmoid"),
         (rng.normal(0, 2, (n_out, 3)), rng.normal(0, 1, n_out), act)],
        classes=classes,
    )  # fmt: skip
    last = {"weight_bits": 8, "weight_frac": 5, "acc_bits": 20, "out_bits": out_bits}
    if act in ("sigmoid", "tanh"):
        last.update(table_bits=10, table_frac=6)
    else:
        last["out_frac"] = out_frac
    first = {"weight_bits": 8, "weight_frac": 5, "acc_bits": 20, "out_bits": 8, "table_bits": 10, "table_frac": 6}
    return net, fw.Plan.from_dict({"layers": [first, last]}), rng


CASES = [("sigmoid", 1, 8), ("tanh", 1, 7), ("tanh", 3, 8), ("relu", 2, 16), ("identity", 3, 12), ("identity", 1, 6)]


@pytest.mark.parametrize("path", ["numpy", "numba"])
@pytest.mark.parametrize("act, n_out, out_bits", CASES)
def test_error_metrics_equal_the_straightforward_formulas(act, n_out, out_bits, path, monkeypatch):
    # both kernel paths (FXNET_KERNEL; the compiled error pass runs on these 600 samples too)
    monkeypatch.setenv("FXNET_KERNEL", path)
    monkeypatch.setattr(_compiled, "MIN_SAMPLES", 0)
    net, plan, rng = _case(act, n_out, out_bits)
    img = rng.integers(0, 256, (20, 30, 3)).astype(np.uint8)
    r = fw.emulate(net, plan, img)
    labels = rng.integers(0, len(net.classes), (20, 30))
    m = error_metrics(r, labels)
    # the documented definition: |code / 2**out_frac - float output| per output, in float64
    out_frac = m.out_frac
    err = np.abs(np.asarray(r.out_codes, dtype=np.float64).reshape(r.n, -1) / 2.0**out_frac
                 - np.asarray(r.float_out).reshape(r.n, -1))  # fmt: skip
    assert m.max_abs_error == tuple(err.max(axis=0).tolist())
    assert m.mean_abs_error == tuple(err.mean(axis=0).tolist())
    assert m.max_abs_error_lsb == tuple((err.max(axis=0) * 2.0**out_frac).tolist())
    assert np.array_equal(m.per_sample_error, err.max(axis=1).reshape(20, 30))
    assert not m.per_sample_error.flags.writeable
    dec, lab = r.decisions.reshape(-1), labels.reshape(-1)
    k = len(net.classes)
    assert m.confusion == tuple(tuple(int(np.sum((lab == a) & (dec == b))) for b in range(k)) for a in range(k))
    assert m.accuracy == float(np.mean(dec == lab))
    assert m.mismatch == int(np.sum(dec != r.float_decisions.reshape(-1)))


@pytest.mark.parametrize("k, dtype", [(2, np.uint8), (2, np.int64), (2, np.bool_), (3, np.uint8)])
def test_pair_counts_equal_counting_each_pair(k, dtype):
    from fxnet_widgets.core.analysis.metrics import pair_counts

    rng = np.random.default_rng(k)
    rows, cols = (rng.integers(0, k, 5000).astype(dtype) for _ in range(2))
    # the definition: entry (a, b) counts the samples i with rows[i] == a and cols[i] == b
    want = [[int(np.sum((rows == a) & (cols == b))) for b in range(k)] for a in range(k)]
    assert pair_counts(rows, cols, k).tolist() == want
