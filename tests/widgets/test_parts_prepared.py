"""A session's refreshes reuse the kernel's decomposition of a read-only frame (widgets/parts.py)."""

import numpy as np

import fxnet_widgets as fw
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.core.kernel.evaluate import Prepared
from fxnet_widgets.widgets import parts


def _net_plan():
    net = fw.Network.from_layers([([[2.0, -1.0, 0.5]], [-0.5], "sigmoid")])
    return net, fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=12, table_frac=8, out_bits=8)


def test_read_only_owner_is_prepared_once_and_gives_the_same_result():
    net, plan = _net_plan()
    frame = np.random.default_rng(2).integers(0, 256, (48, 64, 3), dtype=np.uint8)
    frame.setflags(write=False)
    first = parts._prepared(frame, 8, 3)
    assert isinstance(first, Prepared) and parts._prepared(frame, 8, 3) is first
    # the same figures as the frame itself, shape included (the kernel's equality by value)
    a, b = emulate(net, plan, first), emulate(net, plan, frame.copy())
    assert a.decisions.shape == (48, 64)
    assert np.array_equal(a.decisions, b.decisions) and np.array_equal(a.out_codes, b.out_codes)


def test_arrays_that_can_change_go_to_the_kernel_as_they_are():
    frame = np.zeros((8, 8, 3), dtype=np.uint8)
    assert parts._prepared(frame, 8, 3) is frame  # writeable
    ro = frame.copy()
    ro.setflags(write=False)
    view = ro[::2]
    assert parts._prepared(view, 8, 3) is view  # a view: its owner decides whether it changes
