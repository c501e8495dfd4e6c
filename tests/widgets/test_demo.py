"""The demo explorer on the repository's assets, and the examples in the docstrings."""

from __future__ import annotations

import doctest

import numpy as np
import pytest
from widget_checks import assert_explorer_matches_kernel

import fxnet_widgets
from fxnet_widgets.core.images import read_image
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.widgets.explorer import DEMO_ASSETS


@pytest.mark.skipif(not (DEMO_ASSETS / "network.json").exists(), reason="demo assets not built")
def test_demo_explorer_shows_the_kernel_on_the_test_scene():
    ex = fxnet_widgets.demo_explorer()
    net = Network.load(DEMO_ASSETS / "network.json")
    plan = Plan.load(DEMO_ASSETS / "plan.json", net)
    assert ex.plan == plan
    img = read_image(DEMO_ASSETS / "scene-test.png").codes
    emu = emulate(net, plan, img)
    assert ex.session.result.image.codes.shape == (360, 640, 3)
    assert f"image (full resolution 640x360): {emu.mismatch} of 230400 pixels differ from float" in ex.summary()
    assert_explorer_matches_kernel(ex)
    # accuracy on the mask is in the metrics panel (via the analysis layer)
    assert "accuracy against labels" in ex.metrics.text
    assert ex.session.samples.shape == (150, 3)
    assert fxnet_widgets.Explorer.demo().summary() == ex.summary()
    ex.controls.sliders["acc_bits"].value = 14
    assert_explorer_matches_kernel(ex)
    assert np.count_nonzero(ex.events.counts[0]) > 0


@pytest.mark.parametrize(
    "module",
    ["fxnet_widgets.widgets.session", "fxnet_widgets.widgets.status", "fxnet_widgets.render.raster"],
)
def test_docstring_examples_run(module):
    import importlib

    res = doctest.testmod(importlib.import_module(module), optionflags=doctest.ELLIPSIS)
    assert res.attempted > 0 and res.failed == 0
