"""Metrics at a glance: the bars, grids, badges and cost bar hold the kernel's and the cost model's numbers.

References: the decisions and event counts come from ``emulate`` (the contract's kernel,
docs semantics.md); the confusion matrix is counted here with numpy from the labels (rows the
label, columns the decision: common practice); the cost parts from ``hardware_cost`` (its
documented identity total_bits = adder_bits + register_bits + table_bits).
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from widget_checks import refuse_out_bits_4

from fxnet_widgets.core.analysis import hardware_cost
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.glance import MetricsGlancePanel
from fxnet_widgets.widgets.metrics import MetricsPanel


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    return Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)


def _grid_cells(value: str, cls: str) -> list[int]:
    body = value.split(f"class='{cls}'")[1].split("</table>")[0]
    return [int(v) for v in re.findall(r"background:rgba\([^)]*\)'>(\d+)</td>", body)]


def test_glance_shows_the_kernels_figures(explorer, fruit_net, belt_image, labelled_samples):
    glance = MetricsGlancePanel(explorer.session)
    explorer.controls.sliders["weight_bits"].value = 5  # a plan with disagreements and clipped weights
    plan = explorer.plan
    codes, labels = labelled_samples
    img, sam = emulate(fruit_net, plan, belt_image), emulate(fruit_net, plan, codes)
    n_img = int(np.count_nonzero(img.decisions != img.float_decisions))
    n_sam = int(np.count_nonzero(sam.decisions != sam.float_decisions))
    assert glance.note == ""
    lines = glance.text.splitlines()
    assert lines[0] == (f"image (full resolution 40x24): agree with float {100 * (1 - n_img / img.decisions.size):.3f}"
                        f" % ({n_img} of 960 differ)")  # fmt: skip
    acc = np.mean(sam.decisions == labels)
    facc = np.mean(sam.float_decisions == labels)
    conf = [[int(np.sum((labels == i) & (sam.decisions == j))) for j in range(2)] for i in range(2)]
    assert lines[1] == (f"samples: agree with float {100 * (1 - n_sam / 60):.3f} % ({n_sam} of 60 differ); "
                        f"accuracy fixed {100 * acc:.3f} %, float {100 * facc:.3f} %; confusion "
                        f"{conf[0][0]} {conf[0][1]} / {conf[1][0]} {conf[1][1]}")
    # the confusion grid's cells, row by row (rows: label, columns: fixed-point decision)
    assert _grid_cells(glance.value, "fxnet-confusion") == [v for row in conf for v in row]
    # the bars: agreement and accuracy widths are the percentages
    assert f"width:{100 * (1 - n_sam / 60):.1f}%" in glance.value and f"width:{100 * acc:.1f}%" in glance.value
    clips = sum(int(np.sum(img.events[li]["weight_clip"])) for li in range(2))  # per weight: data-independent
    assert f"clipped weights {clips}</span>" in glance.value and clips > 0
    assert f"weight_clip {clips}" in lines[2]
    cost = hardware_cost(fruit_net, plan)
    assert lines[-1] == (f"cost: total_bits {cost.total_bits} = adders {cost.adder_bits} + registers "
                         f"{cost.register_bits} + tables {cost.table_bits}")
    assert cost.adder_bits + cost.register_bits + cost.table_bits == cost.total_bits
    widths = [float(v) for v in re.findall(r"height:12px;width:([0-9.]+)%", glance.value)]
    assert widths == pytest.approx([100 * v / cost.total_bits for v in
                                    (cost.adder_bits, cost.register_bits, cost.table_bits)], abs=0.01)
    # the tables' shapes beside their bits: 2**T entries of out_bits per neuron (the contract's table)
    t = plan.layers[0]
    assert f"L1: {fruit_net.layers[0].n_out} table(s) of {2 ** t.table_bits} x {t.out_bits} b" in glance.value
    assert "<details" in glance.value and cost.summary().splitlines()[0] in glance.details


def test_glance_says_when_its_figures_are_of_another_plan(explorer, monkeypatch):
    s = explorer.session
    glance = MetricsGlancePanel(s)
    shown = s.result.plan
    with s.deferred():  # a change waiting to be computed (as a slider dragged in the browser)
        s.plan = shown.replace(weight_bits=5)
        assert glance.note.startswith("pending: the figures below are of the previous plan")
        assert glance.text.splitlines()[0] == glance.note and "fxnet-glance-stale" in glance.value
    assert glance.note == "" and "fxnet-glance-stale" not in glance.value  # computed: the banner goes
    # a plan the kernel refuses: the last good figures stay, marked as such
    refuse_out_bits_4(monkeypatch)
    good = s.result.plan
    explorer.controls.sliders["out_bits"].value = 4
    assert s.result.plan == good != s.plan
    assert glance.note.startswith("error: ValueError: layers[0]: refused for the test; the figures below are of "
                                  "the last plan that worked")  # fmt: skip
    assert glance.text.splitlines()[1].startswith("image")
    explorer.controls.sliders["out_bits"].value = 6
    assert glance.note == ""


def test_several_classes_show_an_n_by_n_grid(colour_net, belt_image):
    """Three classes, no labels: the float-against-fixed grid is 3 x 3 and counts every pixel once."""
    ex = Explorer(colour_net, image=belt_image)
    ex.controls.sliders["acc_bits"].value = 9
    emu = emulate(colour_net, ex.plan, belt_image)
    fl, fx = emu.float_decisions.reshape(-1), emu.decisions.reshape(-1)
    want = [int(np.sum((fl == i) & (fx == j))) for i in range(3) for j in range(3)]
    glance = ex.metrics.glance
    assert glance is not None
    assert _grid_cells(glance.value, "fxnet-agreement") == want and sum(want) == fl.size
    assert "relu" in "".join(L.activation for L in colour_net.layers) and "off (relu, negative input)" in glance.value


def test_the_explorer_metrics_panel_is_the_glance_with_details(explorer):
    m = explorer.metrics
    assert isinstance(m, MetricsPanel) and m.glance is not None
    assert m.children[1] is m.glance and m.details.children == (m.details_button, m.html)
    assert m.html.layout.display == "none"  # collapsed until "details" is pressed
    m.details_button.value = True
    assert m.html.layout.display == "" and m.html.value.startswith("<table")
    assert m.summary() == m.text and "accuracy against labels" in m.text
    assert "<details" not in m.glance.value  # the full table is under the panel's own "details"
    explorer.controls.sliders["table_bits"].value = 4
    assert explorer.session.result.plan.layers[0].table_bits == 4
    assert "table(s) of 16 x " in m.glance.value and "table(s) of 16 x " in m.html.value
