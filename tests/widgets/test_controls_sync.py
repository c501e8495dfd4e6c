"""Slider <-> number box: the jslink moves the partner in the browser, Python never echoes a browser change.

A value written from Python while the user drags can reach the browser after a
newer one; the ``jslink`` then copies the stale value back onto the slider (the
JupyterLab "bounce"). These tests record every message the widgets send.
"""

from __future__ import annotations

import asyncio
from collections.abc import Iterator

import ipywidgets as w
import pytest
from widget_checks import assert_explorer_matches_kernel

from fxnet_widgets.core.kernel import build_integer_network
from fxnet_widgets.widgets import Explorer


@pytest.fixture()
def explorer(fruit_net, fruit_plan, belt_image, labelled_samples):
    codes, labels = labelled_samples
    return Explorer(fruit_net, image=belt_image, samples=codes, labels=labels, plan=fruit_plan)


@pytest.fixture()
def sent(monkeypatch) -> Iterator[list[tuple[str, dict]]]:
    """Every state update the widgets send to the front end: ``(model_id, state)``."""
    log: list[tuple[str, dict]] = []
    real = w.Widget._send

    def record(self, msg, buffers=None):
        if msg.get("method") == "update":
            log.append((self.model_id, dict(msg.get("state", {}))))
        return real(self, msg, buffers)

    monkeypatch.setattr(w.Widget, "_send", record)
    yield log


def _values_sent(log, widget) -> list[int]:
    return [st["value"] for mid, st in log if mid == widget.model_id and "value" in st]


def test_a_browser_slider_change_writes_no_control_value_back(explorer, sent):
    c = explorer.controls
    slider, box = c.sliders["table_bits"], c.boxes["table_bits"]

    async def drag() -> None:
        for v in (11, 9, 7, 4, 2):  # what ipywidgets does with the front end's update messages
            slider.set_state({"value": v})
            box.set_state({"value": v})  # the jslink's copy, sent by the box model
        box.set_state({"value": 7})  # a late, stale box message
        await asyncio.sleep(3 * explorer.session.coalesce_seconds)

    asyncio.run(drag())
    assert _values_sent(sent, slider) == []
    assert _values_sent(sent, box) == []
    # the slider's last value is the plan, computed and shown; the stale box message changed nothing
    assert [lp.table_bits for lp in explorer.plan.layers] == [2, 2]
    assert explorer.session.result.plan == explorer.plan
    assert_explorer_matches_kernel(explorer)


def test_a_browser_choice_change_writes_no_slider_value(explorer, sent):
    c = explorer.controls
    d = c.choices["acc_overflow"]
    d.set_state({"index": list(d.options).index("saturate")})  # a dropdown's front end sends its index
    assert all(lp.acc_overflow == "saturate" for lp in explorer.plan.layers)
    assert all(_values_sent(sent, s) == [] for s in c.sliders.values())
    assert all(_values_sent(sent, b) == [] for b in c.boxes.values())


def test_a_plan_change_from_code_writes_slider_and_box_the_same_value(explorer, fruit_net, sent):
    c = explorer.controls
    c.sliders["acc_bits"].value = 10
    assert _values_sent(sent, c.sliders["acc_bits"]) == [10]
    assert _values_sent(sent, c.boxes["acc_bits"]) == [10]
    sent.clear()
    c.set_safe()
    # "all layers": the controls show layer 1's width
    safe = int(build_integer_network(fruit_net, explorer.plan).layers[0].safe_acc_bits.max())
    assert _values_sent(sent, c.sliders["acc_bits"]) == [safe]
    assert _values_sent(sent, c.boxes["acc_bits"]) == [safe]
    sent.clear()
    explorer.plan = explorer.plan.replace(table_bits=5)  # e.g. a notebook cell
    assert _values_sent(sent, c.sliders["table_bits"]) == [5]
    assert _values_sent(sent, c.boxes["table_bits"]) == [5]


def test_a_second_panel_follows_a_browser_change_of_the_first(fruit_net, fruit_plan, belt_image, sent):
    from fxnet_widgets.widgets import PlanControlsPanel, Session

    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    a, b = PlanControlsPanel(s), PlanControlsPanel(s)
    sent.clear()
    a.sliders["out_bits"].set_state({"value": 5})
    assert _values_sent(sent, a.sliders["out_bits"]) == []
    assert b.sliders["out_bits"].value == b.boxes["out_bits"].value == 5
    assert _values_sent(sent, b.sliders["out_bits"]) == _values_sent(sent, b.boxes["out_bits"]) == [5]


def test_a_browser_layer_choice_shows_that_layer(explorer, fruit_plan):
    c = explorer.controls
    c.layer.set_state({"index": 2})  # layer 2
    assert c.layer.value == 1
    assert c.sliders["weight_frac"].value == c.boxes["weight_frac"].value == fruit_plan.layers[1].weight_frac
