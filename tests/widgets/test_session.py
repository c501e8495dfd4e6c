"""The session and the views created alone on one shared session."""

from __future__ import annotations

import numpy as np
import pytest
from widget_checks import decode_classes, slice_input

from fxnet_widgets.core.kernel import build_integer_network, emulate
from fxnet_widgets.widgets import (
    CubePanel,
    EventsPlot,
    HistogramPlot,
    PlanControlsPanel,
    PreviewPanel,
    Session,
    SlicePlot,
    StatusLinePanel,
    SweepProgressBar,
)
from fxnet_widgets.widgets.binning import exact_sums, histogram_edges
from fxnet_widgets.widgets.events import log_heights
from fxnet_widgets.widgets.session import default_plan


def test_views_created_alone_on_one_session_stay_in_step(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    s = Session(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)
    slice_view = SlicePlot(s, 2)
    events = EventsPlot(s)
    hist = HistogramPlot(s, 3)
    preview = PreviewPanel(s)
    # two control panels on one session: either drives, both follow
    c1, c2 = PlanControlsPanel(s), PlanControlsPanel(s)
    c1.sliders["acc_bits"].value = 12
    assert c2.sliders["acc_bits"].value == 12
    c2.choices["acc_overflow"].value = "saturate"
    assert c1.choices["acc_overflow"].value == "saturate"
    plan = s.plan
    assert [(lp.acc_bits, lp.acc_overflow) for lp in plan.layers] == [(12, "saturate")] * 2
    img = emulate(fruit_net, plan, belt_image)
    smp = emulate(fruit_net, plan, codes)
    assert np.array_equal(decode_classes(preview.fixed_image.value, 2), img.decisions)
    grid = emulate(fruit_net, plan, slice_input(np.arange(0, 256, 2), 1, 2, 0, s.slice_red))
    assert (slice_view.heatmap.color[grid.decisions != grid.float_decisions] >= 2).all()
    assert np.array_equal(slice_view.values(s.result), np.where(
        grid.decisions == grid.float_decisions, grid.decisions, np.where(grid.decisions > grid.float_decisions, 2, 3)
    ))  # fmt: skip
    want = [int(img.events[l][e][j]) + int(smp.events[l][e][j])
            for l, n in ((0, 3), (1, 1)) for j in range(n) for e in ("acc_overflow",)]  # fmt: skip
    assert events.counts[0].tolist() == want
    assert np.array_equal(events.bars.y, log_heights(events.counts))
    assert events.bars.y.dtype == np.float32
    assert hist.neuron.label == "L2 n1"
    assert int(hist.neuron.counts.sum()) == belt_image.shape[0] * belt_image.shape[1] + len(codes)


def test_histogram_counts_equal_the_kernel_events(fruit_net, fruit_plan, belt_image):
    """Bins outside the accumulator range count the overflows; below/above the table window the clamps."""
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    checked = {"acc": 0, "table": 0}
    for plan in (
        fruit_plan.replace(acc_bits=13),  # overflows (wrap)
        fruit_plan.replace(table_bits=7, table_frac=5),  # table clamps, no overflow
        fruit_plan.replace(acc_bits=12, acc_overflow="saturate"),
    ):
        s.plan = plan
        emu = emulate(fruit_net, plan, belt_image)
        for nr in s.result.neurons:
            e = nr.edges
            assert np.all(np.diff(e) == e[1] - e[0])
            ev = emu.events[nr.layer]
            outside_acc = nr.counts[(e[1:] <= nr.acc_edges[0]) | (e[:-1] >= nr.acc_edges[1])].sum()
            if nr.acc_edges[0] in e and nr.acc_edges[1] in e:
                assert outside_acc == ev["acc_overflow"][nr.neuron]
                checked["acc"] += int(ev["acc_overflow"][nr.neuron] > 0)
            if not ev["acc_overflow"][nr.neuron] and plan.layers[nr.layer].index_round == "floor":
                lo, hi = nr.table_edges
                assert lo in e and hi in e
                # contract step 5: with floor, index a < -2^(T-1) exactly when s_A < -2^(T-1) * 2^k
                assert nr.counts[e[1:] <= lo].sum() == ev["table_low"][nr.neuron]
                assert nr.counts[e[:-1] >= hi].sum() == ev["table_high"][nr.neuron]
                checked["table"] += int(ev["table_low"][nr.neuron] + ev["table_high"][nr.neuron] > 0)
            assert nr.events["acc_overflow"] == int(ev["acc_overflow"][nr.neuron])
    assert checked["acc"] >= 3 and checked["table"] >= 3  # the checks above were not vacuous


def test_exact_sums_are_the_accumulator_before_wrapping(fruit_net, fruit_plan, belt_image):
    plan = fruit_plan.replace(acc_bits=12)
    emu = emulate(fruit_net, plan, belt_image)
    assert emu.event_totals()["acc_overflow"] > 0
    for li in range(2):
        s = exact_sums(emu, li)
        a = 12
        # two's complement wrap, by definition: ((s + 2^(A-1)) mod 2^A) - 2^(A-1) (common practice)
        wrapped = ((s + 2 ** (a - 1)) % 2**a) - 2 ** (a - 1)
        assert np.array_equal(wrapped, emu.acc[li].reshape(emu.n, -1))
        L = build_integer_network(fruit_net, plan).layers[li]
        assert (s >= np.array(L.sum_min)).all() and (s <= np.array(L.sum_max)).all()


@pytest.mark.parametrize(
    "lo,hi,marks,bins", [(-5, 900, (-512, 512), 64), (3, 3, (), 8), (-70000, -3, (-65536, 65536), 64)]
)
def test_histogram_edges_cover_and_align(lo, hi, marks, bins):
    e = histogram_edges(lo, hi, marks, bins)
    w = int(e[1] - e[0])
    assert w & (w - 1) == 0 and e[0] % w == 0
    assert e[0] <= min(lo, *marks) if marks else e[0] <= lo
    assert e[-1] >= max(hi + 1, *marks) if marks else e[-1] >= hi + 1
    assert len(e) - 1 <= 2 * bins + 2
    for m in marks:
        if m % w == 0:
            assert m in e


def test_wide_image_is_previewed_subsampled_and_full_on_demand(fruit_net, fruit_plan):
    rng = np.random.default_rng(2)
    wide = rng.integers(0, 256, (7, 1300, 3)).astype(np.uint8)
    s = Session(fruit_net, image=wide, plan=fruit_plan)
    p = PreviewPanel(s)
    assert s.result.image.factor == 3  # ceil(1300 / 640)
    small = wide[::3, ::3]
    assert np.array_equal(decode_classes(p.fixed_image.value, 2), emulate(fruit_net, fruit_plan, small).decisions)
    assert "preview 434x3: every 3th pixel of the 1300x7 input" in p.note.value
    assert "downscaled" in p.note.value
    p.full_resolution.value = True
    assert s.full_resolution
    assert np.array_equal(decode_classes(p.fixed_image.value, 2), emulate(fruit_net, fruit_plan, wide).decisions)
    assert "full resolution 1300x7" in p.note.value


def test_cube_panel_counts_grid_disagreements(fruit_net, fruit_plan):
    plan = fruit_plan.replace(acc_bits=13)
    s = Session(fruit_net, plan=plan, cube_points=8)
    cube = CubePanel(s, size=128)
    c = np.arange(8) * 32 + 16
    g = np.stack(np.meshgrid(c, c, c, indexing="ij"), -1).reshape(-1, 3).astype(np.uint8)
    emu = emulate(fruit_net, plan, g)
    assert s.result.cube.mismatch == emu.mismatch
    assert f"{emu.mismatch} of 512 grid points differ" in cube.caption.value
    assert cube.image.value[:8] == b"\x89PNG\r\n\x1a\n"
    # without image or samples the events are counted on the cube grid
    assert s.result.data_name == "cube grid"
    assert s.result.event_totals()["acc_overflow"] == emu.event_totals()["acc_overflow"]


def test_default_plan_is_safe_and_valid(fruit_net):
    plan = default_plan(fruit_net)
    intnet = build_integer_network(fruit_net, plan)
    assert all(L.plan.acc_bits == int(L.safe_acc_bits.max()) for L in intnet.layers)
    assert all(int(L.weight_clip.sum()) == 0 for L in intnet.layers)


def test_status_line_and_progress_bar(fruit_net, fruit_plan):
    s = Session(fruit_net, plan=fruit_plan, cube_points=4)
    line = StatusLinePanel(s)
    assert line.text.startswith("ok: update 1, accumulator overflows 0")
    bar = SweepProgressBar("sweep")
    bar(12, 12, "done")
    assert (bar.bar.value, bar.bar.max, bar.label.value, bar.bar.bar_style) == (12, 12, "12 of 12: done", "success")
    with pytest.raises(ValueError, match=r"^done must be between 0 and total >= 1, not 5 of 4$"):
        bar(5, 4)


def test_bad_arguments_are_clear(fruit_net, belt_image, labelled_samples):
    codes, labels = labelled_samples
    with pytest.raises(TypeError, match=r"^network must be a Network, not str$"):
        Session("net.json")
    with pytest.raises(ValueError, match=r"^labels must have shape \(60,\) for the samples, not \(59,\)$"):
        Session(fruit_net, samples=codes, labels=labels[:-1])
    with pytest.raises(ValueError, match=r"^labels must be between 0 and 1 \(class indices\), not 2$"):
        Session(fruit_net, samples=codes, labels=labels + 1)
    with pytest.raises(ValueError, match=r"^image must be between 0 and 255 \(8-bit unsigned\), not 300$"):
        Session(fruit_net, image=np.full((2, 2, 3), 300, np.int32))
    with pytest.raises(ValueError, match=r"^slice_points must be an integer between 2 and 1024, not 1$"):
        Session(fruit_net, slice_points=1)
    s = Session(fruit_net, cube_points=4)
    with pytest.raises(ValueError, match=r"^the preview needs a session with an image$"):
        PreviewPanel(s)
    with pytest.raises(ValueError, match=r"^which must be 0, 1 or 2, not 3$"):
        SlicePlot(s, 3)
    with pytest.raises(
        ValueError, match=r"^unknown is not a session state key \(known: full_resolution, plan, slice\)$"
    ):
        s.set_state({"unknown": 1})


def test_relu_and_three_class_network_in_the_explorer(belt_image):
    """A 3-4-3 network (relu hidden layer, identity outputs, argmax of three classes)."""
    from widget_checks import decode_classes as decode

    from fxnet_widgets.core.network import Network
    from fxnet_widgets.render.palette import slice_palette
    from fxnet_widgets.widgets import Explorer

    rng = np.random.default_rng(8)
    net = Network.from_layers(
        [
            (rng.normal(0, 2, (4, 3)), rng.normal(0, 0.3, 4), "relu"),
            (rng.normal(0, 2, (3, 4)), np.zeros(3), "identity"),
        ],
        classes=["unripe", "turning", "ripe"],
    )
    ex = Explorer(net, image=belt_image)
    c = ex.controls
    # no tables in this network: no table controls; the output fraction (relu/identity) instead
    assert all(c.rows[f].layout.display == "none" for f in ("table_bits", "table_frac"))
    assert c.rows["out_frac"].layout.display == ""
    c.sliders["acc_bits"].value = 9
    c.sliders["out_bits"].value = 6
    emu = emulate(net, ex.plan, belt_image)
    assert np.array_equal(decode(ex.preview.fixed_image.value, 3), emu.decisions)
    assert ex.events.counts.shape == (4, 7)
    sl = ex.session.result.slices[0]
    want = np.where(sl.fixed == sl.float_, sl.fixed, 3)  # three classes: agreed class, or 3 where they differ
    assert np.array_equal(ex.boundary.slices[0].heatmap.color, want.astype(np.float32))
    assert ex.boundary.slices[0].cs.max == len(slice_palette(3)) - 1
    for hp in ex.histograms.plots:
        assert int(hp.neuron.counts.sum()) == belt_image.shape[0] * belt_image.shape[1]


def test_starting_plan_notes_say_how_each_format_was_chosen():
    """Without a plan the session starts on core.starting's plan for its data and keeps its notes."""
    import numpy as np

    import fxnet_widgets as fw
    from fxnet_widgets.core.starting import starting_plan

    net = fw.Network.from_layers([([[1.0, 0.0, 0.0]], [0.0], "relu"), ([[1.0], [-1.0]], [0.0, 0.0], "identity")],
                                 classes=["a", "b"])  # fmt: skip
    data = np.array([[0, 0, 0], [60, 9, 9]], dtype=np.uint8)
    explorer = fw.Explorer(net, samples=data)
    expected = starting_plan(net, [data])
    assert explorer.plan == expected.plan and explorer.session.start_notes == expected.notes
    # the note names the kept range (observed plus the margin) and the layer it belongs to
    assert "layer 1 (relu)" in explorer.start_note.value and "observed range" in explorer.start_note.value
    given = fw.Explorer(net, samples=data, plan=expected.plan)
    assert given.session.start_notes == () and given.start_note is None
