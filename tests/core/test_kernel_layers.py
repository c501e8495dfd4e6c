"""The integer network's records: one format per stage, the event names, ``Layer.has_table``."""

from __future__ import annotations

import pytest
from fxhand import hand_network

import fxnet_widgets as fw
from fxnet_widgets.core import kernel
from fxnet_widgets.core.kernel import Bounds, CodeFormat


@pytest.mark.parametrize(("activation", "table"), [("sigmoid", True), ("tanh", True), ("relu", False),
                                                   ("identity", False)])  # fmt: skip
def test_layer_has_table_follows_the_contract(activation, table):
    # semantics.md step 6: sigmoid and tanh are tables; step 7: relu and identity need none
    L = fw.Network.from_layers([([[1.0]], [0.0], activation)]).layers[0]
    assert L.has_table is table


def test_stage_formats_of_the_hand_network():
    # tests/core/test_kernel.py's hand-worked plan: 8-bit inputs (frac 8, codes 0..255), weights at
    # 5 fraction bits, a 14-bit table index with 9 fraction bits, 8-bit unsigned sigmoid output
    # with Fo = 8 (semantics.md, step 7 defaults)
    net = hand_network(classes=["other", "ripe"])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=14, table_frac=9, out_bits=8)
    L = kernel.build_integer_network(net, plan).layers[0]
    assert L.inputs == CodeFormat(8, 0, 255)
    assert L.address == CodeFormat(9, -8192, 8191)
    assert L.output == CodeFormat(8, 0, 255, signed=False)
    assert L.reachable == CodeFormat(8, int(L.table.min()), int(L.table.max()), signed=False)
    assert isinstance(L.sums, Bounds) and len(L.sums.lo) == L.n_out
    # the shorthands read the records
    assert (L.index_min, L.index_max, L.out_frac, L.code_min) == (-8192, 8191, 8, L.reachable.lo)
    assert (L.sum_min, L.safe_max) == (L.sums.lo, L.safe.hi)
    # layer 2 reads layer 1's reachable codes
    assert kernel.build_integer_network(net, plan).layers[1].inputs == CodeFormat(8, L.reachable.lo, L.reachable.hi)


def test_event_names_in_the_contract_order():
    # semantics.md, "Emulation result": acc_overflow, table_low, table_high per sample; weight_clip static
    assert kernel.DATA_EVENTS == ("acc_overflow", "table_low", "table_high")
    assert kernel.EVENT_NAMES == kernel.DATA_EVENTS + ("weight_clip", "bias_clip")
