"""Sweeps and tune on imported multi-class networks: relu and tanh hidden layers, 1-3 hidden layers.

Outside data: scikit-image's sample photo ``skimage.data.astronaut`` (public domain, NASA), three colour
classes by scikit-learn's ``KMeans``, networks trained by scikit-learn's ``MLPClassifier``.
"""

import warnings

import numpy as np
import pytest

import fxnet_widgets as fw
from fxnet_widgets.core.analysis import SerialExecutor, sweep, tune
from fxnet_widgets.core.analysis.search.evaluate import argmax_ties
from fxnet_widgets.core.starting import suggest_plan


@pytest.fixture(scope="module")
def photo():
    sk_data = pytest.importorskip("skimage.data")
    px = sk_data.astronaut()[..., :3].reshape(-1, 3)
    return px[np.random.default_rng(0).choice(len(px), 6000, replace=False)]


def imported(photo, hidden, activation):
    cluster = pytest.importorskip("sklearn.cluster")
    neural = pytest.importorskip("sklearn.neural_network")
    x = photo[:5000] / 255.0
    y = cluster.KMeans(3, n_init=2, random_state=0).fit(x).predict(x)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # ConvergenceWarning: a few hundred iterations are enough here
        clf = neural.MLPClassifier(hidden, activation=activation, max_iter=200, random_state=0).fit(x, y)
    return fw.from_sklearn(clf, trained_on="full")


@pytest.mark.slow
@pytest.mark.parametrize("hidden, activation, default_start", [((6,), "relu", True), ((6, 4), "tanh", False),
                                                               ((8, 6, 4), "relu", False)])  # fmt: skip
def test_tune_meets_its_budget_on_imported_networks(photo, hidden, activation, default_start):
    net = imported(photo, hidden, activation)
    assert net.layers[-1].activation == "identity" and net.n_out == 3
    codes = photo[5000:5500]
    start = None if default_start else suggest_plan(net, codes)
    budget = 0.02
    res = tune(net, codes, budget, start=start, executor=SerialExecutor())
    e = fw.emulate(net, res.plan, codes)
    ties, tied_agreeing = argmax_ties(e.out_codes, e.decisions, e.float_decisions)
    # the budget holds with lucky ties counted as differing, and no accumulator overflows
    assert (e.mismatch + tied_agreeing) / e.n <= budget and e.event_totals()["acc_overflow"] == 0
    assert res.verified and res.local_minimum
    assert res.cost.total_bits < fw.hardware_cost(net, res.start).total_bits
    # output fractions of the relu/identity layers were among the accepted moves
    plain = {i for i, L in enumerate(net.layers) if L.activation in ("relu", "identity")}
    assert any(s.move in ("out_lsb", "out_msb") and s.layer in plain for s in res.steps)


def test_sweep_varies_the_output_fraction_of_relu_and_identity_layers(photo):
    net = imported(photo, (6,), "relu")
    codes = photo[5000:5800]
    base = suggest_plan(net, codes)
    fracs = [2, 4, 6, 8]
    recs = sweep(net, codes, {"out_frac": fracs}, base=base, executor=SerialExecutor())
    for r, f in zip(recs, fracs):
        assert r.ok and [lp.out_frac for lp in r.plan.layers] == [f, f]
        # keep_range: the width moves with the fraction, so the range of the base stays
        assert [lp.out_bits - lp.out_frac for lp in r.plan.layers] == [lp.out_bits - lp.out_frac for lp in base.layers]
        e = fw.emulate(net, r.plan, codes)
        assert (r.mismatch, r.ties) == (e.mismatch, argmax_ties(e.out_codes, e.decisions, e.float_decisions)[0])
    # the coarsest logits (2 fraction bits) tie where the finest (8) do not
    assert recs[0].ties > recs[-1].ties


def test_ties_are_counted_and_a_lucky_tie_breaks_the_budget():
    # two identical logits: every decision is a tie, decided by the lowest index (semantics.md step 8)
    net = fw.Network.from_layers([([[1.0, 0.0, 0.0], [1.0, 0.0, 0.0]], [0.0, 0.0], "identity")], classes=["a", "b"])
    codes = np.random.default_rng(3).integers(0, 256, (200, 3), dtype=np.uint8)
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=6, acc_bits=16, out_bits=10, out_frac=8)
    (r,) = sweep(net, codes, {"out_bits": [10]}, base=plan, executor=SerialExecutor())
    # float argmax of equal values is index 0 too (numpy.argmax documents the first occurrence)
    assert r.mismatch == 0 and r.ties == r.tied_agreeing == 200 and r.strict_mismatch == 200
    with pytest.raises(ValueError, match=r"agree only through a tie"):
        tune(net, codes, 0.5, start=plan, executor=SerialExecutor())
