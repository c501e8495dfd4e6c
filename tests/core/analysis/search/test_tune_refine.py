"""tune(refine=...): a cheaper plan on the demo, an exactly representable network, the original float as target."""

import json
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest

from fxnet_widgets.core.analysis import SerialExecutor, error_metrics, sweep, tune
from fxnet_widgets.core.analysis.search.refining import check_refine, compare
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.kernel import build_integer_network, emulate
from fxnet_widgets.core.network import Network

ASSETS = Path(__file__).resolve().parents[4] / "assets"
BUDGET = 0.001
OPTIONS = {"tries": 3, "steps": 400}


@pytest.fixture(scope="module")
def demo():
    net = Network.load(ASSETS / "network.json")
    train = read_image(ASSETS / "scene-train.png").codes.reshape(-1, 3)
    codes = train[np.random.default_rng(0).choice(train.shape[0], 4000, replace=False)]
    plain = tune(net, codes, BUDGET, executor=SerialExecutor())
    refined = tune(net, codes, BUDGET, executor=SerialExecutor(), refine="rounding", refine_options=OPTIONS)
    return net, codes, plain, refined


def test_refinement_reaches_a_cheaper_plan_at_a_tight_budget(demo):
    net, codes, plain, res = demo
    assert res.refined and res.verified and any(s.refined for s in res.steps)
    assert res.cost.total_bits < plain.cost.total_bits
    assert res.network is not None and res.network.digest != net.digest
    assert plain.network is net and not plain.refined
    assert "refined integers (rounding)" in res.summary()
    doc = res.to_dict()
    assert doc["refined"] is True and doc["refinement"]["method"] == "rounding" and "seconds" not in doc["refinement"]
    json.dumps(doc, allow_nan=False)
    rec = [r for r in res.records if r.refined]
    assert rec and all(Network.from_dict(dict(r.refined_network)).n_in == 3 for r in rec)
    json.dumps([r.to_dict() for r in rec], allow_nan=False)


def test_the_refined_network_is_exactly_representable(demo):
    _, _, _, res = demo
    intnet = build_integer_network(res.network, res.plan)
    for L, IL in zip(res.network.layers, intnet.layers):
        # exact rationals (Python's fractions module): w * 2^Fw and b * 2^(acc frac) are whole numbers
        for w, q in zip(L.weights.reshape(-1), np.asarray(IL.q_w).reshape(-1)):
            assert Fraction(float(w)) * Fraction(2) ** IL.plan.weight_frac == int(q)
        for b, q in zip(L.bias.reshape(-1), np.asarray(IL.q_b).reshape(-1)):
            assert Fraction(float(b)) * Fraction(2) ** IL.acc_frac == int(q)


def test_the_comparison_is_against_the_original_float(demo):
    net, codes, _, res = demo
    e = emulate(res.network, res.plan, codes)
    original = net.decide(net.predict(codes))  # the given network's float pass, computed here on its own
    differing = int(np.count_nonzero(e.decisions != original))
    assert res.metrics.mismatch == differing and differing / len(codes) <= BUDGET
    assert e.event_totals()["acc_overflow"] == 0
    # the refined network's own float pass is another reference: compare() must not use it
    flipped = 1 - original
    assert compare(e, net.predict(codes), flipped).mismatch == len(codes) - differing
    # with the network's own float as the reference, compare() gives error_metrics' figures
    own = compare(e, e.float_out, e.float_decisions)
    plain = error_metrics(e)
    assert own.mismatch == plain.mismatch and own.max_abs_error_lsb == plain.max_abs_error_lsb
    assert own.mean_abs_error_lsb == pytest.approx(plain.mean_abs_error_lsb, rel=1e-12)


def test_refine_settings_are_checked():
    assert check_refine(False) is None and check_refine(True).method == "rounding"
    assert check_refine("both", {"tries": 2}).tries == 2
    with pytest.raises(ValueError, match=r"^refine must be False, True, 'rounding' or 'both', not 'finetune'$"):
        check_refine("finetune")
    with pytest.raises(ValueError, match=r"^refine_options key must be one of .*, not 'speed'$"):
        check_refine("rounding", {"speed": 1})
    with pytest.raises(ValueError, match=r"^refine_options must be None without refine, not given$"):
        check_refine(False, {"tries": 1})


def test_sweep_refine_keeps_the_better_figures(demo):
    net, codes, _, _ = demo
    grid = {"weight_frac": [1, 2]}
    plain = sweep(net, codes[:2000], grid, executor=SerialExecutor())
    got = sweep(net, codes[:2000], grid, executor=SerialExecutor(), refine="rounding", refine_options=OPTIONS)
    assert [r.plan for r in got] == [r.plan for r in plain]
    assert any(r.refined for r in got)
    original = net.decide(net.predict(codes[:2000]))
    for a, b in zip(plain, got):
        assert b.strict_mismatch <= a.strict_mismatch
        if b.refined:
            refined = Network.from_dict(dict(b.refined_network))
            e = emulate(refined, b.plan, codes[:2000])
            assert b.mismatch == int(np.count_nonzero(e.decisions != original)) < a.mismatch


def test_tune_refine_both_fine_tunes_then_rounds(demo):
    net, codes, _, _ = demo
    small = codes[:2000]
    res = tune(net, small, 0.002, executor=SerialExecutor(), refine="both", refine_options={"tries": 2, "epochs": 40})
    assert res.verified and res.refined and res.refinement["method"] == "both"
    assert res.refinement["steps"][0].startswith("fine-tuning: ") and res.refinement["steps"][1].startswith("rounding")
    e = emulate(res.network, res.plan, small)
    assert int(np.count_nonzero(e.decisions != net.decide(net.predict(small)))) <= 0.002 * len(small)
