"""One steps 4-7 evaluation over the union of a layer's look-up domains (kernel/evaluate.py).

Every neuron of a layer shares its plan, so each neuron's look-up table is a slice of one table
over the union of their domains. The layer's outputs must be identical to those of one table per
neuron (the path taken before), on hypothesis cases of every mode, on both kernel paths.
"""

import numpy as np
import pytest
from fxcases import draw_network_and_plan
from hypothesis import given, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core import kernel
from fxnet_widgets.core.kernel import _compiled
from fxnet_widgets.core.kernel import evaluate as ev


def _outputs(net, plan, codes, shared, path):
    kernel.clear_caches()
    with pytest.MonkeyPatch.context() as m:
        m.setenv("FXNET_KERNEL", path)
        m.setattr(_compiled, "MIN_SAMPLES", 0)
        if not shared:
            m.setattr(ev, "_shared_domain", lambda *a: None)
        r = fw.emulate(net, plan, codes)
        out = (
            [a.tolist() for a in r.acc], [c.tolist() for c in r.codes],
            [{k: v.tolist() for k, v in e.items()} for e in r.events], r.decisions.tolist(),
        )  # fmt: skip
    kernel.clear_caches()
    return out


@settings(max_examples=60, deadline=None)
@given(st.data())
def test_slices_of_the_union_table_equal_one_table_per_neuron(data):
    doc, plans, bits, n_in = draw_network_and_plan(data.draw, max_bits=9)
    # several neurons per layer, so the union is used (three outputs of the first layer at least)
    doc["layers"][0]["weights"] = (doc["layers"][0]["weights"] * 3)[:3]
    # other biases per copy: overlapping domains that are not equal
    doc["layers"][0]["bias"] = [b + 0.3 * k for k, b in enumerate((doc["layers"][0]["bias"] * 3)[:3])]
    if len(doc["layers"]) > 1:
        doc["layers"][1]["weights"] = [(row * 3)[:3] for row in doc["layers"][1]["weights"]]
    net = fw.Network.from_dict(doc)
    plan = fw.Plan.from_dict({"layers": plans})
    n = data.draw(st.sampled_from([300, 5000]))
    codes = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1))).integers(0, 1 << bits, (n, n_in))
    for path in ("numpy", "numba"):
        assert _outputs(net, plan, codes, True, path) == _outputs(net, plan, codes, False, path)
