"""The compiled kernel loops (numba) against the numpy reference path and the slow reference.

``FXNET_KERNEL=numpy`` selects the numpy path; ``_compiled.MIN_SAMPLES`` is lowered so the
compiled loops also run on the small hypothesis cases. Every case runs both paths from empty
caches and requires identical accumulators, codes, events, observed ranges and decisions; a
slice is also checked against ``tests/_support/fxref.py`` (the contract on Python ints).
"""

import fxref
import numpy as np
import pytest
from fxcases import draw_network_and_plan, kernel_path
from hypothesis import given, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core import kernel
from fxnet_widgets.core.kernel import _compiled


@st.composite
def cases(draw):
    doc, plans, bits, n_in = draw_network_and_plan(draw, max_bits=9)
    n = draw(st.sampled_from([1, 7, 300, 5000]))  # 5000: the pair tables and look-ups of steps 4-7 engage
    seed = draw(st.integers(0, 2**32 - 1))
    codes = np.random.default_rng(seed).integers(0, 1 << bits, (n, n_in))
    return fw.Network.from_dict(doc), fw.Plan.from_dict({"layers": plans}), codes


def _run(net, plan, codes, path):
    with kernel_path(path):
        r = fw.emulate(net, plan, codes)
    out = {
        "acc": [a.tolist() for a in r.acc],
        "codes": [c.tolist() for c in r.codes],
        "events": [{k: v.tolist() for k, v in e.items()} for e in r.events],
        "observed": [(a.tolist(), b.tolist()) for a, b in zip(r.observed_min, r.observed_max)],
        "decisions": r.decisions.tolist(),
    }
    kernel.clear_caches()
    return out


@settings(max_examples=120, deadline=None)
@given(cases())
def test_compiled_path_equals_numpy_reference(case):
    net, plan, codes = case
    ref = _run(net, plan, codes, "numpy")
    fast = _run(net, plan, codes, "numba")
    assert fast == ref
    # and both equal the contract run on Python ints (a slice: the slow reference is slow)
    sub = codes[:40].tolist()
    slow = fxref.run(net.to_dict(), plan.to_dict(), sub)
    for li, L in enumerate(slow["layers"]):
        assert fast["acc"][li][:40] == L["acc"], f"acc of layer {li + 1}"
        assert fast["codes"][li][:40] == L["codes"], f"codes of layer {li + 1}"
    assert fast["decisions"][:40] == slow["decisions"]


def test_numpy_switch_is_read_at_every_call(monkeypatch):
    monkeypatch.setattr(_compiled, "MIN_SAMPLES", 0)
    monkeypatch.setenv("FXNET_KERNEL", "numpy")
    assert not _compiled.use_compiled(10**6)
    monkeypatch.setenv("FXNET_KERNEL", "numba")
    assert _compiled.use_compiled(1)
    monkeypatch.setenv("FXNET_KERNEL", "")  # auto: once loaded
    monkeypatch.setattr(_compiled, "_KERNELS", None)
    assert not _compiled.use_compiled(10**6)
    _compiled.kernels()
    assert _compiled.use_compiled(10**6)


def test_event_counts_on_a_sweep_like_plan_match_the_numpy_path():
    # narrow tables saturate the index (table_low/high) on most samples: the fused histogram counts them
    rng = np.random.default_rng(5)
    net = fw.Network.from_layers(
        [(rng.normal(0, 4, (3, 3)), rng.normal(0, 1, 3), "sigmoid"), (rng.normal(0, 4, (1, 3)), [0.0], "sigmoid")]
    )
    codes = rng.integers(0, 256, (20000, 3), dtype=np.uint8)
    plan = fw.Plan.uniform(net, weight_bits=9, weight_frac=5, acc_bits=16, acc_overflow="wrap", table_bits=5,
                           table_frac=4, out_bits=6)  # fmt: skip
    ref = _run(net, plan, codes, "numpy")
    fast = _run(net, plan, codes, "numba")
    assert fast == ref
    assert sum(sum(e["table_high"]) + sum(e["table_low"]) for e in fast["events"]) > 0
    assert sum(sum(e["acc_overflow"]) for e in fast["events"]) > 0


def test_prepared_codes_give_the_same_result_and_are_checked():
    rng = np.random.default_rng(2)
    net = fw.Network.from_layers([(rng.normal(0, 2, (2, 3)), [0.1, -0.2], "tanh")])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=9, table_frac=5, out_bits=8)
    codes = rng.integers(0, 256, (3000, 3))
    prep = kernel.evaluate.prepare(codes, net.input_bits, net.n_in)
    assert fw.emulate(net, plan, prep).codes[0].tolist() == fw.emulate(net, plan, codes).codes[0].tolist()
    other = fw.Network.from_layers([(rng.normal(0, 2, (1, 2)), [0.0], "sigmoid")])
    with pytest.raises(ValueError, match="codes must be prepared for"):
        fw.emulate(other, fw.Plan.uniform(other, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=9,
                                          table_frac=5, out_bits=8), prep)  # fmt: skip


@pytest.mark.parametrize("expanded", [True, False])
@pytest.mark.parametrize("index_round", ["floor", "half-even", "trunc", "half-up", "half-away"])
def test_bucket_tables_give_the_exact_codes_and_events(monkeypatch, index_round, expanded):
    # wide sums (weight_frac 8) and a safe accumulator: steps 4-7 are monotone in the sum, so the
    # compiled path reads codes from buckets of sums; a narrow table saturates (table_low/high)
    rng = np.random.default_rng(9)
    net = fw.Network.from_layers(
        [(rng.normal(0, 4, (3, 3)), rng.normal(0, 1, 3), "sigmoid"), (rng.normal(0, 4, (1, 3)), [0.0], "tanh")]
    )
    codes = rng.integers(0, 256, (30000, 3), dtype=np.uint8)
    plan = fw.Plan.uniform(net, weight_bits=14, weight_frac=8, acc_bits=30, index_round=index_round,
                           table_bits=7, table_frac=4, out_bits=8)  # fmt: skip
    from fxnet_widgets.core.kernel import steps

    calls, reads = [], []
    real, read = steps.stepped, _compiled.kernels().stepped_apply
    monkeypatch.setattr(steps, "stepped", lambda *a: calls.append(1) or real(*a))
    monkeypatch.setattr(_compiled.kernels(), "stepped_apply", lambda *a: reads.append(1) or read(*a))
    if not expanded:  # the tables read by buckets (a layer whose sums span more than can be expanded)
        monkeypatch.setattr(steps, "EXPAND_MAX", 0)
    ref = _run(net, plan, codes, "numpy")
    fast = _run(net, plan, codes, "numba")
    assert calls, "the bucket path must have run"
    assert bool(reads) != expanded
    assert fast == ref
    assert sum(sum(e["table_high"]) + sum(e["table_low"]) for e in fast["events"]) > 0
    # against the contract on Python ints, on a slice
    slow = fxref.run(net.to_dict(), plan.to_dict(), codes[:200].tolist())
    for li, L in enumerate(slow["layers"]):
        assert fast["codes"][li][:200] == L["codes"]


def _drawn_layer(data):
    """One layer of a drawn network and plan, built (hypothesis draws every mode)."""
    from fxnet_widgets.core.kernel import build

    doc, plans, _bits, _n_in = draw_network_and_plan(data.draw, max_bits=9)
    net, plan = fw.Network.from_dict(doc), fw.Plan.from_dict({"layers": plans})
    return build.build_integer_network(net, plan).layers[data.draw(st.integers(0, len(plans) - 1))]


def _steps_4_to_7(layer, u0, u1):
    """post_accumulate on every sum of ``[u0, u1]``: its codes and its event bits (DATA_EVENTS order)."""
    from fxnet_widgets.core.kernel import accumulate
    from fxnet_widgets.core.kernel.layers import DATA_EVENTS

    ref = accumulate.post_accumulate(layer, np.arange(u0, u1 + 1, dtype=np.int64), u0, u1)
    bits = np.zeros(u1 - u0 + 1, dtype=np.int64)
    for k, name in enumerate(DATA_EVENTS):
        if ref[name] is not None:
            bits |= ref[name].astype(np.int64) << k
    return np.asarray(ref["codes"], dtype=np.int64), bits


def _expanded(t, span):
    """The per-sum codes and event bits a :class:`Stepped` table stands for, over ``span`` sums."""
    d = np.arange(span)
    q = d >> t.b
    codes, ev = t.codes_q[q].astype(np.int64), t.ev_q[q].astype(np.int64)
    inside = ev & 128 != 0
    r, low = t.slot[q[inside]], d[inside] & ((1 << t.b) - 1)
    codes[inside] = t.exact_codes[r, low]
    ev[inside] = t.exact_ev[r, low]
    return codes, ev


@settings(max_examples=300, deadline=None)
@given(st.data())
def test_stepped_table_equals_steps_4_to_7_on_every_sum(data):
    # the bucketed evaluation (post_accumulate on bucket starts and on the sums of buckets with a
    # step inside) must give, for every sum of the domain, the code and events of post_accumulate
    # on that sum (the contract's steps 4-7, :mod:`formats` rounding), for every mode drawn
    from fxnet_widgets.core.kernel import steps

    layer = _drawn_layer(data)
    alo, ahi = -(1 << (layer.plan.acc_bits - 1)), (1 << (layer.plan.acc_bits - 1)) - 1
    lo, hi = max(min(layer.sum_min), alo), min(max(layer.sum_max), ahi)
    if lo > hi or not steps.monotone_on(layer, lo, hi):
        return
    u0 = data.draw(st.integers(lo, hi))
    u1 = data.draw(st.integers(u0, min(hi, u0 + 200_000)))
    t = steps.stepped(layer, u0, u1, np.int64)
    if t is None:  # too few sums to gain: nothing to check
        return
    ref_codes, bits = _steps_4_to_7(layer, u0, u1)
    codes, ev = _expanded(t, u1 - u0 + 1)
    assert codes.tolist() == ref_codes.tolist()
    assert ev.tolist() == bits.tolist()


@settings(max_examples=300, deadline=None)
@given(st.data())
def test_layer_tables_equal_steps_4_to_7_on_every_sum_overflow_included(data):
    # the piecewise tables (s_A's runs and held values from formats' wrap and saturate at the piece
    # ends, steps 5-7 from the bucketed evaluation) must give, for every sum of a domain that may
    # reach beyond the accumulator, post_accumulate's code and events on that sum
    from fxnet_widgets.core.kernel import steps

    layer = _drawn_layer(data)
    lo, hi = min(layer.sum_min), max(layer.sum_max)
    u0 = data.draw(st.integers(lo, hi))
    u1 = data.draw(st.integers(u0, min(hi, u0 + 300_000)))
    got = steps.layer_tables(layer, u0, u1, np.int64)
    if got is None:  # a table that decreases somewhere, or too many turns of a wrapping accumulator
        assert (layer.table is not None and not steps.monotone(layer.table)) or steps.acc_pieces(layer, u0, u1) is None
        return
    ref_codes, bits = _steps_4_to_7(layer, u0, u1)
    codes, ev = got
    assert codes.tolist() == ref_codes.tolist()
    assert (ev.astype(np.int64) if ev.shape[0] else np.zeros_like(bits)).tolist() == bits.tolist()


@pytest.mark.parametrize("acc_overflow", ["wrap", "saturate"])
@pytest.mark.parametrize("acc_bits", [15, 16, 18])
def test_piecewise_tables_on_an_overflowing_accumulator_match_the_numpy_path(monkeypatch, acc_overflow, acc_bits):
    # sums of up to about 2**20 in a 15..18-bit accumulator: s_A wraps several turns or holds its
    # ends; codes, events and s_A itself (read, so the table made on first use is made) must be
    # the numpy path's, and overflows must be counted
    from fxnet_widgets.core.kernel import steps

    rng = np.random.default_rng(acc_bits)
    net = fw.Network.from_layers(
        [(rng.normal(0, 4, (3, 3)), rng.normal(0, 1, 3), "sigmoid"), (rng.normal(0, 4, (1, 3)), [0.0], "tanh")]
    )
    codes = rng.integers(0, 256, (30000, 3), dtype=np.uint8)
    plan = fw.Plan.uniform(net, weight_bits=14, weight_frac=8, acc_bits=acc_bits, acc_overflow=acc_overflow,
                           table_bits=9, table_frac=5, out_bits=8)  # fmt: skip
    calls = []
    real = steps.layer_tables
    monkeypatch.setattr(steps, "layer_tables", lambda *a: calls.append(real(*a)) or calls[-1])
    ref = _run(net, plan, codes, "numpy")
    fast = _run(net, plan, codes, "numba")
    assert any(c is not None for c in calls), "the piecewise tables must have been used"
    assert fast == ref
    assert sum(sum(e["acc_overflow"]) for e in fast["events"]) > 0


def test_a_neuron_without_overflow_takes_its_own_buckets_when_another_overflows(monkeypatch):
    # no layer table (as for sums spanning more than can be expanded): one neuron's sums overflow
    # the 18-bit accumulator, so the layer's union is not monotone; the other neuron's (up to ~10**5)
    # do not, and it is read by buckets of its own; both must give the numpy path's results
    from fxnet_widgets.core.kernel import steps

    monkeypatch.setattr(steps, "EXPAND_MAX", 0)
    net = fw.Network.from_layers([(np.array([[0.5, 0.4, 0.45], [8.0, 7.5, 8.2]]), [0.1, -0.2], "sigmoid")])
    codes = np.random.default_rng(5).integers(0, 256, (30000, 3), dtype=np.uint8)
    plan = fw.Plan.uniform(net, weight_bits=14, weight_frac=8, acc_bits=18, table_bits=9, table_frac=5, out_bits=8)
    spans = []
    real = steps.stepped
    monkeypatch.setattr(steps, "stepped", lambda layer, u0, u1, dt: spans.append(u1 - u0) or real(layer, u0, u1, dt))
    ref = _run(net, plan, codes, "numpy")
    fast = _run(net, plan, codes, "numba")
    assert spans, "the neuron's own buckets must have been used"
    assert fast == ref
    assert sum(fast["events"][0]["acc_overflow"]) > 0 and fast["events"][0]["acc_overflow"][0] == 0
