"""The search's fast path (compiled loops, memoized safe widths, fused error pass) against the reference.

The reference is what ``FXNET_KERNEL=numpy`` runs: every plan through ``with_safe_acc`` (a build of
the whole network at the widest accumulators), ``emulate`` on the numpy path and ``error_metrics``.
Both paths run the same hypothesis cases (every activation and mode, 1-3 layers) from empty caches;
their records must be identical, floats bit for bit.
"""

import dataclasses

import numpy as np
import pytest
from fxcases import draw_network_and_plan, kernel_path
from hypothesis import given, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core import kernel
from fxnet_widgets.core.analysis.search.evaluate import PlanTask, _run_chunk
from fxnet_widgets.core.kernel.build import safe_acc_widths
from fxnet_widgets.core.starting import with_safe_acc


@st.composite
def cases(draw):
    doc, plans, bits, n_in = draw_network_and_plan(draw, max_bits=9)
    n = draw(st.sampled_from([7, 300, 5000]))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    codes = rng.integers(0, 1 << bits, (n, n_in)).astype(np.uint16)
    net = fw.Network.from_dict(doc)
    labels = rng.integers(0, len(net.classes), n).astype(np.int16) if draw(st.booleans()) else None
    plan = fw.Plan.from_dict({"layers": plans})
    # a second plan: the same layers with other widths, so the per-layer caches are shared and missed
    other = plan.replace(out_bits=draw(st.integers(2, 10)))
    return net, [plan, other], codes, labels


def _records(net, plans, codes, labels, path):
    with kernel_path(path):
        tasks = [PlanTask(i, (("case", i),), p.to_dict(), safe) for i, (p, safe) in
                 enumerate((p, s) for p in plans for s in (True, False))]  # fmt: skip
        recs = _run_chunk(net.to_dict(), codes, labels, tasks, "total_bits", {})
    kernel.clear_caches()
    return [dataclasses.asdict(r) for r in recs]


@settings(max_examples=80, deadline=None)
@given(cases())
def test_fast_records_equal_the_reference(case):
    net, plans, codes, labels = case
    ref = _records(net, plans, codes, labels, "numpy")
    fast = _records(net, plans, codes, labels, "compiled")
    assert fast == ref


@settings(max_examples=150, deadline=None)
@given(st.data())
def test_safe_widths_walk_equals_the_wide_build(data):
    doc, plans, _, _ = draw_network_and_plan(data.draw, max_bits=12)
    net = fw.Network.from_dict(doc)
    plan = fw.Plan.from_dict({"layers": plans})
    kernel.clear_caches()
    try:
        want = with_safe_acc(net, plan)
    except ValueError as exc:  # a refusal of the wide build: the walk refuses alike
        with pytest.raises(ValueError) as got:
            safe_acc_widths(net, plan)
        assert str(got.value) == str(exc)
        return
    assert safe_acc_widths(net, plan) == tuple(lp.acc_bits for lp in want.layers)



def test_a_safe_width_beyond_the_limit_is_refused_alike():
    # a bias of 1e20 at 8 + 8 fraction bits needs an accumulator of about 84 bits: beyond acc_bits'
    # limit of 62 (semantics.md, plan limits), so both paths refuse the plan with the same words
    net = fw.Network.from_layers([([[1.0, -1.0, 0.5]], [1e20], "sigmoid")])
    plan = fw.Plan.uniform(net, weight_bits=12, weight_frac=8, acc_bits=20, out_bits=8, table_bits=10,
                           table_frac=6)  # fmt: skip
    codes = np.random.default_rng(1).integers(0, 256, (3000, 3)).astype(np.uint8)
    ref = _records(net, [plan], codes, None, "numpy")
    assert ref[0]["error"] is not None and "acc_bits" in ref[0]["error"]
    assert ref[1]["error"] is None  # the plan's own width (no safe-width derivation) is evaluated
    assert _records(net, [plan], codes, None, "compiled") == ref
