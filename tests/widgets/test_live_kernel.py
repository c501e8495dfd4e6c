"""A real Jupyter kernel receiving a burst of slider updates (a drag), as a browser sends them."""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import pytest
from fxkernel import run_code

jupyter_client = pytest.importorskip("jupyter_client")
pytest.importorskip("ipykernel")

ROOT = Path(__file__).resolve().parents[2]

SETUP = textwrap.dedent(
    f"""
    import sys, json
    sys.path.insert(0, {str(ROOT)!r})
    import numpy as np
    from fxnet_widgets.core.network import Network
    from fxnet_widgets.core.plan import Plan
    from fxnet_widgets.widgets import Explorer
    net = Network.from_layers([([[9.2, -12.4, -2.9], [8.9, -11.6, -3.2], [-9.4, 12.8, 2.8]], [-0.36, -0.36, 0.4],
                                "sigmoid"), ([[6.1, 5.7, -6.3]], [-2.9], "sigmoid")])
    plan = Plan.uniform(net, weight_bits=10, weight_frac=5, acc_bits=18, out_bits=8, table_bits=12, table_frac=8)
    img = np.random.default_rng(0).integers(0, 256, (90, 160, 3)).astype(np.uint8)
    ex = Explorer(net, image=img, plan=plan)
    print(json.dumps({{"id": ex.controls.sliders["acc_bits"].model_id, "box": ex.controls.boxes["acc_bits"].model_id,
                      "computed": ex.session.computed}}))
    """
)
REPORT = (
    "print(json.dumps({'computed': ex.session.computed, 'plan': [lp.acc_bits for lp in ex.plan.layers],"
    " 'shown': [lp.acc_bits for lp in ex.session.result.plan.layers], 'slider': ex.controls.sliders['acc_bits'].value,"
    " 'error': ex.session.error}))"
)


def _run(kc, code: str, seen: list | None = None) -> str:
    """Run ``code``; its stdout. Every other iopub message read meanwhile goes to ``seen``."""
    return run_code(kc, code, 120, seen)


def test_a_drag_in_a_live_kernel_is_coalesced_and_ends_on_the_last_value():
    km, kc = jupyter_client.manager.start_new_kernel(kernel_name="python3")
    try:
        start = json.loads(_run(kc, SETUP).strip().splitlines()[-1])
        values = [17, 16, 15, 14, 13, 12, 11, 10, 9, 8] * 2 + [13]
        for v in values:  # the comm message ipywidgets' front end sends for a moved slider
            data = {"method": "update", "state": {"value": v}, "buffer_paths": []}
            kc.shell_channel.send(kc.session.msg("comm_msg", {"comm_id": start["id"], "data": data}))
        end = json.loads(_run(kc, REPORT).strip().splitlines()[-1])
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)
    assert end["plan"] == [13, 13] and end["shown"] == [13, 13] and end["slider"] == 13
    assert end["error"] == ""
    # latest value wins: far fewer computations than messages (each message alone would be one)
    assert end["computed"] - start["computed"] < len(values) // 2


def _update(comm_id: str, value: int) -> dict:
    return {"comm_id": comm_id, "data": {"method": "update", "state": {"value": value}, "buffer_paths": []}}


def _text(comm_id: str, text: str) -> dict:
    return {"comm_id": comm_id, "data": {"method": "update", "state": {"value": text}, "buffer_paths": []}}


def test_a_drag_gets_no_slider_value_back_and_a_late_copy_is_dropped():
    """The page sends the slider's values, then a late copy of an older box value (as a page-side link
    would): the kernel computes the slider's last value, sends no slider value back (the page has it)
    and drops the late copy (issue 19)."""
    km, kc = jupyter_client.manager.start_new_kernel(kernel_name="python3")
    seen: list = []
    try:
        start = json.loads(_run(kc, SETUP).strip().splitlines()[-1])
        _run(kc, "ex.plan = ex.plan.replace(acc_bits=13); ex.plan = ex.plan.replace(acc_bits=16)")  # two cells
        for v in [17, 15, 11, 9, 7]:
            kc.shell_channel.send(kc.session.msg("comm_msg", _update(start["id"], v)))
        kc.shell_channel.send(kc.session.msg("comm_msg", _text(start["box"], "7")))  # the box shows 7: an echo
        end = json.loads(_run(kc, REPORT, seen).strip().splitlines()[-1])
        _run(kc, "ex.plan = ex.plan.replace(acc_bits=12); ex.plan = ex.plan.replace(acc_bits=18)")
        kc.shell_channel.send(kc.session.msg("comm_msg", _text(start["box"], "12")))  # late copy of the older 12
        late = json.loads(_run(kc, REPORT).strip().splitlines()[-1])
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)
    assert end["plan"] == [7, 7] and end["shown"] == [7, 7] and end["slider"] == 7
    slider_sent = [
        m["content"]["data"]["state"]["value"]
        for m in seen
        if m["msg_type"] == "comm_msg"
        and m["content"].get("comm_id") == start["id"]
        and m["content"]["data"].get("method") == "update"
        and "value" in m["content"]["data"].get("state", {})
    ]
    assert slider_sent == []
    assert late["plan"] == [18, 18] and late["shown"] == [18, 18] and late["error"] == ""
