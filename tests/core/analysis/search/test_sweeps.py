"""Sweeps: grid order, contents, keep_range, one layer, refused plans, bad input."""

import itertools

import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import (
    SerialExecutor,
    error_metrics,
    evaluate_plans,
    hardware_cost,
    pareto_front,
    sweep,
)


def test_sweep_order_and_contents(net, codes, grid, records):
    combos = list(itertools.product(grid["weight_frac"], grid["table_bits"]))
    assert [r.index for r in records] == list(range(len(combos)))
    assert [dict(r.settings) for r in records] == [{"weight_frac": a, "table_bits": b} for a, b in combos]
    for r in records:
        assert r.ok and all(lp.weight_frac == dict(r.settings)["weight_frac"] for lp in r.plan.layers)
        # safe_acc: every accumulator at its guaranteed-safe width, hence no overflow
        intnet = fw.build_integer_network(net, r.plan)
        assert [lp.acc_bits for lp in r.plan.layers] == [int(L.safe_acc_bits.max()) for L in intnet.layers]
        assert r.events["acc_overflow"] == 0
        m = error_metrics(fw.emulate(net, r.plan, codes))
        assert (r.mismatch, r.mismatch_fraction) == (m.mismatch, m.mismatch_fraction)
        assert r.cost == hardware_cost(net, r.plan).total_bits == r.costs["total_bits"]
    assert records[0].to_dict()["settings"] == {"weight_frac": 1, "table_bits": 5}


def test_keep_range(net, codes, plan):
    recs = sweep(net, codes, {"table_bits": [6, 9], "weight_frac": [2, 30]}, base=plan, executor=SerialExecutor())
    for r in (recs[0], recs[2]):
        tb = dict(r.settings)["table_bits"]
        assert all(lp.table_bits - lp.table_frac == 10 - 6 and lp.table_bits == tb for lp in r.plan.layers)
        assert all(lp.weight_bits - lp.weight_frac == 8 - 4 for lp in r.plan.layers)
    # weight_frac 30 needs weight_bits 8 + 30 - 4 = 34: beyond the 32-bit limit
    assert not recs[1].ok and recs[1].error == "layers[0].weight_bits must be between 1 and 32, not 34"
    assert recs[1].plan == plan and [r.ok for r in recs] == [True, False, True, False]
    free = sweep(net, codes, {"table_bits": [6]}, base=plan, keep_range=False, executor=SerialExecutor())
    assert free[0].plan.layers[0].table_frac == plan.layers[0].table_frac


def test_sweep_one_layer(net, codes, plan):
    recs = sweep(net, codes, {"out_bits": [3, 5]}, base=plan, layer=0, safe_acc=False, executor=SerialExecutor())
    assert [r.plan for r in recs] == [plan.replace(layer=0, out_bits=3), plan.replace(layer=0, out_bits=5)]


def test_refused_plans_are_recorded_and_left_off_the_front(codes):
    # a bias of 2^20 at 8 + 40 fraction bits needs a 70-bit accumulator: more than the 62-bit limit
    big = fw.Network.from_layers([([[1.0, 1.0, 1.0]], [2.0**20], "sigmoid")])
    recs = sweep(big, codes, {"weight_bits": [32], "weight_frac": [40, 4]}, executor=SerialExecutor())
    assert not recs[0].ok and recs[0].error == "acc_bits must be between 1 and 62, not 70" and recs[0].cost is None
    assert recs[1].ok and pareto_front(recs) == [recs[1]]


def test_evaluate_plans_and_bad_input(net, codes, grid, plan):
    (r,) = evaluate_plans(net, codes, [plan], executor=SerialExecutor())
    assert r.plan == plan and r.mismatch == fw.emulate(net, plan, codes).mismatch
    with pytest.raises(ValueError, match=r"^cost must be one of total_bits, .*, not 'gates'$"):
        sweep(net, codes, grid, cost="gates")
    with pytest.raises(ValueError, match=r"^grid values of table_bits must be between 1 and 20, not 21$"):
        sweep(net, codes, {"table_bits": [21]})
    msg = r"^executor must be a concurrent\.futures\.Executor or a dask Client, not int$"
    with pytest.raises(TypeError, match=msg):
        sweep(net, codes, grid, executor=3)
    with pytest.raises(ValueError, match=r"^layer must be None or an index from 0 to 1, not 5$"):
        sweep(net, codes, grid, layer=5)
