"""The widgets under stress: a thousand rapid changes, a failing view, a 4K frame.

The changes arrive as the front end sends them (``set_state`` inside a running
asyncio loop, as ipywidgets applies a comm message: a slider sends a number, a
number box its text), mixed over every slider, number box, choice, the layer
selector and the slice positions, with the event loop let run now and then. The
plan that results is predicted here from the controls' documented rule (a field
changes on the chosen layer, or on every chosen layer that has it; a value equal
to what the control shows is an echo and changes nothing) and every view is
checked against the kernel afterwards.
"""

from __future__ import annotations

import asyncio
import sys
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
from _hardening_support import count  # noqa: E402

import fxnet_widgets as fw  # noqa: E402
from fxnet_widgets.core.plan import CHOICES  # noqa: E402
from fxnet_widgets.render.raster import MAX_PREVIEW_WIDTH  # noqa: E402
from fxnet_widgets.widgets.controls import CHOICE_FIELDS, SLIDER_FIELDS  # noqa: E402
from fxnet_widgets.widgets.explorer import Explorer  # noqa: E402
from fxnet_widgets.widgets.results import SLICES  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "widgets"))
from widget_checks import assert_explorer_matches_kernel  # noqa: E402


def fruit() -> tuple[fw.Network, fw.Plan, np.ndarray]:
    """The produce-sorting demo scenario, invented: ripe fruit is redder than it is green."""
    net = fw.Network.from_layers(
        [([[9.0, -12.0, -3.0], [-9.0, 12.0, 3.0], [0.5, 0.5, -4.0]], [-0.4, 0.4, 1.0], "tanh"),
         ([[3.0, -3.0, 0.5]], [-0.2], "sigmoid")], classes=["other", "ripe"],
    )  # fmt: skip
    plan = fw.Plan.uniform(net, weight_bits=10, weight_frac=5, acc_bits=18, out_bits=8, table_bits=10, table_frac=6)
    rng = np.random.default_rng(11)
    img = rng.integers(0, 256, (30, 44, 3), dtype=np.uint8)
    return net, plan, img


def test_a_thousand_rapid_changes_end_in_the_last_state_with_consistent_views():
    net, plan, img = fruit()
    samples = np.random.default_rng(12).integers(0, 256, (50, 3), dtype=np.uint8)
    ex = Explorer(net, image=img, samples=samples, plan=plan)
    s, c = ex.session, ex.controls
    rng = np.random.default_rng(13)

    def flaky(result):  # one view that fails on some states
        if result.plan.layers[0].acc_bits % 3 == 0:
            raise RuntimeError("flaky view")

    s.add_view("flaky", flaky)
    expected = s.plan
    positions = [sp.position for sp in ex.boundary.slices]

    async def storm() -> fw.Plan:
        nonlocal expected
        for i in range(1000):
            count("widgets: rapid changes")
            kind = rng.integers(10)
            if kind < 5:
                field = list(SLIDER_FIELDS)[rng.integers(len(SLIDER_FIELDS))]
                _, lo, hi = SLIDER_FIELDS[field]
                v = int(rng.integers(lo, hi + 1))
                targets = c.field_targets(field)  # none for out_frac: every layer here has a table
                # what ipywidgets applies for a front-end message: a slider's number or a box's text
                widget, sent = (c.sliders[field], v) if kind < 3 else (c.boxes[field], str(v))
                if targets and sent != widget.value:
                    widget.set_state({"value": sent})
                    for li in targets:
                        expected = expected.replace(layer=li, **{field: v})
            elif kind < 7:
                field = list(CHOICE_FIELDS)[rng.integers(len(CHOICE_FIELDS))]
                v = str(rng.choice(CHOICES[field]))
                if v != c.choices[field].value:
                    targets = c.field_targets(field)
                    c.choices[field].set_state({"index": list(CHOICES[field]).index(v)})  # a Dropdown syncs its index
                    for li in targets:
                        expected = expected.replace(layer=li, **{field: v})
            elif kind < 8:
                c.layer.set_state({"index": int(rng.integers(len(net.layers) + 1))})
            else:
                positions[rng.integers(3)].set_state({"value": int(rng.integers(0, 256))})
            if i % 97 == 0:
                await asyncio.sleep(3 * s.coalesce_seconds)  # let a coalesced computation run now and then
        await asyncio.sleep(3 * s.coalesce_seconds)
        return expected

    want = asyncio.run(storm())
    assert not s.pending
    assert s.plan == want and s.result.plan == want
    assert s.dropped_page_changes == 0  # a person's changes, one after another: none is taken for an echo
    for field in SLIDER_FIELDS:
        values = [getattr(want.layers[li], field) for li in c.field_targets(field)]
        if values:  # the mix, lowest first, or the one value
            assert c.sliders[field].value == min(values)
            assert c.boxes[field].value == (f"{min(values)}-{max(values)}" if len(set(values)) > 1 else str(values[0]))
    for (_, _, _, fixed_input), p in zip(SLICES, positions):  # each slice's slider is its fixed input's code
        assert s.slice_positions[fixed_input] == p.value
    assert s.computed < 100, "the changes were not coalesced"
    failing = want.layers[0].acc_bits % 3 == 0
    assert ("flaky" in s.view_errors) == failing
    assert ("view error: flaky: RuntimeError: flaky view" in ex.status.text) == failing
    assert_explorer_matches_kernel(ex)  # the other views are right, whatever the flaky one did


def test_an_exception_in_one_view_shows_in_the_status_line_while_the_others_keep_working():
    net, plan, img = fruit()
    ex = Explorer(net, image=img, plan=plan)
    s = ex.session

    def broken(result):
        raise ValueError("cannot draw this")

    s.add_view("broken", broken)
    for v in (12, 13, 14):
        ex.controls.sliders["acc_bits"].value = v
        assert s.result.plan.layers[0].acc_bits == v
        assert s.view_errors == {"broken": "broken: ValueError: cannot draw this"}
        assert ex.status.text == "view error: broken: ValueError: cannot draw this"
        assert_explorer_matches_kernel(ex)


def test_a_4k_frame_is_previewed_downscaled_with_a_note():
    net, plan, _ = fruit()
    # 3840 x 2160: the active picture of 2160p (CTA-861 VIC 97; references.md)
    frame = np.zeros((2160, 3840, 3), dtype=np.uint8)
    frame[..., 0] = np.linspace(0, 255, 3840, dtype=np.uint8)[None, :]
    frame[..., 1] = np.linspace(255, 0, 2160, dtype=np.uint8)[:, None]
    ex = Explorer(net, image=frame, plan=plan)
    im = ex.session.result.image
    assert im.full_shape == (2160, 3840) and im.factor > 1
    assert im.codes.shape[1] <= MAX_PREVIEW_WIDTH and im.fixed.shape == im.codes.shape[:2]
    assert "downscaled" in ex.preview.note.value
    assert_explorer_matches_kernel(ex)
    # the preview's codes are a subsample of the frame: the kernel result belongs to those pixels
    f = im.factor
    assert np.array_equal(im.codes, frame[::f, ::f])
