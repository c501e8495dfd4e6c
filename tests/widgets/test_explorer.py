"""The explorer without a browser: set control values, read the views' arrays, compare with the kernel."""

from __future__ import annotations

import json

import numpy as np
import pytest
from widget_checks import assert_explorer_matches_kernel, refuse_out_bits_4

from fxnet_widgets.core.kernel import build_integer_network, emulate
from fxnet_widgets.core.plan import CHOICES
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.controls import CHOICE_FIELDS


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    return Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)


def test_initial_views_match_kernel(explorer):
    assert_explorer_matches_kernel(explorer)
    assert explorer.status.text.startswith("ok: update 1,")


# new values per slider that move away from the fixture plan (and stay valid)
SLIDER_VALUES = {
    "weight_bits": [6, 4],
    "weight_frac": [3, 6],
    "acc_bits": [14, 11],
    "table_bits": [8, 5],
    "table_frac": [5, 10],
    "out_bits": [5, 3],
}


@pytest.mark.parametrize("field", list(SLIDER_VALUES))
def test_each_slider_changes_views_as_the_kernel_says(explorer, field):
    s = explorer.session
    before = s.version
    for v in SLIDER_VALUES[field]:
        explorer.controls.sliders[field].value = v
        assert all(getattr(lp, field) == v for lp in explorer.plan.layers)
        assert explorer.controls.boxes[field].value == str(v)
        assert_explorer_matches_kernel(explorer)
    assert s.version == before + len(SLIDER_VALUES[field])


@pytest.mark.parametrize("field", list(CHOICE_FIELDS))
def test_each_choice_changes_views_as_the_kernel_says(explorer, field):
    explorer.controls.sliders["acc_bits"].value = 13  # so overflow mode matters
    explorer.controls.sliders["table_frac"].value = 9  # index shift 4/6: index rounding matters
    for v in CHOICES[field]:
        explorer.controls.choices[field].value = v
        assert all(getattr(lp, field) == v for lp in explorer.plan.layers)
        assert_explorer_matches_kernel(explorer)


def test_layer_choice_acts_on_one_layer_and_controls_follow(explorer, fruit_plan):
    c = explorer.controls
    c.layer.value = 1
    c.sliders["acc_bits"].value = 12
    assert explorer.plan.layers[1].acc_bits == 12
    assert explorer.plan.layers[0].acc_bits == fruit_plan.layers[0].acc_bits
    c.layer.value = 0
    assert c.sliders["acc_bits"].value == fruit_plan.layers[0].acc_bits
    assert c.sliders["weight_frac"].value == 5
    c.layer.value = 1
    assert c.sliders["weight_frac"].value == 7
    assert_explorer_matches_kernel(explorer)


def test_number_box_drives_the_slider_and_the_plan(explorer):
    c = explorer.controls
    c.boxes["acc_bits"].value = "15"
    assert c.sliders["acc_bits"].value == 15
    assert [lp.acc_bits for lp in explorer.plan.layers] == [15, 15]
    c.boxes["acc_bits"].value = "63"  # beyond the contract's limit of 62: refused, said, snapped back
    assert explorer.session.error == "accumulator width must be an integer between 1 and 62, not '63'"
    assert c.boxes["acc_bits"].value == "15"
    c.boxes["acc_bits"].value = "wide"
    assert explorer.session.error == "accumulator width must be an integer between 1 and 62, not 'wide'"
    assert c.boxes["acc_bits"].value == "15"
    assert [lp.acc_bits for lp in explorer.plan.layers] == [15, 15]


def test_no_browser_side_links_between_controls(explorer):
    """A jslink copies a value the kernel wrote into a partner, which sends it back as if a person had (issue 19)."""
    from ipywidgets.embed import dependency_state

    state = dependency_state([explorer.controls], drop_defaults=True)
    assert [m for m in state.values() if m["model_name"] in ("LinkModel", "DirectionalLinkModel")] == []


def test_safe_button_sets_guaranteed_width_and_removes_overflow(explorer, fruit_net):
    c = explorer.controls
    c.sliders["acc_bits"].value = 10
    assert explorer.session.result.event_totals()["acc_overflow"] > 0
    c.safe_button.click()
    intnet = build_integer_network(fruit_net, explorer.plan)
    for L, lp in zip(intnet.layers, explorer.plan.layers):
        assert lp.acc_bits == int(L.safe_acc_bits.max())
    # the contract: at the guaranteed-safe width no input can overflow (semantics.md)
    assert explorer.session.result.event_totals()["acc_overflow"] == 0
    assert "can overflow" not in c.safe_label.value
    assert_explorer_matches_kernel(explorer)


def test_slice_sliders_move_the_slices(explorer):
    b = explorer.boundary
    b.slices[0].position.value = 40  # R-G slice at blue 40
    b.slices[2].position.value = 210  # G-B slice at red 210
    assert explorer.session.slice_positions == (210, 128, 40)
    assert_explorer_matches_kernel(explorer)
    for mode, attr in (("fixed point", "fixed"), ("float", "float_")):
        b.mode.value = mode
        for sp in b.slices:
            want = getattr(explorer.session.result.slices[sp.which], attr)
            assert np.array_equal(sp.heatmap.color, want.astype(np.float32))


def test_sample_points_near_each_slice(explorer, labelled_samples):
    codes, labels = labelled_samples
    sp = explorer.boundary.slices[1]  # R-B at green
    sp.position.value = 100
    near = np.abs(codes[:, 1].astype(int) - 100) <= 8  # 4 grid steps of 2 codes
    assert len(sp.points) == 2  # one mark per class: its own shape and outline
    assert sp.points[0].marker != sp.points[1].marker
    for k, mark in enumerate(sp.points):
        mine = near & (labels == k)
        assert np.array_equal(mark.x, codes[mine, 0].astype(np.float32))
        assert np.array_equal(mark.y, codes[mine, 2].astype(np.float32))
    assert sum(m.x.size for m in sp.points) == int(near.sum())


def test_sample_dots_are_outlined_in_the_contrasting_colour(explorer):
    from fxnet_widgets.render.palette import class_colours, hex_colour

    slate, amber = (hex_colour(c) for c in class_colours(2))
    other, ripe = explorer.boundary.slices[0].points
    # the fills are the class colours; a dark fill gets a white outline, a light one a black outline
    assert (other.colors, other.stroke) == ([slate], "#ffffff")
    assert (ripe.colors, ripe.stroke) == ([amber], "#000000")


def test_explorer_shows_every_section_at_once(explorer):
    import ipywidgets as w

    assert list(explorer.sections) == ["decision boundary", "refine", "image", "overflow and clamps", "hardware"]
    assert all(sec in explorer.children for sec in explorer.sections.values())

    def walk(widget):
        yield widget
        for child in getattr(widget, "children", ()):
            yield from walk(child)

    # no tab or accordion: a figure in a hidden page is drawn at zero size (negative bqplot rects)
    assert not any(isinstance(x, (w.Tab, w.Accordion, w.Stack)) for x in walk(explorer))
    assert explorer.sections["overflow and clamps"].children[1].children[0] is explorer.events


def test_status_line_shows_the_plan_widths(explorer):
    explorer.controls.sliders["table_bits"].value = 7
    assert explorer.status.text.endswith("; widths L1 W10.5 A18 T7.8 O8, L2 W10.7 A19 T7.8 O8")


def test_many_rapid_changes_end_in_the_last_state(explorer):
    rng = np.random.default_rng(3)
    c = explorer.controls
    last = {}
    for _ in range(40):
        field = list(SLIDER_VALUES)[rng.integers(len(SLIDER_VALUES))]
        v = int(rng.choice(SLIDER_VALUES[field] + [c.sliders[field].min + 2]))
        c.sliders[field].value = v
        last[field] = v
    for field, v in last.items():
        assert all(getattr(lp, field) == v for lp in explorer.plan.layers)
        assert c.sliders[field].value == v
    assert_explorer_matches_kernel(explorer)


def test_changes_made_inside_an_update_win(explorer):
    """A view that changes the plan while the session dispatches: the newest plan is shown everywhere."""
    s = explorer.session
    seen = []

    def meddle(result):
        seen.append(result.plan.layers[0].acc_bits)
        if result.plan.layers[0].acc_bits == 16:
            s.plan = s.plan.replace(acc_bits=12)

    s.add_view("meddler", meddle)
    explorer.controls.sliders["acc_bits"].value = 16
    assert [lp.acc_bits for lp in explorer.plan.layers] == [12, 12]
    assert explorer.controls.sliders["acc_bits"].value == 12
    assert seen[-1] == 12
    assert_explorer_matches_kernel(explorer)


def test_failing_view_shows_in_status_line_and_others_keep_working(explorer):
    s = explorer.session

    def broken(result):
        if result.plan.layers[0].acc_bits == 14:
            raise RuntimeError("boom")

    s.add_view("broken view", broken)
    explorer.controls.sliders["acc_bits"].value = 14
    assert s.view_errors == {"broken view": "broken view: RuntimeError: boom"}
    assert "view error: broken view: RuntimeError: boom" in explorer.status.text
    assert "#b00020" in explorer.status.value
    assert_explorer_matches_kernel(explorer)
    explorer.controls.sliders["acc_bits"].value = 15
    assert s.view_errors == {}
    assert explorer.status.text.startswith("ok:")


def test_core_error_shows_in_status_line_and_views_keep_last_good(explorer, monkeypatch):
    refuse_out_bits_4(monkeypatch)
    good = explorer.plan
    explorer.controls.sliders["out_bits"].value = 4
    assert explorer.session.error == "ValueError: layers[0]: refused for the test"
    assert explorer.status.text == (
        "error: ValueError: layers[0]: refused for the test (views show the last plan that worked)"
    )
    assert explorer.session.result.plan == good  # the views still show the last good plan
    assert explorer.controls.sliders["out_bits"].value == 4  # the controls show what was asked
    explorer.controls.sliders["out_bits"].value = 6
    assert explorer.session.error == ""
    assert_explorer_matches_kernel(explorer)


def test_widget_get_state_round_trips(explorer, fruit_net, fruit_plan, belt_image):
    c = explorer.controls
    c.sliders["weight_bits"].value = 7
    c.choices["acc_overflow"].value = "saturate"
    c.layer.value = 1
    c.sliders["acc_bits"].value = 13
    other = Explorer(fruit_net, image=belt_image, plan=fruit_plan)
    oc = other.controls
    # replay the widget states in the order a front end would restore them
    for a, b in [(c.sliders["weight_bits"], oc.sliders["weight_bits"]),
                 (c.choices["acc_overflow"], oc.choices["acc_overflow"]),
                 (c.layer, oc.layer), (c.sliders["acc_bits"], oc.sliders["acc_bits"])]:  # fmt: skip
        state = a.get_state()
        b.set_state({k: state[k] for k in ("value", "index") if k in state})
        assert b.get_state() | {"layout": 0, "style": 0} == state | {"layout": 0, "style": 0}
    assert other.plan == explorer.plan


def test_session_state_round_trips_through_json(explorer, fruit_net, fruit_plan, belt_image):
    explorer.controls.sliders["table_bits"].value = 9
    explorer.boundary.slices[0].position.value = 30
    state = json.loads(json.dumps(explorer.session.get_state()))
    other = Explorer(fruit_net, image=belt_image, plan=fruit_plan)
    other.session.set_state(state)
    assert other.plan == explorer.plan
    assert other.session.slice_positions == explorer.session.slice_positions
    assert other.controls.sliders["table_bits"].value == 9
    assert other.boundary.slices[0].position.value == 30
    assert other.session.get_state() == state


def test_summary_is_deterministic_text(explorer, fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    text = explorer.summary()
    again = Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan).summary()
    assert text == again
    lines = text.splitlines()
    assert lines[0] == f"plan: {fruit_plan!r}"
    emu = emulate(fruit_net, fruit_plan, belt_image)
    assert f"image (full resolution 40x24): {emu.mismatch} of 960 pixels differ from float" in lines
    assert lines[-1].startswith("status: ok: update 1,")


def test_plan_is_saveable(explorer, tmp_path, fruit_net):
    from fxnet_widgets.core.plan import Plan

    explorer.controls.sliders["acc_bits"].value = 16
    explorer.plan.save(tmp_path / "plan.json")
    assert Plan.load(tmp_path / "plan.json", fruit_net) == explorer.plan


def test_browser_drag_is_coalesced_and_the_latest_value_wins(explorer):
    """Front-end updates arriving together (a drag) are computed once, for the last value."""
    import asyncio

    s = explorer.session
    slider = explorer.controls.sliders["acc_bits"]
    position = explorer.boundary.slices[0].position

    async def drag() -> tuple[int, int]:
        before = s.computed
        for v in (17, 16, 15, 14, 13):
            slider.set_state({"value": v})  # what ipywidgets does with a front-end update message
        for v in (10, 20, 30):
            position.set_state({"value": v})
        waiting = s.computed
        assert s.pending
        await asyncio.sleep(3 * s.coalesce_seconds)  # the event loop runs the one scheduled computation
        return before, waiting

    before, waiting = asyncio.run(drag())
    assert waiting == before
    assert s.computed == before + 1
    assert [lp.acc_bits for lp in explorer.plan.layers] == [13, 13]
    assert s.slice_blue == 30
    assert_explorer_matches_kernel(explorer)


def test_browser_updates_apart_in_time_are_each_computed(explorer):
    import asyncio

    s = explorer.session
    slider = explorer.controls.sliders["acc_bits"]

    async def steps() -> int:
        before = s.computed
        for v in (16, 15, 14):
            slider.set_state({"value": v})
            await asyncio.sleep(3 * s.coalesce_seconds)
        return before

    before = asyncio.run(steps())
    assert s.computed == before + 3
    assert_explorer_matches_kernel(explorer)


def test_reading_the_result_computes_a_waiting_change(explorer):
    import asyncio

    s = explorer.session

    async def read() -> int:
        explorer.controls.sliders["acc_bits"].set_state({"value": 12})
        assert s.pending
        return s.result.plan.layers[0].acc_bits  # computed on reading

    assert asyncio.run(read()) == 12
    assert not s.pending


def test_overlay_caption_says_how_many_pixels_differ(explorer):
    im = explorer.session.result.image
    m = im.mismatch
    text = explorer.preview.overlay_caption.value
    if m == 0:
        assert "no pixel differs" in text
    else:
        assert f"{m} pixel" in text
    explorer.controls.sliders["table_bits"].value = 2  # a coarse table: the decisions move
    m2 = explorer.session.result.image.mismatch
    assert m2 != m and f">{m2} pixel" in explorer.preview.overlay_caption.value


def test_metrics_panel_formats_the_session_figures(explorer):
    """The panel lays out the structured figures of the result (no text parsed back), every text escaped."""
    import html
    import re

    from fxnet_widgets.core.analysis.cost import hardware_cost
    from fxnet_widgets.core.analysis.metrics import error_metrics
    from fxnet_widgets.widgets.metrics import Row, rows_html

    r = explorer.session.result
    value = explorer.metrics.html.value
    assert value.startswith("<table") and "<pre" not in value
    cells = [html.unescape(re.sub(r"<br>", "; ", c)) for c in re.findall(r"<t[dh][^>]*>(.*?)</t[dh]>", value)]
    # the confusion matrix of the samples, cell by cell, equals the analysis layer's own
    want = error_metrics(r.samples.emulation, r.samples.labels).confusion
    samples_fig = next(f for f in r.figures if f.name == "samples")
    assert samples_fig.metrics.confusion == want
    assert all(str(v) in cells for row in want for v in row)
    cost = hardware_cost(explorer.session.network, r.plan)
    assert r.cost.totals() == cost.totals()
    assert any(f"total bits {cost.total_bits}" in c for c in cells)
    assert "&lt;b&gt;" in rows_html([Row("<b>", depth=0), Row("a", ("<i>",))])


def test_log_axes_have_at_most_five_decade_ticks(explorer):
    from fxnet_widgets.widgets.events import log_ticks

    for top in (1.0, 9.0, 10.0, 500.0, 2e5, 2e6, 1e9):
        t = log_ticks(top)
        assert 1 <= t.size <= 5 and t[0] == 1.0 and t[-1] <= top
        assert np.allclose(np.log10(t), np.round(np.log10(t)))  # decades only
    assert explorer.events.y_axis.tick_values.size <= 5
