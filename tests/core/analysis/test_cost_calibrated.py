"""Calibrated cost keys (``luts``, ``ffs``, ``brams``): the structural counts, the fit, the search keys.

The counts are checked against Yosys 0.23's own netlists of generated designs (block
names and shapes it chose, quoted beside each check) and against worked examples of
the folding rules; the tool runs themselves are in ``tests/core/test_synth_calibration.py``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from fxnet_widgets.core.analysis.cost import CALIBRATED_KEYS, COST_KEYS, hardware_cost
from fxnet_widgets.core.analysis.search.tuning import TUNE_MOVES
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.core.starting import start_plan
from fxnet_widgets.core.synth.calibration import (
    LUT_FEATURES,
    calibration_plans,
    calibrations,
    datapath_structure,
    fit,
    fit_relative,
)
from fxnet_widgets.core.synth.mapping import ROM_RULES, _bram, dsp_count

NET = Network.from_layers(
    [([[9.2, -12.4, -2.9], [8.9, -11.6, -3.2], [-9.4, 12.8, 2.8]], [-0.36, -0.36, 0.4], "sigmoid"),
     ([[6.1, 5.7, -6.3]], [-2.9], "sigmoid")], classes=["other", "ripe"],
)  # fmt: skip
ICE40, X7 = ROM_RULES["ice40"], ROM_RULES["xilinx-7"]


def test_block_ram_layout_follows_the_netlists_yosys_writes():
    every = np.arange(16384)
    # Yosys 0.23 synth_xilinx, a 16384 x 12 ROM: 11 RAMB18E1 with READ_WIDTH_A 9 (2048 x 9 blocks,
    # eight 12-bit words side by side in a 96-bit row); 16384x1 blocks would take 12
    assert _bram(16384, 12, list(range(12)), X7, every)[:2] == (11 * 129, 11)
    # ... a 16384 x 10 ROM whose address has bit 13 free and bits 12..10 one net (a sign bit and its
    # copies): blocks l1_n0_code_table.0.0 .. .0.8, of which .0.2 and .0.6 were removed (no word reached)
    reach = np.array([a for a in every if (a >> 10) & 7 in (0, 7)])
    assert _bram(16384, 10, list(range(10)), X7, reach)[:2] == (9 * 129, 7)
    # ... a 16384 x 11 ROM: five RAMB36E1 of 4096 x 9 (cost 5 x 257 = 1285 < 10 RAMB18 at 1290), ten RAMB18
    # counted; its address reaches every 4096-word slice, so none is removed
    slices = np.array([a for a in every if (a >> 11) & 3 in (0, 3)])
    assert _bram(16384, 11, list(range(11)), X7, slices)[:2] == (5 * 257, 10)
    # Yosys 0.23 synth_ice40, a 16384 x 11 ROM: blocks numbered .0.0 .. .0.43 (44 SB_RAM40_4K, eight
    # 11-bit words in an 88-bit row of 2048 x 2 blocks), not 8 x 6 = 48
    assert _bram(16384, 11, list(range(11)), ICE40, every)[0] == 44 * 64
    # a 1024 x 12 ROM: three 1024 x 4 blocks (iCE40 TN1250 shapes; from memory)
    assert _bram(1024, 12, list(range(12)), ICE40, np.arange(1024))[:2] == (3 * 64, 3)
    # Yosys 0.23 keeps a memory's whole word though only its low bits are read (the RTLIL before
    # memory_libmap: RD_DATA {unused[8:6], code[5:0]}): a 16384 x 9 ROM read in 6 bits is laid out as
    # 9-bit words, four RAMB36E1 of 4096 x 9 (cost 4 x 257 < 8 RAMB18 at 8 x 129), each block holding
    # read bits of its own word, so all four stay (eight RAMB18); a 6-bit word would pack into three
    assert _bram(16384, 9, list(range(6)), X7, every)[:2] == (4 * 257, 8)
    # ... and a block holding only unread bits of the reached words goes: 1024 x 12 on iCE40 in three
    # 1024 x 4 blocks, the low 4 bits read, leaves one
    assert _bram(1024, 12, list(range(4)), ICE40, np.arange(1024))[:2] == (3 * 64, 1)


def test_dsp_rule_of_mul2dsp():
    # synth_ice40 -dsp runs mul2dsp with 16x16 blocks, least widths 2, 2 and 11 (synth_ice40 help, Yosys 0.23)
    assert dsp_count("ice40-up5k", 9, 12, 20) == 1 and dsp_count("ice40-up5k", 9, 12, 10) == 0
    assert dsp_count("ice40-up5k", 20, 12, 32) == 2
    assert dsp_count("ice40-hx8k", 9, 12, 20) == 0  # no DSP blocks on the HX parts (DS1040)
    # 25 x 18 DSP48E1 (7 Series DSP48E1 User Guide, UG479; from memory)
    assert dsp_count("xilinx-7", 9, 12, 20) == 1 and dsp_count("xilinx-7", 9, 1, 20) == 0
    assert dsp_count("xilinx-7", 30, 12, 40) == 2


def test_a_design_the_tools_fold_away_counts_nothing():
    # the first calibration plan of the demo network (2-bit layer-1 weights, a 3-bit layer-2 table):
    # Yosys 0.23 gave 0 LUTs, 15 flip-flops (the valid pipeline) and no block RAM on both targets
    demo = Network.load(Path(__file__).resolve().parents[3] / "assets" / "network.json")
    plan = calibration_plans(demo, 1, seed=0)[0]
    for target in ("ice40-up5k", "xilinx-7"):
        s = datapath_structure(demo, plan, target)
        assert s.features() == (0.0,) * len(LUT_FEATURES) and s.brams == 0 and s.reg_bits == 15


def test_a_neuron_nothing_reads_costs_nothing():
    # layer 2 weight 0 on neuron 3: its adders, table and registers are dead logic (Yosys removes them)
    plan = Plan.uniform(NET, weight_bits=8, weight_frac=4, acc_bits=18, out_bits=8, table_bits=8, table_frac=4)
    w1, b1, a1 = NET.layers[0].weights, NET.layers[0].bias, NET.layers[0].activation
    w2 = np.array(NET.layers[1].weights, dtype=float)
    w2[0, 2] = 0.0
    cut = Network.from_layers([(w1, b1, a1), (w2, NET.layers[1].bias, "sigmoid")], classes=NET.classes)
    two = Network.from_layers([(np.asarray(w1)[:2], np.asarray(b1)[:2], a1),
                               (w2[:, :2], NET.layers[1].bias, "sigmoid")], classes=NET.classes)  # fmt: skip
    a, b = datapath_structure(cut, plan, "ice40-up5k"), datapath_structure(two, plan, "ice40-up5k")
    assert a.features() == b.features() and a.brams == b.brams and a.add_bits > 0


def test_identical_products_are_one_net():
    # neurons 1 and 2 of layer 1 with equal weights compute equal products: opt_merge keeps one copy
    plan = Plan.uniform(NET, weight_bits=8, weight_frac=4, acc_bits=18, out_bits=8, table_bits=8, table_frac=4)
    w1 = np.array(NET.layers[0].weights, dtype=float)
    b1 = np.array(NET.layers[0].bias, dtype=float)
    base = Network.from_layers([(w1, b1, "sigmoid"), (NET.layers[1].weights, NET.layers[1].bias, "sigmoid")])
    w1[1], b1[1] = w1[0], b1[0]
    same = Network.from_layers([(w1, b1, "sigmoid"), (NET.layers[1].weights, NET.layers[1].bias, "sigmoid")])
    s_base, s_same = datapath_structure(base, plan, "xilinx-7"), datapath_structure(same, plan, "xilinx-7")
    assert s_same.add_bits < s_base.add_bits


def test_the_fit_recovers_a_linear_law_and_ignores_one_odd_design():
    # least absolute relative error: on an exact law plus one far-off design, the law comes back
    rng = np.random.default_rng(4)
    X = rng.uniform(10, 500, size=(20, 3))
    y = X @ np.array([0.8, 0.3, 1.5])
    y[5] *= 3.0
    assert fit_relative(X, y) == pytest.approx([0.8, 0.3, 1.5], rel=1e-3)
    # a coefficient that would be negative is 0
    c = fit_relative(np.c_[X[:, :1], -X[:, :1] + 600], X[:, 0] * 0.5)
    assert c[1] == 0 and c[0] == pytest.approx(0.5, rel=1e-3)


def test_fit_from_measured_counts():
    plans = calibration_plans(NET, 6, seed=3)
    feats = [datapath_structure(NET, p, "xilinx-7") for p in plans]
    coef = np.array([0.5, 0.2, 0.4, 0.0, 0.9, 0.3])
    rows = [(NET, p, {"luts": round(float(coef @ s.features())), "ffs": round(0.8 * s.reg_bits), "brams": s.brams})
            for p, s in zip(plans, feats)]  # fmt: skip
    cal = fit("xilinx-7", rows, {"yosys": "test"}, "6 plans, seed 3")
    for net, p, m in rows:
        e = cal.estimate(net, p)
        assert abs(e["luts"] - m["luts"]) <= max(2, 0.01 * m["luts"]) and abs(e["ffs"] - m["ffs"]) <= 2
        assert e["brams"] == m["brams"] and e["dsps"] == 0  # shift-add: no multiplier at all
    with pytest.raises(ValueError, match=r"^a calibration must have at least 3 designs, not 2$"):
        fit("xilinx-7", rows[:2], {}, "")


def test_calibration_plans_are_tune_walks_from_the_start_plan():
    a, b = calibration_plans(NET, 5, seed=1), calibration_plans(NET, 7, seed=1)
    assert a == b[:5] and len(TUNE_MOVES) == 7
    base = start_plan(NET)
    for p in b:
        p.check(NET)
        for q, s in zip(p.layers, base.layers):  # tune moves only narrow
            assert q.weight_bits <= s.weight_bits and q.acc_bits <= s.acc_bits and q.out_bits <= s.out_bits
            assert q.table_bits is not None and s.table_bits is not None and q.table_bits <= s.table_bits
        assert len({q.acc_overflow for q in p.layers}) == 1  # one overflow mode per plan


def test_calibrated_keys_are_cost_keys_and_totals_keep_their_keys():
    assert set(CALIBRATED_KEYS) <= set(COST_KEYS)
    plan = calibration_plans(NET, 1, seed=0)[0]
    cost = hardware_cost(NET, plan, target="generic")
    assert not set(CALIBRATED_KEYS) & set(cost.totals())
    cals = calibrations()
    assert {"ice40-up5k", "xilinx-7"} <= set(cals)
    with pytest.raises(ValueError, match=r"^target must be one of the calibrated targets \(.*\), not 'generic'$"):
        cost.value("luts")
    for target, cal in cals.items():
        c = hardware_cost(NET, plan, target=target)
        e = cal.estimate(NET, plan)
        assert {k: c.value(k) for k in CALIBRATED_KEYS} == {k: e[k] for k in CALIBRATED_KEYS}
        assert c.estimated() == e and set(e) == {"luts", "ffs", "brams", "dsps"}
        assert cal.n_designs >= 3 and cal.tools["yosys"].startswith("Yosys ")
        assert len(cal.luts) == len(LUT_FEATURES) and min(cal.luts) >= 0 and cal.ffs > 0
