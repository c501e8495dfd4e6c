"""The hardware panel: background synthesis, progress and stop, figures only for their own plan.

The synthesis runs are real (Yosys, nextpnr-ice40) on a small Verilog design made
from the plan (a registered adder as wide as layer 1's accumulator), so the panel's
figures are compared with a direct :func:`synthesize` of the same design.
"""

from __future__ import annotations

import shutil
import threading
from pathlib import Path

import pytest
from fxtools import missing

from fxnet_widgets.core.analysis.cost import hardware_cost
from fxnet_widgets.core.synth import CAUTION, SynthesisCancelled, ToolError, synthesize
from fxnet_widgets.widgets.hardware import CLOCK_MHZ, HardwarePanel
from fxnet_widgets.widgets.session import Session

pytestmark = pytest.mark.synth


def _adder_dir(root: Path, plan) -> Path:
    n = plan.layers[0].acc_bits
    d = root / f"adder{n}"
    d.mkdir(exist_ok=True)
    (d / "fxnet_datapath.v").write_text(
        f"module fxnet_datapath (input wire clk, input wire [{n - 1}:0] a, input wire [{n - 1}:0] b,\n"
        f"  output reg [{n}:0] y);\n  always @(posedge clk) y <= a + b;\nendmodule\n"
    )
    return d


@pytest.fixture()
def tools():
    for name in ("yosys", "nextpnr-ice40"):
        if shutil.which(name) is None:
            missing(f"{name} is not installed (Debian package {name})")


@pytest.fixture()
def session(fruit_net, fruit_plan):
    return Session(fruit_net, plan=fruit_plan)


def test_synthesize_in_the_background_shows_the_tools_figures(tools, session, tmp_path):
    cache = tmp_path / "cache"
    seen = []

    def run(network, plan, **kw):
        seen.append(sorted(kw))
        return synthesize(_adder_dir(tmp_path, plan), cache_dir=cache, **kw)

    panel = HardwarePanel(session, run=run)
    assert panel.text == "not synthesized yet: press synthesize"
    panel.button.click()
    assert panel.button.disabled and not panel.stop_button.disabled
    assert panel.wait(120)
    assert seen == [["cancel", "clock_mhz", "progress", "target", "video"]]
    direct = synthesize(_adder_dir(tmp_path, session.plan), video="1280x720p60", cache_dir=cache)
    assert panel.result == direct and panel.result_plan == session.plan and panel.error == ""
    n = session.plan.layers[0].acc_bits
    # a registered (n+1)-bit sum: one flip-flop per output bit (the design itself)
    est = hardware_cost(session.network, session.plan, target="ice40-up5k").estimated()
    assert f"  flip-flops: estimated {est['ffs']}, measured {n + 1} of 5280" in panel.text
    assert f"  maximum clock: {direct.fmax_mhz:.2f} MHz (nextpnr, seed 1)" in panel.text
    # 1280x720p60: 74.25 MHz pixel clock (CTA-861 VIC 4)
    assert "  required clock 74.25 MHz (1280x720p60): " in panel.text
    assert panel.progress.value == 1.0 and panel.progress.bar_style == "success"
    assert not panel.button.disabled and panel.stop_button.disabled
    assert "stale" not in panel.text and panel.stale.value == ""
    assert CAUTION in panel.caution.value.replace("&#x27;", "'")

    session.plan = session.plan.replace(layer=0, acc_bits=n - 1)
    assert panel.text.startswith("stale: these figures are for another plan (L1 W10.5 A18 ")
    assert "stale" in panel.stale.value
    panel.start()
    assert panel.wait(120) and "stale" not in panel.text
    assert f"measured {n} of 5280" in panel.text.splitlines()[2]


def test_stop_cancels_and_keeps_the_panel_usable(session):
    started = threading.Event()

    def run(network, plan, *, cancel, progress, **kw):
        progress(0.25, "yosys: synthesis for ice40-up5k")
        started.set()
        assert cancel.wait(30)
        raise SynthesisCancelled("yosys was stopped")

    panel = HardwarePanel(session, run=run)
    panel.start()
    assert started.wait(30) and panel.running
    assert panel.message.value == "yosys: synthesis for ice40-up5k" and panel.progress.value == 0.25
    panel.stop_button.click()
    assert panel.wait(30)
    assert panel.error == "stopped" and panel.result is None and not panel.button.disabled


def test_a_failure_is_one_visible_line(session):
    def run(network, plan, **kw):
        raise ToolError("yosys must succeed, but it exited with code 1; its last lines:\n  ERROR: syntax")

    panel = HardwarePanel(session, target="xilinx-7", run=run)
    panel.start()
    assert panel.wait(30)
    assert panel.text.splitlines()[0] == "error: yosys must succeed, but it exited with code 1; its last lines:"
    assert "yosys must succeed" in panel.figures.value and panel.progress.bar_style == "danger"


def test_the_clock_chooser_passes_a_clock_in_mhz(session):
    got = {}

    def run(network, plan, **kw):
        got.update(kw)
        raise ToolError("not run")

    panel = HardwarePanel(session, run=run)
    assert panel.clock_mhz.disabled
    panel.clock.value = CLOCK_MHZ
    panel.clock_mhz.value = 48.0
    panel.target.value = "ice40-hx8k"
    panel.start()
    assert panel.wait(30)
    assert (got["target"], got["video"], got["clock_mhz"]) == ("ice40-hx8k", None, 48.0)


def test_wrong_session_is_a_type_error():
    with pytest.raises(TypeError, match=r"^session must be a Session, not str$"):
        HardwarePanel("session")
