"""The kernel's speed paths keep every bit: reused first-layer sums, look-up tables over
the sums seen on the data, lazily gathered accumulators, cached float decisions."""

import fxref
import numpy as np

import fxnet_widgets as fw
from fxnet_widgets.core import kernel


def _net(act="sigmoid"):
    rng = np.random.default_rng(11)
    return fw.Network.from_layers(
        [(rng.normal(0, 3, (3, 3)), rng.normal(0, 1, 3), act), (rng.normal(0, 2, (1, 3)), [0.1], "sigmoid")],
        classes=["other", "ripe"],
    )


def _check_against_reference(net, plan, codes, rows=200):
    """Subsample against the slow reference; event counts against small batches (other paths)."""
    r = fw.emulate(net, plan, codes)
    ref = fxref.run(net.to_dict(), plan.to_dict(), codes[:rows].tolist())
    for li, L in enumerate(ref["layers"]):
        assert r.acc[li][:rows].tolist() == L["acc"], f"acc of layer {li + 1}"
        assert r.codes[li][:rows].tolist() == L["codes"], f"codes of layer {li + 1}"
    assert r.decisions[:rows].tolist() == ref["decisions"]
    parts = [fw.emulate(net, plan, codes[i : i + 500]) for i in range(0, codes.shape[0], 500)]
    for li in range(len(net.layers)):
        for name in ("acc_overflow", "table_low", "table_high"):
            assert r.events[li][name].tolist() == sum(p.events[li][name] for p in parts).tolist(), name
        assert np.array_equal(r.observed_min[li], np.min([p.observed_min[li] for p in parts], axis=0))
        assert np.array_equal(r.observed_max[li], np.max([p.observed_max[li] for p in parts], axis=0))
    return r


def test_accumulator_and_table_changes_reuse_first_layer_sums_bit_exactly():
    net = _net()
    codes = np.random.default_rng(5).integers(0, 256, (6000, 3))
    base = fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=18, out_bits=8, table_bits=10, table_frac=6)
    reused = overflows = 0
    # accumulators wide enough for the biases (14 bits): only the accumulator and table fields change
    plans = [base.replace(acc_bits=a, acc_overflow=o, table_bits=t, table_frac=t - 4)
             for a, o, t in [(18, "wrap", 10), (14, "wrap", 10), (14, "saturate", 8), (15, "wrap", 12)]]  # fmt: skip
    for plan in plans:
        before = kernel.cache_stats()["sums"][0]
        fw.emulate(net, plan, codes)
        reused += kernel.cache_stats()["sums"][0] - before
    for plan in plans:
        r = _check_against_reference(net, plan, codes)
        overflows += r.event_totals()["acc_overflow"]
    assert reused >= 3  # the sums were reused (the checks above are not vacuous)
    assert overflows > 0


def test_narrow_data_uses_a_table_over_the_seen_sums_only():
    # inputs from a small colour patch: the sums seen are a sliver of their interval
    net = _net("tanh")
    rng = np.random.default_rng(6)
    codes = np.concatenate([rng.integers(100, 112, (5000, 3)), rng.integers(0, 256, (3, 3))])
    for overflow in ("wrap", "saturate"):
        plan = fw.Plan.uniform(net, weight_bits=9, weight_frac=5, acc_bits=12, acc_overflow=overflow,
                               out_bits=7, table_bits=9, table_frac=5)  # fmt: skip
        _check_against_reference(net, plan, codes[::-1].copy(), rows=150)


def test_neuron_sums_are_the_exact_integer_sums():
    net = _net()
    codes = np.random.default_rng(7).integers(0, 256, (5000, 3))
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=10, out_bits=8, table_bits=10, table_frac=6)
    r = fw.emulate(net, plan, codes)
    q = kernel.build_integer_network(net, plan)
    u = codes.astype(np.int64)
    for li, L in enumerate(q.layers):
        # s = q_b + sum_i q_w[j, i] * u_i on exact integers (the contract's step 3)
        s = u @ L.q_w.T + L.q_b
        for j in range(L.n_out):
            got = r.neuron_sums(li, j)
            assert got.dtype == np.int64 and got.shape == (r.n,)
            assert np.array_equal(got, s[:, j])
        u = np.asarray(r.codes[li], dtype=np.int64)
    assert r.event_totals()["acc_overflow"] > 0  # so the sums differ from s_A somewhere


def test_float_decisions_are_cached_read_only_and_equal_decide():
    net = _net()
    img = np.random.default_rng(8).integers(0, 256, (30, 40, 3)).astype(np.uint8)
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=18, out_bits=8, table_bits=10, table_frac=6)
    a = fw.emulate(net, plan, img)
    b = fw.emulate(net, plan.replace(acc_bits=17), img)
    assert a.float_decisions.shape == (30, 40)
    assert np.array_equal(a.float_decisions, net.decide(net.predict(img)))
    assert not a.float_decisions.flags.writeable
    assert np.shares_memory(a.float_decisions, b.float_decisions)  # made once per network and input
