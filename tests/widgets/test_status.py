"""The status line alone: warnings by honest names, no relu "off", argmax ties for several outputs."""

from __future__ import annotations

from fxnet_widgets.widgets import Session, StatusLinePanel


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
