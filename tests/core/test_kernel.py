"""The bit-exact kernel against hand-computed vectors, outside references and a slow reference."""

import itertools
import math

import fxref
import numpy as np
import pytest
from fxcases import draw_network_and_plan
from fxhand import B1, B2, W1, W2, hand_network
from hypothesis import given, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core import kernel


def hand_net():
    return hand_network(classes=["other", "ripe"])


def hand_plan(net, **kw):
    fields = dict(weight_bits=8, weight_frac=5, acc_bits=18, table_bits=14, table_frac=9, out_bits=8)
    fields.update(kw)
    return fw.Plan.uniform(net, **fields)


def test_hand_computed_pixel_331_sigmoid():
    # A working choice in the trade (common practice): weights at 5 fraction bits, bias
    # shifted by a further 8 bits (the input bits), 14-bit table address, 8-bit output,
    # decision at code >= 128. Every number below is worked by hand:
    net = hand_net()
    r = fw.emulate(net, hand_plan(net), np.array([[200, 100, 50]]))
    # q_w = round(w * 32): [[16, -8, 4], [32, 0, -32], [-24, 16, 8]]
    q = kernel.build_integer_network(net, hand_plan(net))
    assert q.layers[0].q_w.tolist() == [[16, -8, 4], [32, 0, -32], [-24, 16, 8]]
    # q_b = round(b * 2^13): 819.2 -> 819, -1638.4 -> -1638, 2457.6 -> 2458
    assert q.layers[0].q_b.tolist() == [819, -1638, 2458]
    # s = 819 + 16*200 - 8*100 + 4*50 = 3419; -1638 + 32*200 - 32*50 = 3162; 2458 - 4800 + 1600 + 400 = -342
    assert r.acc[0][0].tolist() == [3419, 3162, -342]
    # k = 8 + 5 - 9 = 4: floor(3419/16) = 213, floor(3162/16) = 197, floor(-342/16) = -22
    # entry = round(256 * expit(a / 512)): 154.25 -> 154, 152.33 -> 152, 125.25 -> 125
    assert r.codes[0][0].tolist() == [154, 152, 125]
    # layer 2: q_w = [48, -64, 16], q_b = round(0.25 * 2^13) = 2048
    # s = 2048 + 48*154 - 64*152 + 16*125 = 1712; floor(1712/16) = 107; round(256*expit(107/512)) = 141
    assert r.acc[1][0].tolist() == [1712]
    assert r.out_codes.tolist() == [[141]]
    # 141 >= ceil(0.5 * 256) = 128: positive
    assert q.threshold_code == 128
    assert r.decisions.tolist() == [1]
    # outside reference for the float side: scipy.special.expit
    from scipy.special import expit

    assert 256 * expit(213 / 512) == pytest.approx(154.2475, abs=1e-4)


def test_operation_count_331():
    # a 3-3-1 network per pixel: 12 multiplications, 12 additions (biases included), 4 tables
    # (common practice: n_in products and n_in additions per neuron with its bias)
    net = hand_net()
    assert kernel.build_integer_network(net, hand_plan(net)).operation_counts() == {
        "multiplications": 12,
        "additions": 12,
        "tables": 4,
    }


# --- tables against outside references ----------------------------------------------
@pytest.mark.parametrize("sample", ["edge", "mid"])
def test_sigmoid_table_against_scipy_expit(sample):
    from scipy.special import expit  # scipy docs: expit(x) = 1/(1+exp(-x))

    net = hand_net()
    q = kernel.build_integer_network(net, hand_plan(net, table_sample=sample))
    L = q.layers[0]
    a = np.arange(L.index_min, L.index_max + 1)
    t = kernel.table_inputs(len(a), L.index_min, 9, L.shift, "floor", sample)
    exact = expit(t) * 256
    err = L.table - exact
    clamped = exact >= 255.5  # round(256 * sigma) would be 256, which does not fit 8 bits
    # unclamped entries: at most half an output LSB from the exact value (half-even rounding)
    assert np.max(np.abs(err[~clamped])) <= 0.5
    # clamped entries hold the largest code (semantics.md step 6: clamp to the out range)
    assert np.all(L.table[clamped] == 255)
    # references.md, "Sigmoid": 8-bit round(256*sigma) reaches 255 at x >= ln(254.5/1.5) = 5.1338
    # and would reach 256 at x >= ln(255.5/0.5) = 6.2364
    assert math.log(254.5 / 1.5) == pytest.approx(5.1338, abs=1e-4)
    assert math.log(255.5 / 0.5) == pytest.approx(6.2364, abs=1e-4)
    if sample == "edge":
        assert t[np.argmax(L.table == 255)] == pytest.approx(5.1338, abs=1 / 512)
        assert t[np.argmax(clamped)] == pytest.approx(6.2364, abs=1 / 512)
    if sample == "edge":
        # published values (scipy docs): expit(0) = 0.5, expit(1.5) = 0.81757448
        assert L.table[0 - L.index_min] == 128
        assert L.table[int(1.5 * 512) - L.index_min] == round(0.81757448 * 256) == 209
        # sigma(-x) = 1 - sigma(x): mirrored entries sum to 256 within rounding
        pos = L.table[768 - L.index_min]
        neg = L.table[-768 - L.index_min]
        assert abs(int(pos) + int(neg) - 256) <= 1
    else:
        # mid with floor and k = 4: t = (a + 1/2 - 2^-5) / 2^9 (semantics.md, step 6)
        assert t[0 - L.index_min] == pytest.approx((0.5 - 2**-5) / 512)


def test_tanh_table_against_numpy():
    # numpy.tanh as the outside reference; tanh out_frac defaults to out_bits - 1
    net = fw.Network.from_layers([(W1, B1, "tanh"), (W2, B2, "sigmoid")])
    q = kernel.build_integer_network(net, hand_plan(net, out_bits=8))
    L = q.layers[0]
    t = kernel.table_inputs(len(L.table), L.index_min, 9, L.shift, "floor", "edge")
    exact = np.tanh(t) * 128
    ok = (L.table > -128) & (L.table < 127)
    assert np.max(np.abs(L.table[ok] - exact[ok])) <= 0.5
    assert L.out_frac == 7 and L.out_min == -128 and L.out_max == 127


def test_adjacent_sigmoid_entries_differ_by_at_most_a_quarter_step():
    # sigma has max slope 1/4 (references.md): entries one address apart differ by at most
    # step/4 in value plus one LSB of rounding
    net = hand_net()
    L = kernel.build_integer_network(net, hand_plan(net, table_frac=2)).layers[0]
    diffs = np.abs(np.diff(L.table.astype(np.int64)))
    assert diffs.max() <= 256 * (2**-2) / 4 + 1


# --- guaranteed-safe accumulator width ----------------------------------------------
@pytest.mark.parametrize("q", [127, -128])
def test_safe_width_worked_value(q):
    # references.md: 3 products of uint8 x int8 span -97920 .. 97155, i.e. 18 bits
    net = fw.Network.from_layers([([[float(q)] * 3], [0.0], "identity")])
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=0, acc_bits=30, out_bits=16, out_frac=0)
    L = kernel.build_integer_network(net, plan).layers[0]
    assert (L.safe_min[0], L.safe_max[0]) == ((0, 97155) if q > 0 else (-97920, 0))
    assert L.safe_acc_bits.tolist() == [18]


def test_safe_width_is_tight_by_corners():
    # Interval analysis (semantics.md): with the safe width no corner input overflows; with one
    # bit less some corner does. Corners of the input box hold the extremes of a linear sum.
    rng = np.random.default_rng(7)
    for _ in range(20):
        w = rng.normal(0, 3, (2, 3))
        b = rng.normal(0, 2, 2)
        net = fw.Network.from_layers([(w, b, "relu"), (rng.normal(0, 1, (1, 2)), [0.0], "sigmoid")])
        corners = np.array(list(itertools.product([0, 255], repeat=3)))
        base = dict(weight_bits=8, weight_frac=4, out_bits=8, out_frac=4, table_bits=10, table_frac=5)
        safe = kernel.build_integer_network(net, fw.Plan.uniform(net, acc_bits=40, **base)).layers[0].safe_acc_bits
        for j in range(2):
            A = int(safe[j])
            r = fw.emulate(net, fw.Plan.uniform(net, acc_bits=A, **base), corners)
            assert r.events[0]["acc_overflow"][j] == 0
            r = fw.emulate(net, fw.Plan.uniform(net, acc_bits=A - 1, **base), corners)
            # one bit less: a corner overflows, or the bias alone no longer fits (a bias_clip,
            # since the safe width is computed with the bias before its clamp)
            assert r.events[0]["acc_overflow"][j] > 0 or r.events[0]["bias_clip"][j] == 1


# --- against the slow reference -------------------------------------------------------
@st.composite
def net_plan_inputs(draw):
    doc, plans, bits, n_in = draw_network_and_plan(draw, max_bits=10)
    n = draw(st.integers(1, 12))
    codes = [[draw(st.integers(0, (1 << bits) - 1)) for _ in range(n_in)] for _ in range(n)]
    return doc, {"layers": plans}, codes


def _compare(doc, pdoc, codes):
    net = fw.Network.from_dict(doc)
    plan = fw.Plan.from_dict(pdoc)
    ref = fxref.run(net.to_dict(), pdoc, codes)
    r = fw.emulate(net, plan, np.array(codes, dtype=np.int64))
    for li, L in enumerate(ref["layers"]):
        assert r.acc[li].tolist() == L["acc"], f"acc of layer {li + 1}"
        assert r.codes[li].tolist() == L["codes"], f"codes of layer {li + 1}"
        for name in ("acc_overflow", "table_low", "table_high"):
            assert r.events[li][name].tolist() == L["events"][name], f"{name} of layer {li + 1}"
        assert r.events[li]["weight_clip"].tolist() == L["weight_clip"]
    assert r.decisions.tolist() == ref["decisions"]


@settings(max_examples=300)
@given(net_plan_inputs())
def test_kernel_matches_slow_reference(case):
    _compare(*case)


def test_kernel_matches_reference_on_large_batches():
    # the fast paths (product tables, look-up of steps 4-7) engage above a few thousand samples
    rng = np.random.default_rng(3)
    for act in ("sigmoid", "tanh", "relu", "identity"):
        net = fw.Network.from_layers(
            [(rng.normal(0, 3, (3, 3)), rng.normal(0, 1, 3), act), (rng.normal(0, 2, (2, 3)), [0.1, -0.1], "sigmoid")]
        )
        for overflow, ir in [("wrap", "floor"), ("saturate", "half-even"), ("wrap", "half-away")]:
            kw = dict(weight_bits=7, weight_frac=4, acc_bits=13, acc_overflow=overflow, index_round=ir,
                      out_bits=6, table_bits=9, table_frac=5)  # fmt: skip
            if act in ("relu", "identity"):
                plan = fw.Plan((
                    fw.LayerPlan(weight_bits=7, weight_frac=4, acc_bits=13, acc_overflow=overflow,
                                 index_round=ir, out_bits=6, out_frac=3),
                    fw.LayerPlan(**kw),
                ))  # fmt: skip
            else:
                plan = fw.Plan.uniform(net, **kw)
            codes = rng.integers(0, 256, (5000, 3))
            sub = codes[:300].tolist()
            ref = fxref.run(net.to_dict(), plan.to_dict(), sub)
            r = fw.emulate(net, plan, codes)
            for li, L in enumerate(ref["layers"]):
                assert r.acc[li][:300].tolist() == L["acc"]
                assert r.codes[li][:300].tolist() == L["codes"]
            # event counts on the whole batch equal the straightforward count
            r_small = [fw.emulate(net, plan, codes[i : i + 1000]) for i in range(0, 5000, 1000)]
            for li in range(2):
                for name in ("acc_overflow", "table_low", "table_high"):
                    total = sum(x.events[li][name] for x in r_small)
                    assert r.events[li][name].tolist() == total.tolist()


def test_left_shift_and_extreme_fracs():
    # k < 0 (table_frac above the accumulator's frac) and shifts beyond 63 bits
    net = fw.Network.from_layers([([[1.0, -1.0]], [0.0], "identity")], input_names=["a", "b"])
    for out_frac in (40, -40):  # k = 8 + 2 - 40 = -30 (left shift) and k = 50 (right shift)
        plan = fw.Plan.uniform(net, weight_bits=4, weight_frac=2, acc_bits=20, out_bits=8, out_frac=out_frac)
        codes = [[0, 0], [255, 0], [0, 255], [3, 1]]
        ref = fxref.run(net.to_dict(), plan.to_dict(), codes)
        r = fw.emulate(net, plan, np.array(codes))
        assert r.codes[0].tolist() == ref["layers"][0]["codes"]
        assert r.events[0]["table_high"].tolist() == ref["layers"][0]["events"]["table_high"]


def test_image_equals_pixels_as_list():
    net = hand_net()
    plan = hand_plan(net, acc_bits=14)
    img = np.random.default_rng(0).integers(0, 256, (40, 50, 3), dtype=np.uint8)
    a = fw.emulate(net, plan, img)
    b = fw.emulate(net, plan, img.reshape(-1, 3))
    assert a.decisions.shape == (40, 50)
    assert a.out_codes.shape == (40, 50, 1)
    np.testing.assert_array_equal(a.decisions.ravel(), b.decisions)
    np.testing.assert_array_equal(a.acc[0].reshape(-1, 3), b.acc[0])
    for la, lb in zip(a.events, b.events):
        for k in la:
            assert la[k].tolist() == lb[k].tolist()


def test_cache_by_value_reuses_per_image_work():
    net = hand_net()
    img = np.random.default_rng(1).integers(0, 256, (64, 64, 3), dtype=np.uint8)
    kernel.clear_caches()
    fw.emulate(net, hand_plan(net), img)
    before = kernel.cache_stats()["input"]
    fw.emulate(net, hand_plan(net, table_bits=12), img.copy())  # equal by value, new object
    after = kernel.cache_stats()["input"]
    assert after[0] == before[0] + 1 and after[1] == before[1]  # one hit, no new miss
    # changing only layer 2 keeps layer 1's result
    lay_before = kernel.cache_stats()["layer"]
    fw.emulate(net, hand_plan(net, table_bits=12).replace(layer=1, out_bits=7), img)
    lay_after = kernel.cache_stats()["layer"]
    assert lay_after[0] == lay_before[0] + 1


def test_plan_equality_and_repr_round_trip():
    net = hand_net()
    p = hand_plan(net)
    assert p == hand_plan(net) and hash(p) == hash(hand_plan(net))
    assert eval(repr(p), {"Plan": fw.Plan, "LayerPlan": fw.LayerPlan}) == p
    assert p.replace(layer=0, acc_bits=16).layers[1].acc_bits == 18
    assert p.replace(acc_bits=16).layers[1].acc_bits == 16


def test_full_scale_folds_factor_and_says_so():
    net = fw.Network.from_layers([(W1, B1, "sigmoid"), (W2, B2, "sigmoid")], input_scale="full")
    q = kernel.build_integer_network(net, hand_plan(net))
    # w * 256/255 before quantising: 0.5 * 256/255 * 32 = 16.06 -> 16; 1.0 -> 32.13 -> 32
    assert q.layers[0].q_w[0, 0] == round(0.5 * 256 / 255 * 32)
    assert any("full" in n for n in q.notes)
    r = fw.emulate(net, hand_plan(net), np.array([[255, 0, 0]]))
    # the float reference uses code / (2^bits - 1): 255 stands for 1.0
    assert r.float_out[0, 0] == pytest.approx(
        1 / (1 + math.exp(-(1.5 / (1 + math.exp(-0.6)) - 2 / (1 + math.exp(-0.8)) + 0.5 / (1 + math.exp(0.45)) + 0.25)))
    )


def test_multi_output_argmax_ties_to_lowest():
    net = fw.Network.from_layers([([[0.0, 0.0], [0.0, 0.0], [1.0, 0.0]], [0.0, 0.0, 0.0], "identity")],
                                 input_names=["a", "b"])  # fmt: skip
    plan = fw.Plan.uniform(net, weight_bits=4, weight_frac=0, acc_bits=12, out_bits=10, out_frac=8)
    r = fw.emulate(net, plan, np.array([[0, 0], [1, 0]]))
    assert r.decisions.tolist() == [0, 2]  # all-zero row: tie -> lowest index


def test_summary_is_deterministic_text():
    net = hand_net()
    r = fw.emulate(net, hand_plan(net), np.array([[200, 100, 50], [0, 0, 0]]))
    text = r.summary()
    assert text.splitlines()[0] == "emulation of 2 samples: 0 decisions differ from float (0.000 %)"
    assert "accumulator Q4.13 (18 b) wrap" in text
    assert text == fw.emulate(net, hand_plan(net), np.array([[200, 100, 50], [0, 0, 0]])).summary()
