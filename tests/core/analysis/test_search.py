"""Sweeps, the Pareto front and tune: order, determinism across executors, budget, minimality."""

import concurrent.futures as cf
import io
import itertools
import os
from dataclasses import replace

import pytest
from hypothesis import given
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import (
    SerialExecutor,
    error_metrics,
    evaluate_plans,
    hardware_cost,
    pareto_front,
    parse_grid,
    search,
    start_plan,
    sweep,
    text_progress,
    tune,
)
from fxnet_widgets.core.plan import INT_LIMITS

GRID = {"weight_frac": [1, 2, 3, 4], "table_bits": [5, 6, 7, 8, 9]}


@pytest.fixture(scope="module")
def records(net, codes):
    return sweep(net, codes, GRID, executor=SerialExecutor())


def test_parse_grid():
    assert parse_grid("weight_frac=3:8,table_bits=8:14:3") == {
        "weight_frac": [3, 4, 5, 6, 7, 8], "table_bits": [8, 11, 14]}  # fmt: skip
    assert parse_grid(" out_bits=6|8 , acc_overflow=wrap|saturate") == {
        "out_bits": [6, 8], "acc_overflow": ["wrap", "saturate"]}  # fmt: skip
    with pytest.raises(ValueError, match=r"^grid field must be a plan key \(weight_bits, .*\), not 'bits'$"):
        parse_grid("bits=3:4")
    with pytest.raises(ValueError, match=r"^grid item must be FIELD=VALUES, not 'weight_frac'$"):
        parse_grid("weight_frac")
    msg = r"^grid values of table_bits must be A:B, A:B:STEP \(STEP > 0\) or V1\|V2 integers, not '8:x'$"
    with pytest.raises(ValueError, match=msg):
        parse_grid("table_bits=8:x")
    with pytest.raises(ValueError, match=r"^grid values of table_bits must not be empty, not '9:8'$"):
        parse_grid("table_bits=9:8")
    with pytest.raises(ValueError, match=r"^grid field 'out_bits' is given twice$"):
        parse_grid("out_bits=4,out_bits=5")


def test_sweep_order_and_contents(net, codes, records):
    combos = list(itertools.product(GRID["weight_frac"], GRID["table_bits"]))
    assert [r.index for r in records] == list(range(len(combos)))
    assert [dict(r.settings) for r in records] == [{"weight_frac": a, "table_bits": b} for a, b in combos]
    for r in records:
        assert r.ok and all(lp.weight_frac == dict(r.settings)["weight_frac"] for lp in r.plan.layers)
        # safe_acc: every accumulator at its guaranteed-safe width, hence no overflow
        intnet = fw.quantise(net, r.plan)
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


def test_pareto_front_has_no_dominated_point(records):
    front = pareto_front(records)
    assert front and [r.cost for r in front] == sorted(r.cost for r in front)

    def dominates(a, b):
        return a.cost <= b.cost and a.mismatch <= b.mismatch and (a.cost < b.cost or a.mismatch < b.mismatch)

    for f in front:
        assert not any(dominates(r, f) for r in records)
    for r in records:
        if r not in front:
            assert any(dominates(f, r) or (f.cost, f.mismatch) == (r.cost, r.mismatch) for f in front)


def test_refused_plans_are_recorded_and_left_off_the_front(codes):
    # a bias of 2^20 at 8 + 40 fraction bits needs a 70-bit accumulator: more than the 62-bit limit
    big = fw.Network.from_layers([([[1.0, 1.0, 1.0]], [2.0**20], "sigmoid")])
    recs = sweep(big, codes, {"weight_bits": [32], "weight_frac": [40, 4]}, executor=SerialExecutor())
    assert not recs[0].ok and recs[0].error == "acc_bits must be between 1 and 62, not 70" and recs[0].cost is None
    assert recs[1].ok and pareto_front(recs) == [recs[1]]


def test_executors_give_identical_records(net, codes, records):
    with cf.ProcessPoolExecutor(max_workers=2) as ex:
        assert sweep(net, codes, GRID, executor=ex) == records
    with cf.ThreadPoolExecutor(max_workers=2) as ex:
        assert sweep(net, codes, GRID, executor=ex) == records
    assert sweep(net, codes, GRID) == records  # default policy: small work runs in this process


def test_default_local_pool(net, codes, records, monkeypatch):
    monkeypatch.setattr(search, "INLINE_WORK", 0)  # force the default local process pool
    made = []
    real = search._local_pool
    monkeypatch.setattr(search, "_local_pool", lambda n: made.append(n) or real(n))
    assert sweep(net, codes, GRID) == records
    assert made == [os.cpu_count()]


def test_progress_callback(net, codes):
    calls = []
    sweep(net, codes, {"table_bits": [5, 6, 7]}, executor=SerialExecutor(), progress=lambda d, t: calls.append((d, t)))
    assert calls[0] == (0, 3) and calls[-1] == (3, 3)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
    buf = io.StringIO()
    bar = text_progress(buf, width=10)
    bar(2, 4)
    bar(4, 4)
    assert buf.getvalue() == "\r[#####.....] 2/4 plans\r[##########] 4/4 plans\n"


def test_evaluate_plans_and_bad_input(net, codes, plan):
    (r,) = evaluate_plans(net, codes, [plan], executor=SerialExecutor())
    assert r.plan == plan and r.mismatch == fw.emulate(net, plan, codes).mismatch
    with pytest.raises(ValueError, match=r"^cost must be one of total_bits, .*, not 'luts'$"):
        sweep(net, codes, GRID, cost="luts")
    with pytest.raises(ValueError, match=r"^grid values of table_bits must be between 1 and 20, not 21$"):
        sweep(net, codes, {"table_bits": [21]})
    msg = r"^executor must be a concurrent\.futures\.Executor or a dask Client, not int$"
    with pytest.raises(TypeError, match=msg):
        sweep(net, codes, GRID, executor=3)
    with pytest.raises(ValueError, match=r"^layer must be None or an index from 0 to 1, not 5$"):
        sweep(net, codes, GRID, layer=5)


def test_start_plan_cannot_overflow(net, codes):
    p = start_plan(net)
    intnet = fw.quantise(net, p)
    assert [lp.acc_bits for lp in p.layers] == [int(L.safe_acc_bits.max()) for L in intnet.layers]
    assert all(lp.weight_bits == 16 for lp in p.layers)
    assert fw.emulate(net, p, codes).event_totals()["weight_clip"] == 0
    # the largest weight_frac without a clip: one more fraction bit would clip (by construction)
    more = p.replace(layer=0, weight_frac=p.layers[0].weight_frac + 1)
    assert fw.quantise(net, more).layers[0].weight_clip.sum() > 0


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
           r"not .* of decisions differ from float and 0 accumulator overflows; give a wider start$")
    with pytest.raises(ValueError, match=msg):
        tune(net, codes, 0, start=bad, executor=SerialExecutor())
    with pytest.raises(ValueError, match=r"^max_mismatch must be between 0 and 1, not 2$"):
        tune(net, codes, 2)


@given(st.lists(st.tuples(st.integers(0, 20), st.integers(0, 20)), min_size=1, max_size=40))
def test_pareto_front_property(points):
    plan = fw.Plan((fw.LayerPlan(weight_bits=8, weight_frac=4, acc_bits=16, out_bits=8, out_frac=4),))
    recs = [search.SweepRecord(i, (), plan, c, "total_bits", mismatch=m) for i, (c, m) in enumerate(points)]
    front = pareto_front(recs)
    for f in front:
        assert not any(r.cost <= f.cost and r.mismatch <= f.mismatch and (r.cost, r.mismatch) != (f.cost, f.mismatch)
                       for r in recs)  # fmt: skip
    covered = {(f.cost, f.mismatch) for f in front}
    for r in recs:
        assert any(f.cost <= r.cost and f.mismatch <= r.mismatch for f in front)
    assert len(covered) == len(front)  # equal points appear once
