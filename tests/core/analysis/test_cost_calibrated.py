"""Calibrated cost keys (``luts``, ``ffs``, ``brams``): block shapes, the fit, and the search keys."""

from __future__ import annotations

import pytest

from fxnet_widgets.core.analysis.cost import CALIBRATED_KEYS, COST_KEYS, hardware_cost
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.core.synth.calibration import (
    CANDIDATES,
    FEATURES,
    _blocks,
    _shapes,
    block_rams,
    calibration_plans,
    calibrations,
    features,
    fit,
)

NET = Network.from_layers(
    [([[9.2, -12.4, -2.9], [8.9, -11.6, -3.2], [-9.4, 12.8, 2.8]], [-0.36, -0.36, 0.4], "sigmoid"),
     ([[6.1, 5.7, -6.3]], [-2.9], "sigmoid")], classes=["other", "ripe"],
)  # fmt: skip


def test_block_shapes_follow_the_memory_guides():
    ice40, x7 = _shapes("ice40-up5k"), _shapes("xilinx-7")
    # iCE40 SB_RAM40_4K: 4 kbit as 256x16, 512x8, 1024x4 or 2048x2 (Lattice TN1250; from memory)
    assert _blocks(256, 16, ice40) == 1 and _blocks(512, 8, ice40) == 1 and _blocks(2048, 2, ice40) == 1
    assert _blocks(16384, 8, ice40) == 32  # 128 kbit in 4 kbit blocks
    assert _blocks(1024, 5, ice40) == 2  # 1024 deep is 4 bits wide: two blocks for 5 bits
    # Xilinx 7 RAMB18: 18 kbit, 2048x9 or 1024x18 ... (7 Series Memory Resources UG473; from memory)
    assert _blocks(2048, 9, x7) == 1 and _blocks(1024, 18, x7) == 1 and _blocks(16384, 8, x7) == 8
    assert _shapes("generic") == ()


def test_tables_below_the_threshold_count_as_logic():
    plan = Plan.uniform(NET, weight_bits=8, weight_frac=4, acc_bits=18, out_bits=8, table_bits=8, table_frac=4)
    cost = hardware_cost(NET, plan)
    # four tables of 256 x 8 = 2048 bits, each one iCE40 block (512x8 shape) when big enough for a block
    assert block_rams(cost, "ice40-up5k", 2048) == 4 and block_rams(cost, "ice40-up5k", 2049) == 0
    f = dict(zip(FEATURES, features(cost, "ice40-up5k", 2049)))
    assert f["lut_table_bits"] == 4 * 2048 and f["adder_bits"] == cost.adder_bits
    assert f["register_bits"] == cost.register_bits and f["acc_bits"] == 3 * 18 + 18


def test_the_fit_recovers_a_proportional_law():
    plans = calibration_plans(NET, 12, seed=3)
    rows = []
    for p in plans:
        f = dict(zip(FEATURES, features(hardware_cost(NET, p), "xilinx-7", 2**62)))
        rows.append((NET, p, {"luts": round(0.75 * f["adder_bits"]), "ffs": round(1.25 * f["register_bits"]),
                              "brams": 0}))  # fmt: skip
    cal = fit("xilinx-7", rows, {"yosys": "test"}, "12 plans, seed 3")
    assert cal.min_bram_bits == 2**62  # no measured block RAM: every table is logic
    assert cal.luts[0] == "adder_bits" and cal.luts[1] == pytest.approx(0.75, rel=0.01)
    assert cal.ffs[0] == "register_bits" and cal.ffs[1] == pytest.approx(1.25, rel=0.01)
    for net, p, m in rows:
        e = cal.estimate(net, p)
        assert abs(e["luts"] - m["luts"]) <= 1 and abs(e["ffs"] - m["ffs"]) <= 1 and e["brams"] == 0
    with pytest.raises(ValueError, match=r"^a calibration must have at least 3 designs, not 2$"):
        fit("xilinx-7", rows[:2], {}, "")


def test_calibration_plans_are_seeded_and_valid():
    a, b = calibration_plans(NET, 5, seed=1), calibration_plans(NET, 7, seed=1)
    assert a == b[:5] and len(set(a)) == 5
    for p in a:
        p.check(NET)
        assert all(3 <= L.weight_bits <= 12 and 1 <= L.out_bits <= 10 for L in p.layers)


def test_calibrated_keys_are_cost_keys_and_totals_keep_their_keys():
    assert set(CALIBRATED_KEYS) <= set(COST_KEYS)
    plan = calibration_plans(NET, 1, seed=0)[0]
    cost = hardware_cost(NET, plan, target="generic")
    assert not set(CALIBRATED_KEYS) & set(cost.totals())
    cals = calibrations()
    with pytest.raises(ValueError, match=r"^target must be one of the calibrated targets \(.*\), not 'generic'$"):
        cost.value("luts")
    for target, cal in cals.items():
        c = hardware_cost(NET, plan, target=target)
        assert {k: c.value(k) for k in CALIBRATED_KEYS} == cal.estimate(NET, plan)
        assert cal.n_designs >= 3 and cal.tools["yosys"].startswith("Yosys ")
        assert cal.luts[0] in CANDIDATES and cal.ffs[0] in CANDIDATES and cal.luts[1] > 0
