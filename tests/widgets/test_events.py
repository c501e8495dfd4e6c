"""The events view alone: honest names for relu and identity layers, argmax ties beside the other events."""

from __future__ import annotations

import numpy as np

from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.widgets import EventsPlot, HistogramPlot, Session
from fxnet_widgets.widgets.parts import argmax_ties
from fxnet_widgets.widgets.results import shown_events


def test_relu_off_and_output_clamps_are_named_for_what_they_are(colour_net, belt_image):
    s = Session(colour_net, image=belt_image)
    s.plan = s.plan.replace(layer=1, out_bits=4, out_frac=3)  # outputs within +-1: identity clamps
    ev = EventsPlot(s)
    assert list(ev.shown) == ["acc_overflow", "output_clamp", "off", "weight_clip"]  # no table clamps: no tables
    emu = emulate(colour_net, s.plan, s.result.image.codes)
    rows = {k: i for i, k in enumerate(ev.shown)}
    # semantics.md: relu's low clamp is its zero (off), its high clamp and identity's two ends clamp the output
    off = emu.events[0]["table_low"]
    assert ev.counts[rows["off"], :4].tolist() == off.tolist() and off.sum() > 0
    assert ev.counts[rows["output_clamp"], :4].tolist() == emu.events[0]["table_high"].tolist()
    both = emu.events[1]["table_low"] + emu.events[1]["table_high"]
    assert ev.counts[rows["output_clamp"], 4:].tolist() == both.tolist() and both.sum() > 0
    # relu "off" is not a warning
    r = s.result
    assert r.warning_total == sum(r.shown_totals()[k] for k in ("acc_overflow", "output_clamp", "weight_clip",
                                                                 "bias_clip"))  # fmt: skip
    assert "table clamps" not in ev.caption.value and "off (relu, negative input)" in ev.caption.value


def test_argmax_ties_are_counted_per_class_pair(colour_net, belt_image):
    s = Session(colour_net, image=belt_image)
    s.plan = s.plan.replace(layer=1, out_bits=3, out_frac=0)  # coarse logits: many ties
    ev = EventsPlot(s)
    fig = s.result.figures[0]
    codes = emulate(colour_net, s.plan, s.result.image.codes).out_codes.reshape(-1, 3)
    # by hand: both outputs hold the row's largest code
    top = codes == codes.max(axis=1, keepdims=True)
    for (i, j), n in fig.ties.items():
        assert n == int(np.count_nonzero(top[:, i] & top[:, j] & (top.sum(axis=1) > 1)))
    assert fig.tie_total > 0
    assert "argmax ties on the image" in ev.caption.value
    assert argmax_ties(np.array([[1], [2]])) == {}  # one output: a threshold, no ties


def test_histogram_caption_names_relu_events(colour_net, belt_image):
    s = Session(colour_net, image=belt_image)
    hp = HistogramPlot(s, 0)
    assert "off " in hp.caption.value and "output range" in hp.caption.value and "table" not in hp.caption.value


def test_shown_events_keeps_every_count():
    raw = {"acc_overflow": 1, "table_low": 5, "table_high": 2, "weight_clip": 3, "bias_clip": 4}
    for kind in ("table", "relu", "identity"):
        assert sum(shown_events(kind, raw).values()) == sum(raw.values())
