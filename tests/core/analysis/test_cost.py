"""Analytic hardware cost: CSD adders, hard multipliers, tables, blocks, registers."""

import math

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import hardware_cost


def test_table_memory_of_a_3_3_1_network(net):
    # 2^address_bits x data_bits per table (common practice): 16384 x 8 = 131072 bits; four tables 524288
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=18, out_bits=8, table_bits=14, table_frac=9)
    c = hardware_cost(net, plan)
    assert [L.table_bits for L in c.layers] == [3 * 131072, 131072]
    assert c.table_bits == 524288
    # whole blocks of 18432 bits per table: ceil(131072 / 18432) = 8 (common practice)
    assert c.table_blocks == 4 * 8
    assert hardware_cost(net, plan, block_bits=36864).table_blocks == 4 * 4


def test_csd_adders_and_tree_by_hand():
    net = fw.Network.from_layers([([[7.0, 23.0, 0.0], [1.0, -5.0, 64.0]], [1.0, 0.0], "relu")])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=0, acc_bits=20, out_bits=8, out_frac=0)
    c = hardware_cost(net, plan, pipeline_stages=0)
    L = c.layers[0]
    # CSD digits (Wanhammar 11.3.2): 7 -> 2, 23 -> 3, 1 -> 1, -5 -> 2, 64 -> 1
    assert L.weight_digits == ((2, 3, 0), (1, 2, 1))
    assert L.csd_digits == 9
    # adders per constant = digits - 1 (Parhi 13.6): 1 + 2 + 0 + 1 + 0
    assert L.product_adders == 4
    # trees by hand: neuron 0 has 2 weights + a bias = 3 terms -> 2 adders; neuron 1 has 3 terms -> 2
    assert L.tree_adders == 4 and L.adders == 8 and L.multipliers == 0
    assert L.tables == 0 and L.table_bits == 0 and L.register_bits == 0
    assert L.adder_bits == 8 * 20


def test_hard_multipliers():
    net = fw.Network.from_layers([([[0.5, -0.25, 0.0]], [0.0], "sigmoid")])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, out_bits=8, table_bits=10, table_frac=6)
    # 8-bit weight x 9-bit (8-bit unsigned input made signed) fits one 18x18 multiplier; zero weights need none
    c = hardware_cost(net, plan, multipliers="hard")
    assert c.multipliers == 2 and c.layers[0].product_adders == 0 and c.layers[0].tree_adders == 1
    wide = fw.Plan.uniform(net, weight_bits=20, weight_frac=17, acc_bits=30, out_bits=8, table_bits=10, table_frac=6)
    # by hand: ceil(20/18) * ceil(9/18) = 2 per weight
    assert hardware_cost(net, wide, multipliers="hard").multipliers == 4
    # a 25x18 multiplier takes the 20-bit weight on its 25-bit side: 1 each
    assert hardware_cost(net, wide, multipliers="hard", multiplier_size=(25, 18)).multipliers == 2


def test_registers_tree_width_and_totals(net):
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=18, out_bits=8, table_bits=14, table_frac=9)
    c3 = hardware_cost(net, plan, pipeline_stages=3)
    # by hand: output 8 + accumulator 18 + table address 14 = 40 bits per neuron
    assert [L.register_bits for L in c3.layers] == [3 * 40, 1 * 40]
    c5 = hardware_cost(net, plan, pipeline_stages=5)
    assert [L.register_bits for L in c5.layers] == [3 * (40 + 2 * 18), 40 + 2 * 18]
    assert c3.latency == 6 and c5.latency == 10
    sat = plan.replace(acc_bits=10, acc_overflow="saturate")
    safe = [int(np.max(L.safe_acc_bits)) for L in fw.build_integer_network(net, sat).layers]
    assert [L.tree_width for L in hardware_cost(net, sat).layers] == [max(10, s) for s in safe]
    assert [L.tree_width for L in hardware_cost(net, plan.replace(acc_bits=10)).layers] == [10, 10]
    t = c3.totals()
    assert t["total_bits"] == t["adder_bits"] + t["register_bits"] + t["table_bits"]
    assert t["adders"] == sum(L.adders for L in c3.layers)
    assert c3.value("table_blocks") == sum(math.ceil(16384 * 8 / 18432) for _ in range(4))
    text = c3.summary()
    assert text.splitlines()[0].startswith("hardware cost (constant weights as CSD shift-and-add;")
    assert c3.to_dict()["totals"] == t


def test_cost_bad_input(net, plan):
    with pytest.raises(ValueError, match=r"^multipliers must be one of csd, hard, not 'soft'$"):
        hardware_cost(net, plan, multipliers="soft")
    with pytest.raises(ValueError, match=r"^block_bits must be at least 1, not 0$"):
        hardware_cost(net, plan, block_bits=0)
    with pytest.raises(TypeError, match=r"^pipeline_stages must be an integer, not 2\.5$"):
        hardware_cost(net, plan, pipeline_stages=2.5)
    with pytest.raises(TypeError, match=r"^multiplier_size must be a pair of integers, not 18$"):
        hardware_cost(net, plan, multiplier_size=18)
    with pytest.raises(ValueError, match=r"^cost must be one of total_bits, .*, not 'area'$"):
        hardware_cost(net, plan).value("area")
