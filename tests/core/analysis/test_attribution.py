"""Error attribution: one stage made generous at a time."""

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import STAGES, attribute_errors, error_metrics, generous_plan


@pytest.fixture(scope="module")
def tight(net):
    return fw.Plan.uniform(net, weight_bits=5, weight_frac=1, acc_bits=11, out_bits=5, table_bits=7, table_frac=3)


def test_generous_plans_change_only_their_stage(net, tight):
    intnet = fw.build_integer_network(net, tight)
    w = generous_plan(net, tight, "weights")
    for a, b in zip(tight.layers, w.layers):
        d = b.weight_frac - a.weight_frac
        assert d > 0 and b.acc_bits - a.acc_bits == d and b.weight_bits >= a.weight_bits + d
        assert (b.table_bits, b.table_frac, b.out_bits) == (a.table_bits, a.table_frac, a.out_bits)
    assert fw.emulate(net, w, np.zeros((1, 3), np.uint8)).event_totals()["weight_clip"] == 0
    acc = generous_plan(net, tight, "accumulator")
    assert [lp.acc_bits for lp in acc.layers] == [max(a.acc_bits, int(L.safe_acc_bits.max()))
                                                  for a, L in zip(tight.layers, intnet.layers)]  # fmt: skip
    t = generous_plan(net, tight, "table address")
    assert all(L.shift == 0 for L in fw.build_integer_network(net, t).layers)
    o = generous_plan(net, tight, "table output")
    assert [lp.out_bits for lp in o.layers] == [16, 16]
    assert o.layers[1].acc_bits == tight.layers[1].acc_bits + 11
    one = generous_plan(net, tight, "table output", layer=1)
    assert one.layers[0] == tight.layers[0]


def test_attribution_rows(net, tight, codes):
    a = attribute_errors(net, tight, codes)
    base = fw.emulate(net, tight, codes)
    assert a.mismatch == base.mismatch > 0
    assert [r.stage for r in a.rows] == list(STAGES)
    for r in a.rows:
        m = error_metrics(fw.emulate(net, r.plan, codes))
        assert r.mismatch == m.mismatch and r.removed == a.mismatch - m.mismatch
        assert r.share == r.removed / a.mismatch
    # every stage generous at once leaves (almost) nothing: 16-bit outputs, exact indices
    assert a.all_generous.mismatch < a.mismatch / 10
    bars = a.bar_data()
    assert bars["stage"] == list(STAGES) and bars["removed"] == [r.removed for r in a.rows]
    text = a.summary()
    first = f"error attribution over 4000 samples (all layers): {a.mismatch} decisions differ from float"
    assert text.splitlines()[0] == first
    assert len(text.splitlines()) == 2 + len(STAGES) + 1
    assert a.to_dict()["rows"][0]["stage"] == "weights"


def test_accumulator_overflow_is_credited_to_the_accumulator(net, codes, plan):
    small = plan.replace(acc_bits=9)
    assert fw.emulate(net, small, codes).event_totals()["acc_overflow"] > 0
    a = attribute_errors(net, small, codes)
    acc_row = a.rows[STAGES.index("accumulator")]
    assert acc_row.removed == max(r.removed for r in a.rows)
    assert fw.emulate(net, acc_row.plan, codes).event_totals()["acc_overflow"] == 0


def test_attribution_bad_input(net, plan):
    msg = r"^stage must be one of weights, accumulator, table address, table output, not 'bias'$"
    with pytest.raises(ValueError, match=msg):
        generous_plan(net, plan, "bias")
    with pytest.raises(ValueError, match=r"^layer must be None or an index from 0 to 1, not 2$"):
        generous_plan(net, plan, "weights", layer=2)
