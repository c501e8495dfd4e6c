"""The guaranteed-safe accumulator width holds the sum interval and the raw bias (semantics.md,
"Guaranteed-safe accumulator width"), checked by enumerating every input of small networks."""

import itertools

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core.formats import ROUNDINGS
from fxnet_widgets.core.kernel import build_integer_network

ACTS = ["sigmoid", "tanh", "relu", "identity"]


@st.composite
def cases(draw):
    n_in = draw(st.integers(1, 2))
    bits = draw(st.integers(1, 5))
    hidden = draw(st.integers(1, 2))
    act = draw(st.sampled_from(ACTS))
    # biases up to +-64 with weights up to +-4: bias-dominated neurons are common (the case the old text missed)
    w = st.floats(-4, 4, allow_nan=False, width=32)
    b = st.floats(-64, 64, allow_nan=False, width=32)
    layers = [(draw(st.lists(st.lists(w, min_size=n_in, max_size=n_in), min_size=hidden, max_size=hidden)),
               draw(st.lists(b, min_size=hidden, max_size=hidden)), act)]  # fmt: skip
    if draw(st.booleans()):
        layers.append(([draw(st.lists(w, min_size=hidden, max_size=hidden))], [draw(b)], "sigmoid"))
    net = fw.Network.from_layers(layers, input_names=[f"x{i}" for i in range(n_in)], input_bits=bits)
    plan_layers = []
    for L in net.layers:
        lp = {"weight_bits": draw(st.integers(2, 10)), "weight_frac": draw(st.integers(0, 6)), "acc_bits": 62,
              "out_bits": draw(st.integers(2, 8)), "weight_round": draw(st.sampled_from(ROUNDINGS))}  # fmt: skip
        if L.activation in ("sigmoid", "tanh"):
            lp |= {"table_bits": draw(st.integers(2, 8)), "table_frac": draw(st.integers(0, 6))}
        else:
            lp["out_frac"] = draw(st.integers(0, 6))
        plan_layers.append(lp)
    inputs = np.array(list(itertools.product(range(2**bits), repeat=n_in)), dtype=np.int64)
    return net, fw.Plan.from_dict({"layers": plan_layers}), inputs


def _with_acc(plan, widths):
    return fw.Plan(tuple(lp.__class__(**{**lp.to_dict(), "acc_bits": int(a)}) for lp, a in zip(plan.layers, widths)))


@settings(max_examples=60, deadline=None)
@given(cases())
def test_safe_width_never_overflows_or_clamps_the_bias_and_one_bit_less_breaks(case):
    net, plan, inputs = case
    safe = [int(L.safe_acc_bits.max()) for L in build_integer_network(net, plan).layers]
    at_safe = fw.emulate(net, _with_acc(plan, safe), inputs)
    for li, ev in enumerate(at_safe.events):
        # the contract's promise, over every input: no overflow, no bias clamp at the safe width
        assert ev["acc_overflow"].sum() == 0 and ev["bias_clip"].sum() == 0, f"layer {li + 1}"
    # layer 1 sees every input code, so its interval is tight: each end is reached by a corner input
    # (every input at its smallest or largest code by the weight's sign) or is the bias itself. One bit
    # less must then break the neuron that needs the most bits (interval arithmetic, common practice)
    if safe[0] > 1:
        layer1 = build_integer_network(net, plan).layers[0]
        widest = int(np.argmax(layer1.safe_acc_bits))
        narrower = fw.emulate(net, _with_acc(plan, [safe[0] - 1, *safe[1:]]), inputs).events[0]
        assert narrower["acc_overflow"][widest] > 0 or narrower["bias_clip"][widest] > 0
