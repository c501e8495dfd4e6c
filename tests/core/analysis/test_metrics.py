"""Error metrics of a plan: mismatch, output error in value and LSBs, accuracy, confusion."""

import math

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import error_metrics


@pytest.fixture(scope="module")
def one():
    net = fw.Network.from_layers([([[1.0, 1.0, 1.0]], [-1.0], "sigmoid")])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=14, table_frac=10, out_bits=8)
    return net, plan


def test_hand_computed_output_error(one):
    net, plan = one
    m = error_metrics(fw.emulate(net, plan, np.array([[128, 128, 128]])))
    # by hand: s = 3*32*128 - 8192 = 4096, k = 8 + 5 - 10 = 3, index 512 -> t = 0.5,
    # code = round(256 * sigmoid(0.5)) = 159; float = sigmoid(1.5 - 1) (sigmoid = 1/(1+exp(-x)), scipy expit docs)
    ref = 1 / (1 + math.exp(-0.5))
    assert m.out_frac == 8
    assert m.max_abs_error[0] == pytest.approx(abs(159 / 256 - ref), rel=1e-12)
    assert m.max_abs_error_lsb[0] == pytest.approx(abs(159 - 256 * ref), rel=1e-12)
    assert m.mean_abs_error == m.max_abs_error
    assert m.mismatch == 0 and m.accuracy is None and m.confusion is None


def test_mismatch_and_confusion(net, codes):
    plan = fw.Plan.uniform(net, weight_bits=4, weight_frac=1, acc_bits=12, out_bits=4, table_bits=6, table_frac=3)
    r = fw.emulate(net, plan, codes)
    labels = (codes[:, 0] > codes[:, 1]).astype(np.int64)
    m = error_metrics(r, labels)
    dec, fdec = r.decisions, r.float_decisions
    assert m.mismatch == r.mismatch == int(np.sum(dec != fdec)) > 0
    assert m.mismatch_fraction == m.mismatch / len(codes)
    cm = np.array(m.confusion)
    for t in (0, 1):
        for p in (0, 1):
            assert cm[t, p] == np.sum((labels == t) & (dec == p))
    assert m.accuracy == np.trace(cm) / len(codes)
    assert m.float_accuracy == np.mean(fdec == labels)
    err = np.abs(r.out_codes[:, 0] / 2.0**m.out_frac - r.float_out[:, 0])
    np.testing.assert_array_equal(m.per_sample_error, err)
    assert m.max_abs_error[0] == err.max() and m.mean_abs_error[0] == err.mean()
    d = m.to_dict()
    assert d["confusion"] == cm.tolist() and d["classes"] == ["other", "target"]
    text = m.summary()
    assert text.startswith(f"4000 samples: {m.mismatch} decisions differ from float")
    assert "confusion (rows: label, columns: fixed-point decision):" in text


def test_image_shaped_per_sample_error(net, plan):
    img = np.random.default_rng(3).integers(0, 256, (5, 6, 3), dtype=np.uint8)
    r = fw.emulate(net, plan, img)
    m = error_metrics(r, labels=np.zeros((5, 6), dtype=np.int64))
    assert m.per_sample_error.shape == (5, 6)
    assert m.confusion[1] == (0, 0) and sum(m.confusion[0]) == 30


def test_label_errors(net, plan, codes):
    r = fw.emulate(net, plan, codes[:10])
    with pytest.raises(ValueError, match=r"^labels must have shape \(10,\) \(one per sample\), not \(9,\)$"):
        error_metrics(r, np.zeros(9, dtype=int))
    with pytest.raises(ValueError, match=r"^labels must be between 0 and 1 \(class indices\), not 2$"):
        error_metrics(r, np.full(10, 2))
    with pytest.raises(TypeError, match=r"^labels must be an array of integer class indices, not float64$"):
        error_metrics(r, np.zeros(10))
    with pytest.raises(TypeError, match=r"^result must be an Emulation, not list$"):
        error_metrics([1, 2])
