"""Invariants of the bit-exact kernel, as hypothesis properties.

1. wrap and saturate agree on every sample that has no accumulator overflow;
2. with generous widths the fixed decision equals the float one wherever the
   float output is farther from the threshold than the analytic error bound;
3. more table address bits over the same range never increase the table-output
   error bound, and the kernel's table stays within it;
4. the guaranteed-safe accumulator width never overflows;
5. an image emulates exactly like its pixels as a list, in any chunks.
"""

from __future__ import annotations

import numpy as np
from _hardening_support import count, examples
from hypothesis import assume, given, note, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core.formats import ROUNDINGS, signed_range
from fxnet_widgets.core.kernel import build_integer_network, post_accumulate
from fxnet_widgets.core.network import activate

HIDDEN = ["sigmoid", "tanh", "relu", "identity"]
#: Lipschitz constants: sigmoid' <= 1/4 (at 0), tanh' <= 1, relu and identity 1 (calculus, no source)
LIPSCHITZ = {"sigmoid": 0.25, "tanh": 1.0, "relu": 1.0, "identity": 1.0}


@st.composite
def networks(draw: st.DrawFn, max_hidden: int = 4) -> fw.Network:
    hidden = draw(st.integers(1, max_hidden))
    act = draw(st.sampled_from(HIDDEN))
    w = st.floats(-4, 4, allow_nan=False, width=32)
    b = st.floats(-2, 2, allow_nan=False, width=32)
    w1 = draw(st.lists(st.lists(w, min_size=3, max_size=3), min_size=hidden, max_size=hidden))
    b1 = draw(st.lists(b, min_size=hidden, max_size=hidden))
    w2 = draw(st.lists(w, min_size=hidden, max_size=hidden))
    return fw.Network.from_layers([(w1, b1, act), ([w2], [draw(b)], "sigmoid")], classes=["other", "ripe"])


def layer_plan(draw: st.DrawFn, act: str, **fixed) -> dict:
    lp = {
        "weight_bits": draw(st.integers(2, 12)), "weight_frac": draw(st.integers(0, 8)),
        "acc_bits": draw(st.integers(4, 24)), "out_bits": draw(st.integers(2, 12)),
        "weight_round": draw(st.sampled_from(ROUNDINGS)), "index_round": draw(st.sampled_from(ROUNDINGS)),
    }  # fmt: skip
    if act in ("sigmoid", "tanh"):
        lp["table_bits"] = draw(st.integers(2, 12))
        lp["table_frac"] = draw(st.integers(-2, 10))
    else:
        lp["out_frac"] = draw(st.integers(-2, 8))
    lp.update(fixed)
    return lp


def plan_for(draw: st.DrawFn, net: fw.Network, **fixed) -> fw.Plan:
    return fw.Plan.from_dict({"layers": [layer_plan(draw, L.activation, **fixed) for L in net.layers]})


def pixels(draw: st.DrawFn, n_max: int = 300) -> np.ndarray:
    n = draw(st.integers(1, n_max))
    return np.random.default_rng(draw(st.integers(0, 2**32 - 1))).integers(0, 256, (n, 3), dtype=np.uint8)


# -- 1. wrap and saturate ----------------------------------------------------------------------
@settings(max_examples=examples(250))
@given(st.data())
def test_wrap_and_saturate_agree_without_overflow(data):
    count("kernel: wrap vs saturate")
    net = data.draw(networks())
    plan = plan_for(data.draw, net)
    codes = pixels(data.draw)
    wrap = fw.emulate(net, plan.replace(acc_overflow="wrap"), codes)
    sat = fw.emulate(net, plan.replace(acc_overflow="saturate"), codes)
    intnet = build_integer_network(net, plan)
    # per sample: did any exact sum (step 3 of semantics.md, recomputed here) leave the A-bit range?
    clean = np.ones(len(codes), dtype=bool)
    u = codes.astype(np.int64)
    for L, acc in zip(intnet.layers, wrap.codes):
        s = u @ L.q_w.T + L.q_b
        lo, hi = signed_range(L.plan.acc_bits)
        clean &= ((s >= lo) & (s <= hi)).all(axis=1)
        u = np.asarray(acc, dtype=np.int64)
    note(f"{int(clean.sum())} of {len(codes)} samples without overflow")
    for a, b in zip(wrap.acc + wrap.codes, sat.acc + sat.codes):
        assert np.array_equal(np.asarray(a)[clean], np.asarray(b)[clean])
    assert np.array_equal(wrap.decisions[clean], sat.decisions[clean])
    if wrap.event_totals()["acc_overflow"] == 0:
        assert clean.all() and np.array_equal(wrap.out_codes, sat.out_codes)


# -- 2. decisions agree outside the error bound ------------------------------------------------
def error_bound(net: fw.Network, plan: fw.Plan, result) -> np.ndarray:
    """Per sample, a bound on |fixed output value - float output| (derivation, no source).

    Layer l gets inputs x_hat with |x_hat - h| <= e (e = 0 for the input codes,
    exact values u / 2^bits). With weights rounded to step q_w = 2^-Fw
    (error <= r q_w, r = 1/2 for the half-* modes and 1 for floor/trunc) and the
    bias to step q_b = 2^-(Fi+Fw), the exact sum over 2^(Fi+Fw) is

        |z_hat - z| <= r q_w sum|x_hat| + sum|w| e + r q_b,

    since z_hat - z = sum (w_hat - w) x_hat + sum w (x_hat - h) + (b_hat - b).
    The table index rounds z_hat to the step 2^-Ft (error < 2^-Ft in every mode),
    the activation multiplies an input error by at most its Lipschitz constant
    L (sigmoid 1/4, tanh 1, relu 1), and the entry is rounded and clamped to
    the output step 2^-Fo (error <= 2^-Fo). relu/identity round z_hat straight to
    2^-Fo. Hence e_l = L (|z_hat - z| + 2^-Ft) + 2^-Fo for tables and
    |z_hat - z| + 2^-Fo without. No overflow, weight clip or index clamp may
    happen (the caller checks the events); relu's clamp at 0 is relu itself.
    """
    e = np.zeros((result.n, net.n_in))
    x_hat = result.inputs.astype(np.float64) / 2.0**net.input_bits
    in_frac = net.input_bits
    for L, lp, codes, iL in zip(net.layers, plan.layers, result.codes, build_integer_network(net, plan).layers):
        r = 0.5 if lp.weight_round.startswith("half") else 1.0
        qw, qb = 2.0**-lp.weight_frac, 2.0 ** -(in_frac + lp.weight_frac)
        dz = r * qw * np.abs(x_hat).sum(axis=1, keepdims=True) + e @ np.abs(L.weights).T + r * qb
        out_step = 2.0**-iL.out_frac
        if iL.table is not None:
            e = LIPSCHITZ[L.activation] * (dz + 2.0**-lp.table_frac) + out_step
        else:
            e = dz + out_step
        x_hat = np.asarray(codes, dtype=np.float64).reshape(result.n, -1) * out_step
        in_frac = iL.out_frac
    return e[:, 0]


@st.composite
def generous(draw: st.DrawFn) -> tuple[fw.Network, fw.Plan, np.ndarray]:
    net = draw(networks())
    layers = []
    for L in net.layers:
        lp = {"weight_bits": 20, "weight_frac": draw(st.integers(8, 14)), "acc_bits": 62, "out_bits": 16,
              "weight_round": draw(st.sampled_from(ROUNDINGS)), "index_round": draw(st.sampled_from(ROUNDINGS)),
              "table_round": draw(st.sampled_from(ROUNDINGS))}  # fmt: skip
        if L.activation in ("sigmoid", "tanh"):
            lp.update(table_bits=16, table_frac=draw(st.integers(7, 10)))
        else:
            lp.update(out_frac=draw(st.integers(8, 10)))
        layers.append(lp)
    return net, fw.Plan.from_dict({"layers": layers}), pixels(draw, 400)


@settings(max_examples=examples(250))
@given(generous())
def test_generous_widths_decide_like_float_outside_the_error_bound(case):
    count("kernel: decisions within the error bound")
    net, plan, codes = case
    result = fw.emulate(net, plan, codes)
    for L, ev in zip(net.layers, result.events):
        assume(ev["acc_overflow"].sum() == 0 and ev["weight_clip"].sum() == 0 and ev["table_high"].sum() == 0)
        if L.activation != "relu":
            assume(ev["table_low"].sum() == 0)
    bound = error_bound(net, plan, result)
    fixed_value = result.out_codes[:, 0] / 2.0 ** build_integer_network(net, plan).layers[-1].out_frac
    y = result.float_out[:, 0]
    assert np.all(np.abs(fixed_value - y) <= bound + 1e-12)  # 1e-12: float64 round-off of the reference
    far = np.abs(y - net.threshold) > bound
    note(f"{int(far.sum())} of {len(y)} outputs are farther than the bound from the threshold")
    assert np.array_equal(result.decisions[far], result.float_decisions[far])


# -- 3. more address bits, same range ------------------------------------------------------------
def table_bound(lipschitz: float, table_frac: int, index_round: str, out_frac: int) -> float:
    """Bound on |table output - f(s / 2^acc_frac)| for an unclamped index (derivation, no source):
    index rounding moves the input by < 2^-Ft (half-* modes: <= 2^-(Ft+1)), the activation scales
    that by L, and the entry's rounding and clamp add <= 2^-Fo."""
    step = 2.0**-table_frac * (0.5 if index_round.startswith("half") else 1.0)
    return lipschitz * step + 2.0**-out_frac


@settings(max_examples=examples(150))
@given(st.sampled_from(["sigmoid", "tanh"]), st.integers(3, 13), st.integers(-1, 8), st.integers(4, 12),
       st.sampled_from(ROUNDINGS), st.sampled_from(ROUNDINGS), st.integers(0, 2**32 - 1))  # fmt: skip
def test_more_table_bits_over_the_same_range_never_worsen_the_bound(act, t_bits, t_frac, out_bits, idx_round,
                                                                     tab_round, seed):  # fmt: skip
    count("kernel: table bits vs error bound")
    net = fw.Network.from_layers([([[1.0, 0.0, 0.0]], [0.0], act)])
    bounds = []
    rng = np.random.default_rng(seed)
    for extra in (0, 1):  # one more address bit and one more fraction bit: the same range, half the step
        lp = {"weight_bits": 16, "weight_frac": 6, "acc_bits": 40, "out_bits": out_bits, "table_bits": t_bits + extra,
              "table_frac": t_frac + extra, "index_round": idx_round, "table_round": tab_round}  # fmt: skip
        plan = fw.Plan.from_dict({"layers": [lp]})
        layer = build_integer_network(net, plan).layers[0]
        k = layer.shift
        # exact sums whose index is not clamped (for both tables: the range is the same)
        lo = (layer.index_min + 1) * 2.0**k
        hi = (layer.index_max - 1) * 2.0**k
        s = np.unique(np.concatenate([rng.integers(int(lo), int(hi) + 1, 2000), [int(lo), int(hi), 0]]))
        out = post_accumulate(layer, s.astype(np.int64))
        got = np.asarray(out["codes"], dtype=np.float64) / 2.0**layer.out_frac
        want = activate(s / 2.0**layer.acc_frac, act)
        bound = table_bound(LIPSCHITZ[act], lp["table_frac"], idx_round, layer.out_frac)
        assert np.max(np.abs(got - want)) <= bound + 1e-12
        bounds.append(bound)
    assert bounds[1] <= bounds[0]


# -- 4. the safe accumulator width ---------------------------------------------------------------
@settings(max_examples=examples(250))
@given(st.data())
def test_safe_accumulator_width_never_overflows(data):
    count("kernel: safe accumulator width")
    net = data.draw(networks())
    plan = plan_for(data.draw, net, acc_bits=62)
    intnet = build_integer_network(net, plan)
    safe = [int(L.safe_acc_bits.max()) for L in intnet.layers]
    assume(max(safe) <= 62)
    plan = fw.Plan(tuple(lp.__class__(**{**lp.to_dict(), "acc_bits": a}) for lp, a in zip(plan.layers, safe)))
    codes = pixels(data.draw)
    # and the corners that reach the extreme sums of layer 1: each input at 0 or at full scale by weight sign
    q_w = intnet.layers[0].q_w
    corners = np.concatenate([np.where(q_w > 0, 255, 0), np.where(q_w < 0, 255, 0)]).astype(np.uint8)
    result = fw.emulate(net, plan, np.concatenate([codes, corners]))
    # the contract promises neither an accumulator overflow nor a bias clamp at this width (semantics.md,
    # "Guaranteed-safe accumulator width": the interval holds the raw bias too)
    for li, (L, ev, lo, hi) in enumerate(
        zip(build_integer_network(net, plan).layers, result.events, result.observed_min, result.observed_max)
    ):
        assert np.all(ev["bias_clip"] == 0), f"layer {li + 1}"
        assert np.all(ev["acc_overflow"] == 0), f"layer {li + 1}"
        a_lo, a_hi = signed_range(L.plan.acc_bits)
        assert np.all(lo >= a_lo) and np.all(hi <= a_hi)


# -- 5. an image is its pixels -------------------------------------------------------------------
@settings(max_examples=examples(100))
@given(st.data())
def test_image_equals_its_pixels_in_any_chunks(data):
    count("kernel: image vs pixel list")
    net = data.draw(networks())
    plan = plan_for(data.draw, net)
    h, w = data.draw(st.sampled_from([(1, 1), (3, 5), (17, 13), (64, 70), (70, 64)]))  # 4480 px: the pair tables
    img = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1))).integers(0, 256, (h, w, 3), dtype=np.uint8)
    whole = fw.emulate(net, plan, img)
    flat = img.reshape(-1, 3)
    as_list = fw.emulate(net, plan, flat.astype(data.draw(st.sampled_from([np.uint8, np.int64, np.uint16]))))
    cut = data.draw(st.integers(0, len(flat)))
    parts = [fw.emulate(net, plan, flat[:cut]), fw.emulate(net, plan, flat[cut:])]
    assert whole.out_codes.shape == (h, w, 1) and whole.decisions.shape == (h, w)
    assert np.array_equal(whole.decisions.reshape(-1), as_list.decisions)
    assert np.array_equal(np.concatenate([p.decisions for p in parts]), as_list.decisions)
    for li in range(len(net.layers)):
        assert np.array_equal(whole.acc[li].reshape(len(flat), -1), as_list.acc[li])
        assert np.array_equal(whole.codes[li].reshape(len(flat), -1), as_list.codes[li])
        assert np.array_equal(np.concatenate([p.acc[li] for p in parts]), as_list.acc[li])
        for name in ("acc_overflow", "table_low", "table_high"):
            assert np.array_equal(parts[0].events[li][name] + parts[1].events[li][name], as_list.events[li][name])
            assert np.array_equal(whole.events[li][name], as_list.events[li][name])
    # a strided (non-contiguous) view of the same pixels changes nothing either
    view = np.ascontiguousarray(img[:, ::-1])[:, ::-1]
    assert np.array_equal(fw.emulate(net, plan, view).out_codes, whole.out_codes)
