"""tune: budget, local minimality, determinism across executors, a start that must meet the budget."""

import concurrent.futures as cf
from dataclasses import replace

import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import SerialExecutor, hardware_cost, tune
from fxnet_widgets.core.plan import INT_LIMITS


def _one_bit_reductions(net, plan):
    """Every way of making one width one bit narrower (the moves tune documents)."""
    for i, (lp, L) in enumerate(zip(plan.layers, net.layers)):
        table = L.activation in ("sigmoid", "tanh")
        options = [
            {"weight_bits": lp.weight_bits - 1, "weight_frac": lp.weight_frac - 1},
            {"weight_bits": lp.weight_bits - 1},
            {"acc_bits": lp.acc_bits - 1},
            {"out_bits": lp.out_bits - 1},
        ]
        if table:
            options += [{"table_bits": lp.table_bits - 1, "table_frac": lp.table_frac - 1},
                        {"table_bits": lp.table_bits - 1}]  # fmt: skip
        for v in options:
            yield i, v


def test_tune_meets_budget_and_is_locally_minimal(net, codes):
    budget = 0.01
    res = tune(net, codes, budget, executor=SerialExecutor())
    r = fw.emulate(net, res.plan, codes)
    assert r.mismatch / len(codes) <= budget and r.event_totals()["acc_overflow"] == 0
    assert res.verified and res.local_minimum
    assert res.metrics.mismatch == r.mismatch and res.cost.total_bits < hardware_cost(net, res.start).total_bits
    checked = 0
    for i, v in _one_bit_reductions(net, res.plan):
        if any(not INT_LIMITS[k][0] <= x <= INT_LIMITS[k][1] for k, x in v.items()):
            continue  # impossible
        narrower = fw.Plan(tuple(replace(lp, **v) if j == i else lp for j, lp in enumerate(res.plan.layers)))
        try:
            e = fw.emulate(net, narrower, codes)
        except ValueError:
            continue  # impossible (refused by the kernel)
        assert e.mismatch / len(codes) > budget or e.event_totals()["acc_overflow"] > 0, (i, v)
        checked += 1
    assert checked >= 6
    text = res.summary()
    assert text.splitlines()[0] == "tune: budget 0.01 of decisions may differ from float, no accumulator overflow"
    assert res.to_dict()["plan"] == res.plan.to_dict()


def test_tune_is_deterministic_across_executors(net, codes):
    small = codes[:1500]
    a = tune(net, small, 0.02, executor=SerialExecutor())
    with cf.ProcessPoolExecutor(max_workers=2) as ex:
        b = tune(net, small, 0.02, executor=ex)
    assert a.plan == b.plan and a.steps == b.steps and a.records == b.records


def test_tune_start_must_meet_budget(net, codes):
    bad = fw.Plan.uniform(net, weight_bits=2, weight_frac=0, acc_bits=12, out_bits=2, table_bits=2, table_frac=0)
    msg = (r"^the starting plan must meet the budget \(max_mismatch 0, no accumulator overflow\), "
           r"not .* of decisions differ from float \(or agree only through a tie\) and 0 accumulator overflows; "
           r"give a wider start$")
    with pytest.raises(ValueError, match=msg):
        tune(net, codes, 0, start=bad, executor=SerialExecutor())
    with pytest.raises(ValueError, match=r"^max_mismatch must be between 0 and 1, not 2$"):
        tune(net, codes, 2)
