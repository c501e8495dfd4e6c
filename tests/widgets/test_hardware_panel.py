"""The hardware panel and the Explorer's "hardware" section: background synthesis, figures only for their plan.

The synthesis runs are real (Yosys, nextpnr-ice40): either on a small Verilog design
made from the plan (a registered adder as wide as layer 1's accumulator), whose
flip-flop count is known from the design itself, or, through the Explorer, on the
generated datapath, whose block RAMs follow from the tables' sizes and the iCE40's
4 kbit memory blocks. Device capacities are the datasheet figures named in
``core/synth/targets.py``.
"""

from __future__ import annotations

import shutil
import threading
from pathlib import Path

import pytest
from fxtools import missing

from fxnet_widgets.core.analysis.cost import hardware_cost
from fxnet_widgets.core.plan import Plan
from fxnet_widgets.core.synth import CAUTION, SynthesisCancelled, ToolError, synthesize
from fxnet_widgets.widgets.explorer import Explorer
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
    assert seen == [["cancel", "clock_mhz", "pipeline", "progress", "target", "video"]]
    direct = synthesize(_adder_dir(tmp_path, session.plan), video="1280x720p60", cache_dir=cache)
    assert panel.result == direct and panel.result_plan == session.plan and panel.error == ""
    n = session.plan.layers[0].acc_bits
    # a registered (n+1)-bit sum: one flip-flop per output bit (the design itself)
    est = hardware_cost(session.network, session.plan, target="ice40-up5k").estimated()
    assert f"  flip-flops: estimated {est['ffs']}, measured {n + 1} of 5280" in panel.text
    assert f"  maximum clock: {direct.fmax_mhz:.2f} MHz (nextpnr, seed 1)" in panel.text
    # 1280x720p60: 74.25 MHz pixel clock (CTA-861 VIC 4); the margin is fmax / clock, the slack fmax - clock
    verdict = "met" if direct.fmax_mhz >= 74.25 else "NOT met"
    slack = f"{abs(direct.fmax_mhz - 74.25):.2f} MHz {'to spare' if verdict == 'met' else 'short'}"
    assert (f"  required clock 74.25 MHz (1280x720p60): {verdict} (margin x{direct.fmax_mhz / 74.25:.2f}, {slack})"
            in panel.text.splitlines())  # fmt: skip
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
    assert (got["target"], got["video"], got["clock_mhz"], got["pipeline"]) == ("ice40-hx8k", None, 48.0, "auto")
    panel.pipeline.value = 6
    panel.start()
    assert panel.wait(30) and got["pipeline"] == 6


def test_wrong_session_is_a_type_error():
    with pytest.raises(TypeError, match=r"^session must be a Session, not str$"):
        HardwarePanel("session")


def test_missing_tools_are_one_line_naming_the_debian_package(session, tmp_path, monkeypatch):
    monkeypatch.setenv("PATH", str(tmp_path))  # an empty directory: no tool is found
    panel = HardwarePanel(session, target="xilinx-7")
    # Debian packages "yosys" and "nextpnr-ice40" (packages.debian.org, common practice)
    line = "cannot synthesize for xilinx-7: yosys is not installed (Debian package yosys: apt-get install yosys)"
    assert panel.text.splitlines() == [line, "not synthesized yet: press synthesize"]
    assert panel.button.disabled and line in panel.tools_note.value
    panel.target.value = "ice40-up5k"  # placed and routed: nextpnr-ice40 is needed too
    assert panel.missing == ("cannot synthesize for ice40-up5k: yosys and nextpnr-ice40 are not installed "
                             "(Debian packages yosys, nextpnr-ice40: apt-get install yosys nextpnr-ice40)")  # fmt: skip
    panel.start()  # no thread, no tool: the same line as the error
    assert not panel.running and panel.error == panel.missing and panel.result is None


def test_bad_choices_are_one_line_naming_the_field(session):
    with pytest.raises(ValueError, match=r"^target must be one of ice40-up5k, .*, not 'ice41'$"):
        HardwarePanel(session, target="ice41")
    with pytest.raises(ValueError, match=r"^pipeline must be 'auto' or an integer from 0 to 32, not 99$"):
        HardwarePanel(session, pipeline=99)
    with pytest.raises(ValueError, match=r"^video must be one of .*, not '720p'$"):
        HardwarePanel(session, video="720p")


# -- the Explorer's "hardware" section ------------------------------------------------------------
def _small_plan(net, table_bits: int):
    """A plan whose four tables (1024 or 512 words of 8 bits) are 2 or 1 iCE40 memory blocks each."""
    return Plan.uniform(net, weight_bits=8, weight_frac=4, acc_bits=16, out_bits=8, table_bits=table_bits,
                        table_frac=6).replace(layer=1, weight_frac=5, acc_bits=17)  # fmt: skip


def test_constructing_an_explorer_runs_no_tool(fruit_net, fruit_plan, monkeypatch):
    import subprocess

    def refuse(*args, **kwargs):
        raise AssertionError(f"a tool ran while the explorer was built: {args[0]!r}")

    monkeypatch.setattr(subprocess, "Popen", refuse)
    monkeypatch.setattr(subprocess, "run", refuse)
    ex = Explorer(fruit_net, plan=fruit_plan)
    assert list(ex.sections)[-2:] == ["overflow and clamps", "hardware"]
    assert ex.sections["hardware"].children[1] is ex.hardware and isinstance(ex.hardware, HardwarePanel)
    assert ex.hardware.session is ex.session and ex.hardware.result is None
    assert (ex.hardware.target.value, ex.hardware.clock.value, ex.hardware.pipeline.value) == (
        "ice40-up5k", "1280x720p60", "auto")  # fmt: skip


def test_explorer_synthesize_click_shows_the_measured_table_then_stale(tools, fruit_net, tmp_path, monkeypatch):
    import math

    monkeypatch.setenv("FXNET_SYNTH_CACHE", str(tmp_path / "cache"))
    plan = _small_plan(fruit_net, 10)
    ex = Explorer(fruit_net, plan=plan)
    hw = ex.hardware
    hw.button.click()
    assert hw.running or hw.result is not None
    ex.plan = ex.plan  # the other views stay live while the tools run (same plan: nothing goes stale)
    assert hw.wait(300), "synthesis did not finish in 300 s"
    r = hw.result
    assert hw.error == "" and r is not None and hw.result_plan == plan
    assert r == synthesize(fruit_net, plan, target="ice40-up5k", video="1280x720p60", pipeline="auto")  # cached
    # the iCE40 UP5K's sysMEM blocks hold 4 kbit each (FPGA-DS-02008); four tables of 2**10 words x 8 bits
    assert r.brams == 4 * math.ceil(2**10 * 8 / 4096)
    est = hardware_cost(fruit_net, plan, target="ice40-up5k").estimated()
    table = hw.figures.value
    # iCE40UP5K: 5280 LUTs, 30 block RAMs, 8 DSP blocks (FPGA-DS-02008, from memory)
    assert (f"<tr><td>LUTs</td><td>{est['luts']}</td><td>{r.luts}</td><td>" in table
            and f"{100 * r.luts / 5280:.1f} % of 5280</td></tr>" in table)  # fmt: skip
    assert f"<tr><td>block RAMs</td><td>{est['brams']}</td><td>{r.brams}</td>" in table and "% of 30<" in table
    # shift-add products: no multiplier for Yosys to map to a DSP block, estimated and measured
    assert est["dsps"] == r.dsps == 0
    assert f"<tr><td>DSP blocks</td><td>{est['dsps']}</td><td>{r.dsps}</td>" in table and "% of 8<" in table
    assert table.count("class='fxnet-bar'") == 4
    assert f"maximum clock: {r.fmax_mhz:.2f} MHz (nextpnr, seed 1)" in table
    assert "required clock 74.25 MHz (1280x720p60): " in table and hw.stale.value == ""

    ex.plan = _small_plan(fruit_net, 9)
    assert hw.is_stale and "stale: these figures are for another plan" in hw.stale.value
    assert hw.text.startswith("stale: these figures are for another plan (L1 W8.4 A16 T10.6 O8, ")
    hw.target.value = "ice40-hx8k"
    assert "note: these figures are for ice40-up5k (iCE40UP5K-SG48), 74.25 MHz (1280x720p60), pipeline auto" \
        in hw.text  # fmt: skip
    hw.target.value = "ice40-up5k"
    hw.button.click()
    assert hw.wait(300) and not hw.is_stale and hw.stale.value == ""
    # 2**9 words x 8 bits: one 4 kbit block per table
    est9 = hardware_cost(fruit_net, ex.plan, target="ice40-up5k").estimated()
    assert hw.result.brams == 4 and f"<td>block RAMs</td><td>{est9['brams']}</td><td>4</td>" in hw.figures.value


def test_a_network_swap_under_the_same_plan_marks_the_result_stale(tools, session, tmp_path):
    """A synthesized datapath holds its network's weights: the same plan with other weights is another design."""
    import dataclasses

    import numpy as np

    panel = HardwarePanel(session, run=lambda network, plan, **kw: synthesize(
        _adder_dir(tmp_path, plan), cache_dir=tmp_path / "cache", **kw))  # fmt: skip
    panel.start()
    assert panel.wait(120) and not panel.is_stale and panel.result_network == session.network
    net = session.network
    first = net.layers[0]
    nudged = dataclasses.replace(first, weights=np.asarray(first.weights) + 2.0**-6)
    other = net.replace_layers([nudged, *net.layers[1:]])
    session.use_network(other)
    session.flush()
    assert panel.is_stale and panel.text.startswith("stale: these figures are for another network")
    assert "another network" in panel.stale.value
    session.use_network(net)
    session.flush()
    assert not panel.is_stale and panel.stale.value == ""
