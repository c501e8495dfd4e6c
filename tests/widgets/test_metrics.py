"""The metrics view alone: n x n confusion and agreement, per-class agreement, cost, from the session's figures."""

from __future__ import annotations

import numpy as np

from fxnet_widgets.core.analysis.metrics import error_metrics
from fxnet_widgets.widgets import MetricsPanel, Session


def test_several_classes_get_an_n_by_n_confusion_and_agreement(colour_net, belt_image):
    rng = np.random.default_rng(4)
    samples = rng.integers(0, 256, (80, 3)).astype(np.uint8)
    labels = rng.integers(0, 3, 80)
    s = Session(colour_net, samples=samples, labels=labels)
    s.plan = s.plan.replace(layer=1, out_bits=4, out_frac=1)
    panel = MetricsPanel(s)
    fig = s.result.figures[0]
    emu = s.result.samples.emulation
    # the confusion is the analysis layer's; the agreement counted here by hand (rows float, columns fixed)
    assert fig.metrics.confusion == error_metrics(emu, labels).confusion
    want = np.zeros((3, 3), int)
    for a, b in zip(emu.float_decisions, emu.decisions):
        want[a, b] += 1
    assert np.array_equal(np.array(fig.agreement), want)
    per = fig.per_class_agreement
    assert all(p is None or p == want[i, i] / want[i].sum() for i, p in enumerate(per))
    matrices = [r for r in panel.rows if r.matrix is not None]
    assert [m.matrix.names for m in matrices] == [("unripe", "turning", "ripe")] * 2
    assert panel.html.value.count("class='fxnet-matrix'") == 2
    assert "agreement per class: unripe" in panel.text


def test_the_panel_shows_the_cost_the_session_computed(fruit_net, fruit_plan, belt_image):
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    panel = MetricsPanel(s)
    t = s.result.cost.totals()
    assert f"total bits {t['total_bits']}" in panel.text and f"latency {t['latency']} clocks" in panel.text
    s.plan = fruit_plan.replace(table_bits=8)
    assert f"total bits {s.result.cost.totals()['total_bits']}" in panel.text
    assert s.result.cost.totals() != t
