"""refine: exactly representable results, never worse, deterministic, brute-force and gradient checks."""

import itertools
import re
import time
from fractions import Fraction
from pathlib import Path

import fxref
import numpy as np
import pytest
from fxpmath import Fxp
from scipy.optimize import check_grad

from fxnet_widgets.core.formats import ROUNDINGS
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.kernel import build_integer_network, emulate
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import LayerPlan, Plan
from fxnet_widgets.core.refine import Refinement, exact_network, refine
from fxnet_widgets.core.refine._finetune import Objective, integer_loss, relaxed_loss
from fxnet_widgets.core.refine._integer import IntegerPass, Samples

ASSETS = Path(__file__).resolve().parents[2] / "assets"


@pytest.fixture(scope="module")
def demo():
    net = Network.load(ASSETS / "network.json")
    plan = Plan.load(ASSETS / "plan.json", net)
    train = read_image(ASSETS / "scene-train.png").codes.reshape(-1, 3)
    test = read_image(ASSETS / "scene-test.png").codes.reshape(-1, 3)
    rng = np.random.default_rng(0)
    return net, plan, train[rng.choice(train.shape[0], 20_000, replace=False)], test


def narrow(plan, w1, f1, w2, f2):
    return plan.replace(layer=0, weight_bits=w1, weight_frac=f1).replace(layer=1, weight_bits=w2, weight_frac=f2)


def tiny():
    net = Network.from_layers([([[1.3, -0.9]], [0.2], "sigmoid")], input_names=["a", "b"])
    plan = Plan.uniform(net, weight_bits=4, weight_frac=2, acc_bits=16, out_bits=8, table_bits=10, table_frac=6)
    grid = np.stack(np.meshgrid(np.arange(0, 256, 9), np.arange(0, 256, 9)), -1).reshape(-1, 2)
    return net, plan, grid


def check_exact(r: Refinement):
    """The plan's rounding is the identity on the refined network (kernel, Fraction and fxpmath)."""
    net, plan = r.network, r.plan
    ints = build_integer_network(net, plan)
    in_frac = net.input_bits
    for L, IL, lp in zip(net.layers, ints.layers, plan.layers):
        assert IL.weight_clip.sum() == 0 and IL.bias_clip.sum() == 0
        for w, q in zip(L.weights.ravel().tolist(), IL.q_w.ravel().tolist()):
            # exact rationals (Python's fractions module): w * 2^Fw is the integer itself
            assert Fraction(w) * Fraction(2) ** lp.weight_frac == q
            # fxpmath (an outside fixed-point library) stores the same raw integer with no rounding
            for mode in ("trunc", "around"):
                x = Fxp(w, True, lp.weight_bits, lp.weight_frac, rounding=mode)
                assert int(x.val) == q and float(x.get_val()) == w
        acc_frac = in_frac + lp.weight_frac
        for b, q in zip(L.bias.tolist(), IL.q_b.tolist()):
            assert Fraction(b) * Fraction(2) ** acc_frac == q
        in_frac = IL.out_frac
    for mode in ROUNDINGS:  # every rounding mode of the contract reproduces the same integers
        other = build_integer_network(net, plan.replace(weight_round=mode))
        for a, b in zip(ints.layers, other.layers):
            assert np.array_equal(a.q_w, b.q_w) and np.array_equal(a.q_b, b.q_b)


@pytest.mark.parametrize("method", ["rounding", "finetune", "both"])
def test_demo_narrow_plan_is_exact_and_never_worse(demo, method):
    net, plan, codes, _ = demo
    p = narrow(plan, 6, 1, 5, 2)
    r = refine(net, p, codes, method=method, seed=3, steps=1500)
    check_exact(r)
    assert r.after.errors <= r.before.errors
    assert r.before.samples == 15_000 and r.before.holdout_samples == 5_000
    assert r.after.holdout_errors is not None
    # every figure is the kernel's: recount with emulate on the same split
    order = np.random.default_rng(3).permutation(codes.shape[0])
    hold, train = codes[order[:5000]], codes[order[5000:]]
    for sub, n_err in ((train, r.after.errors), (hold, r.after.holdout_errors)):
        e = emulate(r.network, p, sub)
        assert int(np.count_nonzero(e.decisions != emulate(net, p, sub).float_decisions)) == n_err
    assert str(r.after.errors) in r.summary()


def test_worked_example_recovers_most_of_the_loss_at_narrow_widths(demo):
    # 5-bit layer-1 weights with 1 fraction bit clip six weights and lose ~2.7 % of the pixels;
    # fine-tuning through the integer network recovers most of it, also on the other scene
    net, plan, codes, test = demo
    p = narrow(plan, 5, 1, 4, 1)
    r = refine(net, p, codes, method="both")
    assert r.improved
    assert r.after.errors <= 0.25 * r.before.errors
    assert r.after.holdout_errors < r.before.holdout_errors
    fd = emulate(net, p, test).float_decisions
    plain = int(np.count_nonzero(emulate(net, p, test).decisions != fd))
    refined = int(np.count_nonzero(emulate(r.network, p, test).decisions != fd))
    assert refined < 0.75 * plain
    check_exact(r)


def test_deterministic_by_seed(demo):
    net, plan, codes, _ = demo
    p = narrow(plan, 6, 1, 5, 2)
    a = refine(net, p, codes[:4000], method="rounding", seed=7, steps=400)
    b = refine(net, p, codes[:4000], method="rounding", seed=7, steps=400)
    assert a.network == b.network and a.after == b.after and a.summary() == b.summary()


def test_exhaustive_matches_brute_force_with_the_slow_reference():
    # brute force: every combination of floor/ceil of the three values, each network run
    # through tests/_support/fxref.py (Python ints and Fraction, written from the contract)
    net, plan, grid = tiny()
    codes = grid[::7]
    target = np.asarray(emulate(net, plan, codes).float_decisions)
    r = refine(net, plan, codes, holdout_fraction=0)
    assert "exhaustive" in r.steps[0]
    x = [1.3 * 4, -0.9 * 4, 0.2 * 2 ** 10]
    choices = [sorted({int(np.floor(v)), int(np.ceil(v))}) for v in x]
    best = None
    for w0, w1, b in itertools.product(*choices):
        doc = net.to_dict()
        doc["layers"][0]["weights"] = [[w0 / 4, w1 / 4]]
        doc["layers"][0]["bias"] = [b / 2 ** 10]
        dec = fxref.run(doc, plan.to_dict(), codes.tolist())["decisions"]
        errs = int(np.count_nonzero(np.array(dec) != target))
        best = errs if best is None else min(best, errs)
    assert r.after.errors == best
    assert r.after.errors < r.before.errors  # this network gains (a check that the example is not trivial)
    check_exact(r)


def test_integer_pass_agrees_with_the_kernel_after_random_changes(demo):
    net, plan, codes, _ = demo
    p = narrow(plan, 6, 1, 5, 2)
    sub = codes[:3000]
    intnet = build_integer_network(net, p)
    samples = Samples(sub, np.zeros(sub.shape[0], dtype=np.int64))
    ip = IntegerPass(intnet, samples, [L.q_w for L in intnet.layers], [L.q_b for L in intnet.layers])
    rng = np.random.default_rng(1)
    for _ in range(25):
        li = int(rng.integers(2))
        j = int(rng.integers(ip.q_w[li].shape[0]))
        i = int(rng.integers(ip.q_w[li].shape[1] + 1))
        ip.set(li, j, i, int(rng.integers(-12, 12)))
        if rng.random() < 0.5:
            continue
        refined = exact_network(net, intnet, ip.q_w, ip.q_b)
        e = emulate(refined, p, sub)
        # the pass works on distinct rows: spread its decisions back by matching rows
        rows = {tuple(r): d for r, d in zip(samples.inputs.T.tolist(), ip.decisions().tolist())}
        counts = np.array([rows[tuple(r)] for r in sub.tolist()])
        assert np.array_equal(counts, e.decisions)


def test_energy_is_the_kernels_errors_and_distances(demo):
    # the search's objective, recounted from emulate's output codes: errors, then the wrong samples'
    # distance (in output codes) from the threshold over (code span x samples + 1)
    net, plan, codes, _ = demo
    p = narrow(plan, 5, 0, 4, 1)
    sub = codes[:4000]
    intnet = build_integer_network(net, p)
    target = emulate(net, p, sub).float_decisions.astype(np.int64)
    samples = Samples(sub, target)
    ip = IntegerPass(intnet, samples, [L.q_w for L in intnet.layers], [L.q_b for L in intnet.layers])
    last = intnet.layers[-1]
    thr, span = intnet.threshold_code, last.code_max - last.code_min + 1
    rng = np.random.default_rng(4)
    for _ in range(12):
        li = int(rng.integers(2))
        j = int(rng.integers(ip.q_w[li].shape[0]))
        i = int(rng.integers(ip.q_w[li].shape[1] + 1))
        lp = p.layers[li]
        bits = lp.weight_bits if i < ip.q_w[li].shape[1] else lp.acc_bits
        now = int(ip.q_w[li][j, i] if i < ip.q_w[li].shape[1] else ip.q_b[li][j])
        # stay inside the two's-complement range (outside it the plan would clip the exact network)
        ip.set(li, j, i, min(max(now + int(rng.integers(-2, 3)), -(1 << (bits - 1))), (1 << (bits - 1)) - 1))
        energy, errors = ip.energy()
        e = emulate(exact_network(net, intnet, ip.q_w, ip.q_b), p, sub)
        out = e.out_codes.reshape(-1).astype(np.int64)
        wrong = e.decisions != target
        dist = np.where(target == 1, thr - out, out - thr + 1)[wrong]
        assert errors == int(wrong.sum())
        assert energy == (0.0 if not errors else errors + int(dist.sum()) / (span * sub.shape[0] + 1.0))


def _objective(n_out, p, rng):
    t = rng.uniform(0.05, 0.95, (n_out, p))
    if n_out > 1:
        t = t / t.sum(axis=0)
    return Objective(t, np.full(p, 1.0 / p), 0.0, 1.0)


@pytest.mark.parametrize(("acts", "dims"), [(("sigmoid", "sigmoid"), (3, 3, 1)), (("tanh", "identity"), (3, 4, 3)),
                                            (("relu", "tanh"), (2, 3, 1))])
def test_relaxed_gradient_matches_finite_differences(acts, dims):
    # scipy.optimize.check_grad: the 2-norm of (analytic - forward difference) gradient
    rng = np.random.default_rng(0)
    p = 40
    x = rng.uniform(0, 1, (dims[0], p))
    obj = _objective(dims[-1], p, rng)
    shapes = []
    for a, b in zip(dims[:-1], dims[1:]):
        shapes += [(b, a), (b,)]
    sizes = [int(np.prod(s)) for s in shapes]

    def unpack(v):
        out, k = [], 0
        for s, n in zip(shapes, sizes):
            out.append(v[k:k + n].reshape(s))
            k += n
        return out

    out_max = [100.0] * len(acts)  # no clip in play
    f = lambda v: relaxed_loss(unpack(v), list(acts), x, out_max, obj)[0]  # noqa: E731
    g = lambda v: np.concatenate([a.ravel() for a in relaxed_loss(unpack(v), list(acts), x, out_max, obj)[1]])  # noqa: E731
    v0 = rng.normal(0, 0.7, sum(sizes))
    err = check_grad(f, g, v0, epsilon=1e-7)
    assert err < 1e-5 * max(1.0, float(np.linalg.norm(g(v0))))


def test_straight_through_gradient_is_the_relaxed_one_at_a_fine_plan():
    # at very fine widths the integer network is the relaxed one to within its LSBs,
    # so the straight-through gradient must come out (almost) equal
    rng = np.random.default_rng(2)
    net = Network.from_layers([(rng.normal(0, 2, (3, 3)), rng.normal(0, 0.5, 3), "sigmoid"),
                               (rng.normal(0, 2, (1, 3)), rng.normal(0, 0.5, 1), "sigmoid")])
    plan = Plan.uniform(net, weight_bits=30, weight_frac=24, acc_bits=62, out_bits=16, table_bits=20,
                        table_frac=15)
    codes = rng.integers(0, 256, (500, 3))
    intnet = build_integer_network(net, plan)
    samples = Samples(codes, np.zeros(500, dtype=np.int64))
    obj = Objective(rng.uniform(0.1, 0.9, (1, samples.distinct)), samples.counts / samples.total, 0.0, 1.0)
    params = [a for L in net.layers for a in (L.weights, L.bias)]
    _, g_int, _ = integer_loss(params, intnet, samples, obj)
    x = np.ldexp(samples.inputs.astype(np.float64), -8)
    _, g_rel = relaxed_loss(params, ["sigmoid", "sigmoid"], x, [65535 / 65536], obj)
    for a, b in zip(g_int, g_rel):
        np.testing.assert_allclose(a, b, rtol=2e-3, atol=1e-7)


def test_no_gain_keeps_plain_rounding_with_a_note(demo):
    net, plan, codes, _ = demo
    r = refine(net, plan, codes[:2000], method="rounding", holdout_fraction=0, steps=50)
    assert r.before.errors == 0 and not r.improved
    assert any("no gain" in n for n in r.notes)
    ints, orig = build_integer_network(r.network, plan), build_integer_network(net, plan)
    for a, b in zip(ints.layers, orig.layers):
        assert np.array_equal(a.q_w, b.q_w) and np.array_equal(a.q_b, b.q_b)
    assert r.after.holdout_errors is None


def test_labels_target_and_given_holdout(demo):
    net, plan, codes, test = demo
    p = narrow(plan, 6, 1, 5, 2)
    labels = emulate(net, plan, codes).float_decisions  # any labels: here the float decisions
    hold = test[::50]
    hold_labels = np.asarray(emulate(net, plan, hold).float_decisions)
    r = refine(net, p, codes, labels=np.asarray(labels), holdout=hold, holdout_labels=hold_labels, steps=1500)
    assert r.target == "labels" and r.after.holdout_samples == hold.shape[0]
    assert r.after.errors <= r.before.errors and r.before.samples == codes.shape[0]
    h = int(np.count_nonzero(emulate(r.network, p, hold).decisions != hold_labels))
    assert r.after.holdout_errors == h


def test_stop_and_progress(demo):
    net, plan, codes, _ = demo
    p = narrow(plan, 6, 1, 5, 2)
    seen = []
    r = refine(net, p, codes[:3000], method="both", stop=lambda: True, progress=lambda d, t: seen.append((d, t)))
    assert r.after.errors <= r.before.errors
    assert seen[-1] == (1000, 1000) and [d for d, _ in seen] == sorted(d for d, _ in seen)
    check_exact(r)


def test_full_input_scale_is_folded():
    net, plan, grid = tiny()
    full = Network.from_layers([([[1.3, -0.9]], [0.2], "sigmoid")], input_names=["a", "b"], input_scale="full")
    r = refine(full, plan, grid, holdout_fraction=0)
    assert r.network.input_scale == "pow2" and any("full" in n for n in r.notes)
    assert r.after.errors <= r.before.errors
    check_exact(r)


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"method": "exact"}, "method must be one of rounding, finetune, both, not 'exact'"),
    ({"target": "labels"}, "labels must be given with target='labels', not None"),
    ({"budget_s": 0}, "budget_s must be None or a positive number of seconds, not 0"),
    ({"reach": 3}, "reach must be 1 or 2, not 3"),
    ({"holdout_fraction": 1.0}, "holdout_fraction must be at least 0 and below 1, not 1.0"),
    ({"epochs": -1}, "epochs must be an integer of at least 0, not -1"),
])
def test_errors(kwargs, message):
    net, plan, grid = tiny()
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        refine(net, plan, grid, **kwargs)


def test_command_line_writes_an_exact_network(tmp_path, demo):
    from fxnet_widgets.cli import main

    net, plan, codes, _ = demo
    p = narrow(plan, 6, 1, 5, 2)
    p.save(tmp_path / "plan.json")
    np.save(tmp_path / "codes.npy", codes[:4000])
    out = tmp_path / "refined.json"
    args = [str(ASSETS / "network.json"), str(tmp_path / "plan.json"), str(tmp_path / "codes.npy"), "-o", str(out)]
    assert main(["refine", *args, "--seed", "2", "--quiet"]) == 0
    refined = Network.load(out)
    api = refine(net, p, codes[:4000], seed=2)
    assert refined == api.network  # the file holds exactly what the function returns (JSON floats round-trip)
    check_exact(Refinement(refined, p, api.before, api.after, "float", "rounding", True, 0.0, ()))
    assert main(["refine", *args, "--method", "exact"]) == 2


def _other_networks():
    rng = np.random.default_rng(5)
    relu3 = Network.from_layers([(rng.normal(0, 4, (4, 3)), rng.normal(0, 0.5, 4), "relu"),
                                 (rng.normal(0, 2, (3, 4)), rng.normal(0, 0.5, 3), "identity")],
                                classes=["a", "b", "c"])
    relu_plan = Plan(tuple(LayerPlan(weight_bits=4, weight_frac=1, acc_bits=20, out_bits=6, out_frac=4)
                           for _ in range(2)))
    tanh = Network.from_layers([(rng.normal(0, 4, (3, 3)), rng.normal(0, 0.5, 3), "tanh"),
                                (rng.normal(0, 2, (1, 3)), rng.normal(0, 0.5, 1), "sigmoid")])
    tanh_plan = Plan.uniform(tanh, weight_bits=4, weight_frac=1, acc_bits=20, out_bits=6, table_bits=8, table_frac=4)
    return [(relu3, relu_plan), (tanh, tanh_plan)]


@pytest.mark.parametrize("case", [0, 1], ids=["relu-identity-3-classes", "tanh-sigmoid"])
@pytest.mark.parametrize("method", ["rounding", "finetune", "both"])
def test_other_activations_and_several_classes(case, method):
    net, plan = _other_networks()[case]
    codes = np.random.default_rng(case).integers(0, 256, (3000, 3))
    r = refine(net, plan, codes, method=method, steps=600, epochs=80)
    assert r.after.errors <= r.before.errors
    check_exact(r)
    labels = np.asarray(emulate(net, plan, codes).float_decisions)
    r2 = refine(net, plan, codes, labels=labels, method=method, steps=600, epochs=80)
    assert r2.target == "labels" and r2.after.errors <= r2.before.errors


def test_time_budget_is_kept(demo):
    net, plan, codes, _ = demo
    p = narrow(plan, 6, 1, 5, 2)
    t0 = time.monotonic()
    r = refine(net, p, codes, method="both", budget_s=0.5)
    # the budget is checked every few evaluations, so the overrun is bounded by a handful of them
    # plus the final emulations; generous on a shared machine
    assert time.monotonic() - t0 < 4.0
    assert r.after.errors <= r.before.errors
    check_exact(r)


@pytest.mark.parametrize("overflow", ["wrap", "saturate"])
@pytest.mark.parametrize("index_round", ["floor", "half-even"])
def test_integer_pass_agrees_with_the_kernel_with_overflows_and_clamps(demo, overflow, index_round):
    # a narrow accumulator overflows and a short table clamps: the search's pass must still be the kernel's
    net, plan, codes, _ = demo
    p = narrow(plan, 6, 1, 5, 2).replace(acc_overflow=overflow, index_round=index_round, table_bits=6)
    p = p.replace(layer=0, acc_bits=12)
    sub = codes[:2000]
    e0 = emulate(net, p, sub)
    assert e0.event_totals()["acc_overflow"] > 0 and e0.event_totals()["table_high"] > 0
    r = refine(net, p, sub, steps=300, holdout_fraction=0)  # refine raises if its count and the kernel's differ
    assert r.after.errors <= r.before.errors
    intnet = build_integer_network(net, p)
    samples = Samples(sub, np.zeros(sub.shape[0], dtype=np.int64))
    ip = IntegerPass(intnet, samples, [L.q_w for L in intnet.layers], [L.q_b for L in intnet.layers])
    ip.set(0, 0, 3, int(ip.q_b[0][0]) + 700)
    ip.set(1, 0, 1, int(ip.q_w[1][0, 1]) - 3)
    rows = {tuple(row): d for row, d in zip(samples.inputs.T.tolist(), ip.decisions().tolist())}
    e = emulate(exact_network(net, intnet, ip.q_w, ip.q_b), p, sub)
    assert np.array_equal(np.array([rows[tuple(row)] for row in sub.tolist()]), e.decisions)
