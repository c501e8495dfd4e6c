"""The Pareto front: no dominated point, equal points once."""

from hypothesis import given
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import pareto_front
from fxnet_widgets.core.analysis.search import SweepRecord


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


@given(st.lists(st.tuples(st.integers(0, 20), st.integers(0, 20)), min_size=1, max_size=40))
def test_pareto_front_property(points):
    plan = fw.Plan((fw.LayerPlan(weight_bits=8, weight_frac=4, acc_bits=16, out_bits=8, out_frac=4),))
    recs = [SweepRecord(i, (), plan, c, "total_bits", mismatch=m) for i, (c, m) in enumerate(points)]
    front = pareto_front(recs)
    for f in front:
        assert not any(r.cost <= f.cost and r.mismatch <= f.mismatch and (r.cost, r.mismatch) != (f.cost, f.mismatch)
                       for r in recs)  # fmt: skip
    covered = {(f.cost, f.mismatch) for f in front}
    for r in recs:
        assert any(f.cost <= r.cost and f.mismatch <= r.mismatch for f in front)
    assert len(covered) == len(front)  # equal points appear once
