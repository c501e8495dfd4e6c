"""Metrics at a glance: the bars, grid, badges and cost bar hold the kernel's and the cost model's numbers."""

from __future__ import annotations

import re

import numpy as np
import pytest

from fxnet_widgets.core.analysis import hardware_cost
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.widgets import Explorer
from fxnet_widgets.widgets.glance import MetricsGlancePanel


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    return Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)


def test_glance_shows_the_kernels_figures(explorer, fruit_net, belt_image, labelled_samples):
    glance = MetricsGlancePanel(explorer.session)
    explorer.controls.sliders["weight_bits"].value = 5  # a plan with disagreements and clipped weights
    plan = explorer.plan
    codes, labels = labelled_samples
    img, sam = emulate(fruit_net, plan, belt_image), emulate(fruit_net, plan, codes)
    n_img = int(np.count_nonzero(img.decisions != img.float_decisions))
    n_sam = int(np.count_nonzero(sam.decisions != sam.float_decisions))
    lines = glance.text.splitlines()
    assert lines[0] == f"image: agree with float {100 * (1 - n_img / img.decisions.size):.3f} % ({n_img} of 960 differ)"
    acc = np.mean(sam.decisions == labels)
    facc = np.mean(sam.float_decisions == labels)
    conf = [[int(np.sum((labels == i) & (sam.decisions == j))) for j in range(2)] for i in range(2)]
    assert lines[1] == (f"samples: agree with float {100 * (1 - n_sam / 60):.3f} % ({n_sam} of 60 differ); "
                        f"accuracy fixed {100 * acc:.3f} %, float {100 * facc:.3f} %; confusion "
                        f"{conf[0][0]} {conf[0][1]} / {conf[1][0]} {conf[1][1]}")
    # the confusion grid's cells, row by row (rows: label, columns: fixed-point decision)
    cells = [int(v) for v in re.findall(r"background:rgba\([^)]*\)'>(\d+)</td>", glance.value)]
    assert cells == [v for row in conf for v in row]
    clips = sum(int(np.sum(img.events[li]["weight_clip"])) for li in range(2))
    assert f"weight_clip {clips}</span>" in glance.value and clips > 0
    cost = hardware_cost(fruit_net, plan)
    assert lines[-1] == (f"cost: total_bits {cost.total_bits} = adders {cost.adder_bits} + registers "
                         f"{cost.register_bits} + tables {cost.table_bits}")
    assert cost.adder_bits + cost.register_bits + cost.table_bits == cost.total_bits
    widths = [float(v) for v in re.findall(r"height:12px;width:([0-9.]+)%", glance.value)]
    assert widths == pytest.approx([100 * v / cost.total_bits for v in
                                    (cost.adder_bits, cost.register_bits, cost.table_bits)], abs=0.01)
    assert "<details" in glance.value and cost.summary().splitlines()[0] in glance.details
