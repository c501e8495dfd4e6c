"""The status line alone: warnings by honest names, no relu "off", argmax ties for several outputs."""

from __future__ import annotations

import re

from fxnet_widgets.widgets import Session, StatusLinePanel
from fxnet_widgets.widgets.status import plan_widths


def test_the_line_for_a_table_network_names_table_clamps(fruit_net, fruit_plan, belt_image):
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    st = StatusLinePanel(s)
    tot = s.result.event_totals()
    assert st.text.startswith(
        f"ok: update 1, accumulator overflows {tot['acc_overflow']}, "
        f"table clamps {tot['table_low'] + tot['table_high']}, clipped weights {tot['weight_clip']}; widths L1 "
    )  # fmt: skip
    assert "output clamps" not in st.text and "argmax ties" not in st.text  # one output: no ties


def test_relu_and_identity_layers_get_output_clamps_and_ties(colour_net, belt_image):
    s = Session(colour_net, image=belt_image)
    st = StatusLinePanel(s)
    tot = s.result.shown_totals()
    assert "table clamps" not in st.text and "off" not in st.text
    assert f"output clamps {tot['output_clamp']}" in st.text
    assert f"argmax ties {s.result.tie_total}; widths" in st.text


def test_the_update_number_always_goes_with_its_own_result(fruit_net, fruit_plan, belt_image):
    # the line pairs "update N" with the widths of the result shown as update N, at every moment: a
    # view drawn after it (here a probe at the end of the view list) never reads a new plan's widths
    # beside the previous update's number
    s = Session(fruit_net, image=belt_image, plan=fruit_plan)
    st = StatusLinePanel(s)
    shown = {s.version: plan_widths(s.result.plan)}
    s.observe(lambda c: shown.__setitem__(c["new"], plan_widths(s.result.plan)), names="version")
    seen = []
    s.add_view("probe", lambda _r: seen.append(st.text))
    for bits in (11, 12, 9):
        s.plan = s.plan.replace(table_bits=bits)
        seen.append(st.text)
    assert len(seen) >= 6  # the probe also draws once when it is added
    for text in seen:
        update = int(re.search(r"ok: update (\d+),", text).group(1))
        assert text.endswith("widths " + shown[update]), (text, shown)
    assert seen[-1].endswith("T9.8 O8")
