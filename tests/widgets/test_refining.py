"""The explorer's refine panel without a browser: click, wait, read the views, toggle, stop, change the plan."""

from __future__ import annotations

import html
from fractions import Fraction

import numpy as np
import pytest
from widget_checks import assert_explorer_matches_kernel, slice_input

from fxnet_widgets.core.kernel import build_integer_network, emulate
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.refine import refine
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.boundary import boundary_points


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    ex = Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)
    # 4-bit integer weights: plain rounding disagrees with float on 66 of the 720 pixels refined on
    ex.plan = fruit_plan.replace(weight_bits=4, weight_frac=0)
    return ex


def shown(ex):
    """Everything the views hold that depends on the network: arrays and text."""
    r = ex.session.result
    return (r.image.fixed.copy(), r.samples.fixed.copy(), [s.fixed.copy() for s in r.slices],
            r.cube.fixed.copy(), ex.session.summary())  # fmt: skip


def same(a, b):
    return all(np.array_equal(x, y) for x, y in zip(a[0:2] + (a[3],), b[0:2] + (b[3],))) and all(
        np.array_equal(x, y) for x, y in zip(a[2], b[2])) and a[4] == b[4]  # fmt: skip


def assert_exact_under(net: Network, plan) -> None:
    """w * 2^Fw and b * 2^(Fin + Fw) are the plan's integers exactly (Python's fractions: exact rationals)."""
    ints = build_integer_network(net, plan)
    in_frac = net.input_bits
    for L, IL, lp in zip(net.layers, ints.layers, plan.layers):
        for w, q in zip(L.weights.ravel().tolist(), IL.q_w.ravel().tolist()):
            assert Fraction(w) * 2**lp.weight_frac == q
        for b, q in zip(L.bias.tolist(), IL.q_b.tolist()):
            assert Fraction(b) * 2 ** (in_frac + lp.weight_frac) == q
        in_frac = IL.out_frac


def test_click_refine_swaps_in_the_refined_network(explorer, fruit_net):
    ex, panel = explorer, explorer.refining
    plain = shown(ex)
    assert panel.summary() == "refine: not run (plain rounding)" and panel.use.disabled
    panel.run_button.click()  # the button: a background thread
    assert panel.join(60)
    r = panel.refinement
    assert r is not None and r.plan == ex.plan and panel.shown == "refined"
    assert ex.session.network is r.network and ex.session.result.plan == ex.plan
    assert_exact_under(r.network, ex.plan)
    # the views hold what the kernel computes for the refined network under the plan
    assert_explorer_matches_kernel(ex)
    assert not same(shown(ex), plain)
    # the before/after figures, recounted here against the *original* float network's decisions
    codes = ex.session.image.reshape(-1, 3)
    assert r.before.samples + r.before.holdout_samples == codes.shape[0] == 960
    want = emulate(fruit_net, ex.plan, codes).float_decisions
    assert panel.image_figures == (int(np.count_nonzero(emulate(fruit_net, ex.plan, codes).decisions != want)),
                                   int(np.count_nonzero(emulate(r.network, ex.plan, codes).decisions != want)), 960)
    # the same call of core refine gives the same network (the panel adds nothing of its own)
    again = refine(fruit_net, ex.plan, codes, method="rounding", seed=0, holdout_fraction=0.25)
    assert again.network == r.network and (again.before, again.after) == (r.before, r.after)
    assert r.after.errors < r.before.errors
    assert panel.text == (f"disagreement with the float network, plain rounding -> refined: {r.before.errors} -> "
                          f"{r.after.errors} of 720 refined on; {r.before.holdout_errors} -> {r.after.holdout_errors}"
                          f" of 240 held out; {panel.image_figures[0]} -> {panel.image_figures[1]} of the image's "
                          "960 pixels (all of them refined on or held out)")
    assert html.escape(panel.text) in panel.line.value
    assert panel.summary().startswith("refine: showing refined\nrefine (rounding, against the float decisions):")
    assert "their 'float' stays the original float network" in panel.note.value
    assert ex.summary().endswith("\n" + panel.summary())  # the explorer's text says which network it shows


def float64_decisions(net: Network, codes: np.ndarray) -> np.ndarray:
    """The network's float forward pass worked here in float64 (semantics.md: inputs code / 2^bits,
    x @ W.T + b per layer, the layer's activation, then argmax, or >= threshold for one output)."""
    x = np.asarray(codes, np.float64).reshape(-1, net.n_in) / 2.0**net.input_bits
    acts = {"sigmoid": lambda v: 1.0 / (1.0 + np.exp(-v)), "tanh": np.tanh, "relu": lambda v: np.maximum(v, 0.0),
            "identity": lambda v: v}  # fmt: skip
    for L in net.layers:
        x = acts[L.activation](x @ np.asarray(L.weights, np.float64).T + np.asarray(L.bias, np.float64))
    dec = (x[:, 0] >= net.threshold).astype(np.int64) if x.shape[1] == 1 else np.argmax(x, axis=1)
    return dec.reshape(np.shape(codes)[:-1])


def test_after_a_swap_every_view_compares_with_the_original_float_network(explorer, fruit_net):
    ex, panel = explorer, explorer.refining
    plain = shown(ex)
    plain_figures = [(f.metrics.mismatch, f.agreement, f.ties) for f in ex.session.result.figures]
    panel.run(wait=True)
    refined, plan, r = panel.refinement.network, ex.plan, ex.session.result
    assert panel.shown == "refined" and ex.session.network is refined and ex.session.data.reference is fruit_net
    # outside reference: the original network's own float64 forward pass, worked here
    im = r.image
    want_float = float64_decisions(fruit_net, im.codes)
    assert np.array_equal(np.asarray(emulate(fruit_net, plan, im.codes).float_decisions), want_float)  # sanity
    assert not np.array_equal(want_float, float64_decisions(refined, im.codes))  # the two float passes differ
    fixed = np.asarray(emulate(refined, plan, im.codes).decisions)
    assert np.array_equal(im.fixed, fixed) and np.array_equal(im.float_, want_float)
    # preview's "where they differ" mask and its count
    assert np.array_equal(im.fixed != im.float_, fixed != want_float)
    assert im.mismatch == int(np.count_nonzero(fixed != want_float))
    assert f"; {im.mismatch} of {im.fixed.size} pixels differ" in ex.preview.note.value
    # metrics / glance disagreement counts and the float-versus-fixed agreement matrix
    for fig, codes in zip(r.figures, (im.codes, ex.session.samples)):
        fl = float64_decisions(fruit_net, codes).ravel()
        fx = np.asarray(emulate(refined, plan, codes).decisions).ravel()
        assert fig.metrics.mismatch == int(np.count_nonzero(fl != fx))
        assert fig.agreement == tuple(tuple(int(np.count_nonzero((fl == i) & (fx == j))) for j in range(2))
                                      for i in range(2))  # fmt: skip
    # the slices' float boundary is the original network's
    c = ex.session.slice_codes
    for sl in r.slices:
        grid = slice_input(c, sl.x_input, sl.y_input, sl.fixed_input, sl.position)
        assert np.array_equal(sl.float_, float64_decisions(fruit_net, grid))
        assert np.array_equal(sl.fixed, emulate(refined, plan, grid).decisions)
    cube = ex.session.data.cube_input
    n = ex.session.data.cube_codes.size
    assert np.array_equal(r.cube.float_, float64_decisions(fruit_net, cube).reshape(n, n, n))
    assert_explorer_matches_kernel(ex)
    # toggle back: exactly the plain result again, figures included
    panel.use.value = "plain"
    assert same(shown(ex), plain)
    assert [(f.metrics.mismatch, f.agreement, f.ties) for f in ex.session.result.figures] == plain_figures


def test_slices_carry_both_boundaries(explorer, fruit_net):
    ex, panel = explorer, explorer.refining
    panel.run(wait=True)
    refined, plan = panel.refinement.network, ex.plan
    c = ex.session.slice_codes
    for which, sp in enumerate(ex.boundary.slices):
        sl = ex.session.result.slices[which]
        grid = slice_input(c, sl.x_input, sl.y_input, sl.fixed_input, sl.position)  # built independently
        # heat map: the refined network; outline: plain rounding's fixed-point boundary
        assert np.array_equal(sl.fixed, emulate(refined, plan, grid).decisions)
        plain = emulate(fruit_net, plan, grid).decisions
        # brute force: every pair of neighbouring grid points with different plain decisions, by loops
        want = set()
        for iy in range(c.size):
            for ix in range(c.size):
                if ix + 1 < c.size and plain[iy, ix] != plain[iy, ix + 1]:
                    want.add(((c[ix] + c[ix + 1]) / 2, float(c[iy])))
                if iy + 1 < c.size and plain[iy, ix] != plain[iy + 1, ix]:
                    want.add((float(c[ix]), (c[iy] + c[iy + 1]) / 2))
        got = set(zip(sp.outline.x.tolist(), sp.outline.y.tolist()))
        assert got == want and len(sp.outline.x) == len(want) > 0
    assert "plain rounding changes" in ex.boundary.outline_note.value
    # the other way round: plain shown, the refined network's boundary outlined
    panel.use.value = "plain"
    sl = ex.session.result.slices[0]
    grid = slice_input(c, sl.x_input, sl.y_input, sl.fixed_input, sl.position)
    px, py = boundary_points(c, c, emulate(refined, plan, grid).decisions)
    assert np.array_equal(ex.boundary.slices[0].outline.x, px.astype(np.float32))
    assert np.array_equal(ex.boundary.slices[0].outline.y, py.astype(np.float32))
    assert "the refined network changes" in ex.boundary.outline_note.value


def test_toggle_back_restores_the_plain_result_exactly(explorer, fruit_net):
    ex, panel = explorer, explorer.refining
    plain = shown(ex)
    panel.run(wait=True)
    refined = shown(ex)
    panel.use.value = "plain"
    assert ex.session.network is fruit_net and panel.shown == "plain"
    assert same(shown(ex), plain)
    assert_explorer_matches_kernel(ex)
    assert panel.note.value == ""
    panel.use.value = "refined"
    assert same(shown(ex), refined)


def test_stop_leaves_the_plain_network(explorer, fruit_net):
    ex, panel = explorer, explorer.refining
    plain = shown(ex)
    first = panel._progress

    def stop_at_first_report(done, total):  # stop as soon as the search reports progress
        first(done, total)
        panel.stop()

    panel._progress = stop_at_first_report
    panel.run()
    assert panel.join(60)
    assert panel.refinement is None and ex.session.network is fruit_net and panel.shown == "plain"
    assert same(shown(ex), plain)
    assert "stopped: nothing changed" in panel.status.value
    assert not panel.run_button.disabled and panel.stop_button.disabled and panel.use.disabled


def test_plan_change_marks_the_refinement_stale(explorer, fruit_net):
    ex, panel = explorer, explorer.refining
    panel.run(wait=True)
    old = ex.plan
    ex.plan = old.replace(layer=1, weight_bits=5)
    # the refined weights are exact only under the old plan: the views go back to plain rounding
    assert panel.stale and panel.shown == "plain" and ex.session.network is fruit_net
    assert_explorer_matches_kernel(ex)
    assert panel.text.startswith("stale (computed for an earlier plan): ")
    assert panel.run_button.description == "re-run for this plan"
    assert panel.use.disabled and all(len(sp.outline.x) == 0 for sp in ex.boundary.slices)
    assert ex.boundary.outline_note.value == ""
    assert panel.summary().startswith("refine: stale (computed for an earlier plan)")
    panel.use.value = "refined"  # refused: nothing valid to show for this plan
    assert panel.shown == "plain" and ex.session.network is fruit_net
    # re-run: a refinement for the plan shown
    panel.run(wait=True)
    assert not panel.stale and panel.refinement.plan == ex.plan and panel.shown == "refined"
    assert_exact_under(panel.refinement.network, ex.plan)
    assert_explorer_matches_kernel(ex)


def test_plan_changed_during_a_run_is_not_swapped_in(explorer, fruit_net):
    ex, panel = explorer, explorer.refining
    first = panel._progress
    moved = []

    def move_plan(done, total):  # the plan changes while the search runs (here from the worker thread)
        first(done, total)
        if not moved:
            moved.append(1)
            ex.plan = ex.plan.replace(layer=1, weight_bits=5)

    panel._progress = move_plan
    panel.run(wait=True)
    assert panel.stale and panel.shown == "plain" and ex.session.network is fruit_net
    assert "not swapped in" in panel.status.value


def test_use_network_refuses_another_layout(explorer, fruit_net):
    s = explorer.session
    other = Network.from_layers([([[1.0, 2.0, 3.0]], [0.0], "sigmoid")], classes=["other", "ripe"])
    with pytest.raises(ValueError, match=r"^network must have the session network's layout, not shape "
                                         r"\(3, 1\) instead of \(3, 3, 1\)$"):  # fmt: skip
        s.use_network(other)
    with pytest.raises(TypeError, match=r"^network must be a Network, not str$"):
        s.use_network("net.json")
    assert s.network is fruit_net


def test_refine_panel_bad_pixels(fruit_net, belt_image):
    from fxnet_widgets.widgets.refining import RefinePanel
    from fxnet_widgets.widgets.session import Session

    with pytest.raises(ValueError, match=r"^pixels must be an integer of at least 2, not 1$"):
        RefinePanel(Session(fruit_net, image=belt_image), pixels=1)


def test_the_button_in_a_live_kernel_swaps_on_the_kernel_thread():
    """A click as the page sends it: refine runs in a worker, the swap happens on the kernel's own thread."""
    import json
    import textwrap
    from pathlib import Path

    jupyter_client = pytest.importorskip("jupyter_client")
    pytest.importorskip("ipykernel")
    from fxkernel import run_code

    root = Path(__file__).resolve().parents[2]
    setup = textwrap.dedent(f"""
        import sys, json, threading, asyncio
        sys.path.insert(0, {str(root)!r})
        import numpy as np
        from fxnet_widgets.core.network import Network
        from fxnet_widgets.core.plan import Plan
        from fxnet_widgets.widgets import Explorer
        net = Network.from_layers([([[9.2, -12.4, -2.9], [8.9, -11.6, -3.2], [-9.4, 12.8, 2.8]],
                                    [-0.36, -0.36, 0.4], "sigmoid"), ([[6.1, 5.7, -6.3]], [-2.9], "sigmoid")])
        plan = Plan.uniform(net, weight_bits=4, weight_frac=0, acc_bits=18, out_bits=8, table_bits=12, table_frac=8)
        img = np.random.default_rng(0).integers(0, 256, (60, 80, 3)).astype(np.uint8)
        ex = Explorer(net, image=img, plan=plan)
        threads = []
        plain_use = ex.session.use_network
        ex.session.use_network = lambda n: (threads.append(threading.current_thread().name), plain_use(n))
        print(json.dumps({{"button": ex.refining.run_button.model_id}}))
        """)
    report = textwrap.dedent("""
        for _ in range(600):  # give the kernel's loop the turn the worker's swap was posted to
            if not ex.refining.running:
                break
            await asyncio.sleep(0.05)
        r = ex.refining.refinement
        print(json.dumps({"threads": threads, "main": threading.main_thread().name, "shown": ex.refining.shown,
                          "swapped": r is not None and ex.session.network is r.network, "error": ex.refining.error,
                          "plan": r is not None and r.plan == ex.session.result.plan}))
        """)
    km, kc = jupyter_client.manager.start_new_kernel(kernel_name="python3")
    try:
        ids = json.loads(run_code(kc, setup, 120).strip().splitlines()[-1])
        click = {"method": "custom", "content": {"event": "click"}}  # what the page sends for a button press
        kc.shell_channel.send(kc.session.msg("comm_msg", {"comm_id": ids["button"], "data": click}))
        end = json.loads(run_code(kc, report, 120).strip().splitlines()[-1])
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)
    assert end["error"] == "" and end["swapped"] and end["plan"] and end["shown"] == "refined"
    assert end["threads"] == [end["main"]]


def test_no_gain_swaps_nothing(fruit_net, belt_image):
    ex = Explorer(fruit_net, image=belt_image)  # the suggested plan: plain rounding already agrees everywhere
    before = emulate(fruit_net, ex.plan, belt_image)
    assert np.count_nonzero(before.decisions != before.float_decisions) == 0
    ex.refining.run(wait=True)
    r = ex.refining.refinement
    assert not r.improved and r.after.errors == r.before.errors == 0
    assert ex.session.network is fruit_net and ex.refining.shown == "plain" and ex.refining.use.disabled
    assert "no gain over plain rounding for this plan: nothing swapped in" in ex.refining.status.value
    assert "(no gain: plain rounding's integers kept)" in ex.refining.text
    ex.refining.use.value = "refined"  # refused
    assert ex.session.network is fruit_net
    assert ex.refining.outline is None and all(len(sp.outline.x) == 0 for sp in ex.boundary.slices)
