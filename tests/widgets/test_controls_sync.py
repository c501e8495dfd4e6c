"""Python and the page on one plan (issue 19): only a person's change from the page is applied.

The page's messages are fed in as ipywidgets' comm handler applies them
(``Widget.set_state``); every state update the widgets send back is recorded.
"""

from __future__ import annotations

import asyncio
from collections.abc import Iterator

import ipywidgets as w
import numpy as np
import pytest
from widget_checks import assert_explorer_matches_kernel

from fxnet_widgets.core.kernel import build_integer_network
from fxnet_widgets.core.network import Network
from fxnet_widgets.widgets import Explorer, PlanControlsPanel, Session


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


def _values_sent(log, widget) -> list:
    return [st["value"] for mid, st in log if mid == widget.model_id and "value" in st]


def _acc(plan) -> list[int]:
    return [lp.acc_bits for lp in plan.layers]


def test_a_page_drag_is_applied_and_no_slider_value_goes_back(explorer, sent):
    c = explorer.controls
    slider, box = c.sliders["table_bits"], c.boxes["table_bits"]

    async def drag() -> None:
        for v in (11, 9, 7, 4, 2):  # what ipywidgets does with the front end's update messages
            slider.set_state({"value": v})
        await asyncio.sleep(3 * explorer.session.coalesce_seconds)

    asyncio.run(drag())
    assert _values_sent(sent, slider) == []  # the page shows its own value already
    assert _values_sent(sent, box)[-1] == "2"  # the kernel writes the number box (no browser-side link)
    assert [lp.table_bits for lp in explorer.plan.layers] == [2, 2]
    assert explorer.session.result.plan == explorer.plan
    assert_explorer_matches_kernel(explorer)


def test_an_echo_of_what_the_kernel_shows_is_never_applied(explorer, fruit_plan):
    """ "All layers" over layers that differ: the page sending back the shown value must not flatten them."""
    c = explorer.controls
    mixed = fruit_plan.replace(layer=0, acc_bits=20).replace(layer=1, acc_bits=19)
    explorer.plan = mixed
    c.sliders["acc_bits"].set_state({"value": c.sliders["acc_bits"].value})
    c.boxes["acc_bits"].set_state({"value": c.boxes["acc_bits"].value})
    assert explorer.plan == mixed


def test_a_late_echo_of_an_older_state_is_dropped(explorer, sent):
    """Run All: 14 bits, then "safe"; the page's copy of 14 arriving afterwards must not revert the plan."""
    c = explorer.controls
    slider = c.sliders["acc_bits"]
    slider.value = 14  # a notebook cell
    c.set_safe()  # the next cell
    safe = explorer.plan
    assert _acc(safe) != [14, 14]
    sent.clear()
    dropped = explorer.session.dropped_page_changes
    slider.set_state({"value": 14})  # late, stamped with the older state's version
    c.boxes["acc_bits"].set_state({"value": "14"})
    assert explorer.plan == safe
    assert explorer.session.dropped_page_changes == dropped + 2
    # the page is told the kernel's value again, so page and kernel agree
    assert _values_sent(sent, slider) == [min(_acc(safe))]
    assert_explorer_matches_kernel(explorer)


def test_session_drops_a_page_change_stamped_with_an_older_version(fruit_net, fruit_plan, belt_image):
    """Out of order: a page change made on version v arrives after Python made version v + 1."""
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    seen = s.plan_version
    newer = fruit_plan.replace(layer=0, acc_bits=20).replace(layer=1, acc_bits=19)
    s.plan = newer  # Python
    assert s.plan_version == seen + 1
    assert s.page_change({"acc_bits": 12}, [0, 1], seen) is False  # old stamp
    assert s.plan == newer and s.result.plan == newer
    assert s.page_change({"acc_bits": 12}, [1], s.plan_version) is True  # made on the current state
    assert _acc(s.plan) == [20, 12]  # re-based: only that field on that layer
    with pytest.raises(TypeError, match=r"^version must be an integer plan version, not '3'$"):
        s.page_change({"acc_bits": 12}, [1], "3")


def test_mixed_values_are_shown_not_invented(explorer, fruit_plan, sent):
    c = explorer.controls
    slider, box = c.sliders["acc_bits"], c.boxes["acc_bits"]
    explorer.plan = fruit_plan.replace(layer=0, acc_bits=18).replace(layer=1, acc_bits=19, acc_overflow="saturate")
    assert box.value == "18-19" and "fxnet-mixed" in slider._dom_classes
    assert "mixed: L1 18, L2 19" in c.notes["acc_bits"].value
    assert c.choices["acc_overflow"].value is None  # wrap on layer 1, saturate on layer 2
    assert "mixed: L1 wrap, L2 saturate" in c.choice_note.value
    # a person acts at once (no time for a late echo to arrive first: a page value equal to one the kernel
    # replaced would otherwise count as that older state's echo)
    c.echo_seconds = 0.0
    slider.set_state({"value": 16})  # a person moves it: one value for every layer
    assert _acc(explorer.plan) == [16, 16]
    assert box.value == "16" and "fxnet-mixed" not in slider._dom_classes
    c.choices["acc_overflow"].set_state({"index": 0})  # "wrap"
    assert [lp.acc_overflow for lp in explorer.plan.layers] == ["wrap", "wrap"]
    assert c.choices["acc_overflow"].value == "wrap"


def test_a_second_panel_follows_a_page_change_of_the_first(fruit_net, fruit_plan, belt_image, sent):
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    a, b = PlanControlsPanel(s), PlanControlsPanel(s)
    sent.clear()
    a.sliders["out_bits"].set_state({"value": 5})
    assert _values_sent(sent, a.sliders["out_bits"]) == []
    assert b.sliders["out_bits"].value == 5 and b.boxes["out_bits"].value == "5"
    assert _values_sent(sent, b.sliders["out_bits"]) == [5]


def test_a_page_layer_choice_shows_that_layer(explorer, fruit_plan):
    c = explorer.controls
    c.layer.set_state({"index": 2})  # layer 2
    assert c.layer.value == 1
    assert c.sliders["weight_frac"].value == fruit_plan.layers[1].weight_frac
    assert c.boxes["weight_frac"].value == str(fruit_plan.layers[1].weight_frac)


def test_controls_over_mixed_layer_kinds_apply_where_the_field_exists(belt_image):
    """Issue 20: relu then sigmoid. Table controls act on the table layer, the output fraction on the relu layer."""
    rng = np.random.default_rng(3)
    net = Network.from_layers([(rng.normal(0, 1, (4, 3)), np.zeros(4), "relu"),
                               (rng.normal(0, 1, (1, 4)), [0.0], "sigmoid")])  # fmt: skip
    ex = Explorer(net, image=belt_image)
    c = ex.controls
    assert c.field_targets("table_bits") == [1] and c.field_targets("out_frac") == [0]
    assert "only L2" in c.notes["table_bits"].value and "only L1" in c.notes["out_frac"].value
    assert c.rows["table_bits"].layout.display == c.rows["out_frac"].layout.display == ""
    c.sliders["table_bits"].set_state({"value": 7})
    c.sliders["out_frac"].set_state({"value": 2})
    assert (ex.plan.layers[0].table_bits, ex.plan.layers[1].table_bits) == (None, 7)
    assert (ex.plan.layers[0].out_frac, ex.plan.layers[1].out_frac) == (2, None)
    c.layer.value = 0  # the relu layer alone: no table controls, an output fraction
    assert c.rows["table_bits"].layout.display == "none" and c.rows["out_frac"].layout.display == ""
    assert c.choices["index_round"].layout.display == "none"
    c.layer.value = 1  # the sigmoid layer alone: table controls, no output fraction
    assert c.rows["table_bits"].layout.display == "" and c.rows["out_frac"].layout.display == "none"
    assert build_integer_network(net, ex.plan) is not None
    assert_explorer_matches_kernel(ex)
