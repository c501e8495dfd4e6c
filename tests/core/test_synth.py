"""Synthesis and place and route through Yosys and nextpnr-ice40 (``fxnet_widgets.core.synth``).

Every count is checked against the tools' own report: Yosys ``stat`` on the design
alone, nextpnr's "Max frequency" log line; resource kinds against the device
datasheets named beside each check.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import threading
from pathlib import Path

import pytest
from fxtools import missing

import fxnet_widgets
from fxnet_widgets.core.synth import (
    CAUTION,
    TARGETS,
    SynthesisCancelled,
    SynthesisResult,
    ToolError,
    synthesize,
)
from fxnet_widgets.core.synth.netlist import Port, wrapper_verilog

pytestmark = pytest.mark.synth

ADDER = """module adder8 (input wire clk, input wire [7:0] a, input wire [7:0] b, output reg [8:0] y);
  always @(posedge clk) y <= a + b;
endmodule
"""
MUL16 = """module mul16 (input wire clk, input wire [15:0] a, input wire [15:0] b, output reg [31:0] y);
  always @(posedge clk) y <= a * b;
endmodule
"""
ROM = """module rom (input wire clk, input wire [7:0] addr, output reg [15:0] q);
  reg [15:0] mem [0:255];
  initial $readmemh("rom.mem", mem);
  always @(posedge clk) q <= mem[addr];
endmodule
"""
SHIFT = """module shift (input wire clk, input wire d, output wire q);
  reg [1299:0] s;
  always @(posedge clk) s <= {s[1298:0], d};
  assign q = s[1299];
endmodule
"""


@pytest.fixture(scope="module")
def tools() -> None:
    for name in ("yosys", "nextpnr-ice40"):
        if shutil.which(name) is None:
            missing(f"{name} is not installed (Debian package {name})")


@pytest.fixture()
def cache(tmp_path: Path) -> Path:
    d = tmp_path / "cache"
    d.mkdir()
    return d


def _design(tmp_path: Path, name: str, text: str, **extra: str) -> Path:
    d = tmp_path / name
    d.mkdir()
    (d / f"{name}.v").write_text(text)
    for fname, body in extra.items():
        (d / fname.replace("_", ".")).write_text(body)
    return d


def _yosys_stat(design: Path, top: str, command: str, then: str = "") -> dict[str, int]:
    """Cell counts from Yosys's own ``stat`` on the design alone (no wrapper, flattened)."""
    sources = " ".join(sorted(p.name for p in design.glob("*.v")))
    out = subprocess.run(
        ["yosys", "-p", f"read_verilog {sources}; {command} -top {top}; {then} stat"], cwd=design, capture_output=True,
        text=True, check=True, timeout=120,
    ).stdout  # fmt: skip
    block = out.rsplit("Number of cells:", 1)[1]
    return {m[1]: int(m[2]) for m in re.finditer(r"^\s+(\S+)\s+(\d+)\s*$", block, re.M)}


def test_adder_counts_match_yosys_stat_and_fmax_matches_nextpnr_log(tools, tmp_path, cache):
    d = _design(tmp_path, "adder8", ADDER)
    keep = tmp_path / "keep"
    keep.mkdir()
    r = synthesize(d, target="ice40-up5k", top="adder8", clock_mhz=50, cache_dir=cache, keep_dir=keep)
    stat = _yosys_stat(d, "adder8", "synth_ice40 -dsp")
    assert r.luts == stat["SB_LUT4"] and r.carries == stat["SB_CARRY"] and r.ffs == stat["SB_DFF"]
    # a registered 9-bit sum: one flip-flop per output bit; an N-bit adder takes one carry per bit on
    # iCE40 (logic cell with carry chain: Lattice iCE40 LP/HX Family Data Sheet, PLB section; from memory)
    assert r.ffs == 9 and r.carries == 8
    assert (r.brams, r.dsps) == (0, 0)
    # the last "Max frequency" line of nextpnr's log is the routed result
    line = re.findall(r"Max frequency for clock '[^']+': ([\d.]+) MHz", (keep / "nextpnr-ice40.log").read_text())[-1]
    assert r.fmax_mhz == pytest.approx(float(line), abs=0.006)
    assert r.meets_clock is (r.fmax_mhz >= 50) and r.clock_mhz == 50
    assert r.tools["yosys"].startswith("Yosys ") and "nextpnr" in r.tools["nextpnr-ice40"]
    assert r.device == "iCE40UP5K-SG48" and r.capacity["luts"] == 5280 and r.fits
    assert CAUTION in r.caution and r.device in r.caution


def test_a_clock_not_met_is_a_result_not_a_failure(tools, tmp_path, cache):
    d = _design(tmp_path, "adder8", ADDER)
    r = synthesize(d, target="ice40-up5k", top="adder8", clock_mhz=900, cache_dir=cache)
    # no iCE40 logic runs at 900 MHz (the UltraPlus fabric tops out in the low hundreds of MHz; from memory)
    assert r.fmax_mhz is not None and r.fmax_mhz < 900 and r.meets_clock is False
    assert "required clock 900 MHz: NOT met (margin x0." in r.summary() and " MHz short)" in r.summary()


def test_16x16_multiplier_takes_one_dsp_block(tools, tmp_path, cache):
    d = _design(tmp_path, "mul16", MUL16)
    up5k = synthesize(d, target="ice40-up5k", top="mul16", cache_dir=cache)
    # iCE40UP5K: 8 DSP blocks of a 16x16 multiplier each (iCE40 UltraPlus Family Data Sheet; from memory)
    assert up5k.dsps == 1 == _yosys_stat(d, "mul16", "synth_ice40 -dsp")["SB_MAC16"]
    x7 = synthesize(d, target="xilinx-7", top="mul16", cache_dir=cache)
    # DSP48E1 multiplies 25x18 (7 Series DSP48E1 Slice User Guide UG479; from memory): 16x16 needs one
    assert x7.dsps == 1 and x7.ffs == 0  # the product register is the DSP's own output register
    assert x7.fmax_mhz is None and x7.meets_clock is None and "nextpnr-ice40" not in x7.tools


def test_rom_from_readmemh_is_one_block_ram(tools, tmp_path, cache):
    words = "\n".join(f"{(i * 40503) & 0xFFFF:04x}" for i in range(256)) + "\n"
    d = _design(tmp_path, "rom", ROM, rom_mem=words)
    r = synthesize(d, target="ice40-hx8k", top="rom", video="1280x720p60", cache_dir=cache)
    # 256 x 16 bits = 4 kbit: one iCE40 sysMEM block (iCE40 LP/HX Family Data Sheet, 4 kbit EBR; from memory)
    assert r.brams == 1 == _yosys_stat(d, "rom", "synth_ice40")["SB_RAM40_4K"]
    # 1280x720p60 is clocked at 74.25 MHz (CTA-861 VIC 4)
    assert r.clock_mhz == pytest.approx(74.25) and r.video == "1280x720p60"


def test_a_design_too_large_says_so_and_is_not_placed(tools, tmp_path, cache):
    d = _design(tmp_path, "shift", SHIFT)
    r = synthesize(d, target="ice40-hx1k", top="shift", clock_mhz=12, cache_dir=cache)
    # iCE40HX1K: 1280 logic cells, one flip-flop each (iCE40 LP/HX Family Data Sheet; from memory)
    assert r.ffs == 1300 and not r.fits and r.fmax_mhz is None and r.meets_clock is None
    assert r.overflows() == ["1300 flip-flops of the 1280 on iCE40HX1K-TQ144"]
    assert "does NOT fit: needs 1300 flip-flops of the 1280 on iCE40HX1K-TQ144" in r.summary()


def test_results_are_cached_by_value(tools, tmp_path, cache):
    d = _design(tmp_path, "adder8", ADDER)
    first = synthesize(d, target="generic", top="adder8", cache_dir=cache)
    again = synthesize(d, target="generic", top="adder8", cache_dir=cache)
    assert not first.cached and again.cached and again == first
    assert [p.name for p in cache.iterdir()] == [f"{first.key}.json"]
    assert SynthesisResult.from_dict(first.to_dict()) == first
    (d / "adder8.v").write_text(ADDER.replace("a + b", "a - b"))
    changed = synthesize(d, target="generic", top="adder8", cache_dir=cache)
    assert not changed.cached and changed.key != first.key and changed.design_digest != first.design_digest
    stat = _yosys_stat(d, "adder8", "synth -flatten", "abc -lut 4; opt_clean;")
    assert changed.luts == stat["$lut"] and changed.ffs == stat["$_DFF_P_"] == 9


def test_failing_tool_gives_its_last_lines_and_writes_nothing(tools, tmp_path, cache):
    d = _design(tmp_path, "bad", "module bad (input wire clk, output wire y);\n  assign y = ;\nendmodule\n")
    with pytest.raises(ToolError, match=r"^yosys must succeed, but it exited with code 1; its last lines:\n.*ERROR"):
        synthesize(d, target="ice40-up5k", top="bad", cache_dir=cache)
    assert list(cache.iterdir()) == []


def test_missing_tool_names_the_debian_package(tmp_path, monkeypatch, cache):
    monkeypatch.setenv("PATH", str(tmp_path))
    d = _design(tmp_path, "adder8", ADDER)
    msg = r"^yosys must be installed to synthesize \(Debian package yosys: apt-get install yosys\)$"
    with pytest.raises(ToolError, match=msg):
        synthesize(d, top="adder8", cache_dir=cache)


def test_cancel_stops_the_run_and_writes_nothing(tools, tmp_path, cache):
    d = _design(tmp_path, "mul16", MUL16)
    stop, seen = threading.Event(), []

    def progress(fraction: float, message: str) -> None:
        seen.append(message)
        if message.startswith("yosys: synthesis"):
            stop.set()

    with pytest.raises(SynthesisCancelled, match=r"^yosys was stopped$"):
        synthesize(d, target="xilinx-7", top="mul16", cache_dir=cache, progress=progress, cancel=stop)
    assert seen == ["yosys: reading the design", "yosys: synthesis for xilinx-7"]
    assert list(cache.iterdir()) == []


def test_timeout_kills_the_tool(tools, tmp_path, cache):
    d = _design(tmp_path, "mul16", MUL16)
    with pytest.raises(ToolError, match=r"^yosys must finish within 0.05 s, but it ran out of time"):
        synthesize(d, target="xilinx-7", top="mul16", cache_dir=cache, timeout=0.05)


def test_wrong_arguments_are_one_line_errors(tools, tmp_path, cache):
    d = _design(tmp_path, "adder8", ADDER)
    with pytest.raises(ValueError, match=r"^target must be one of ice40-up5k, ice40-hx8k, ice40-hx1k, xilinx-7, "
                                         r"ecp5-25k, generic, not 'ice40-up9k'$"):  # fmt: skip
        synthesize(d, target="ice40-up9k", cache_dir=cache)
    with pytest.raises(ValueError, match=r"^video must be one of 640x480p59.94, .*, not '720p'$"):
        synthesize(d, video="720p", cache_dir=cache)
    with pytest.raises(ValueError, match=r"^clock_mhz must be a number of MHz between 0 and 10000, not -5$"):
        synthesize(d, clock_mhz=-5, cache_dir=cache)
    with pytest.raises(ValueError, match=r": the top module must be one of the modules it defines \(adder8\), "
                                         r"not 'fxnet_datapath'$"):  # fmt: skip
        synthesize(d, cache_dir=cache)
    with pytest.raises(ValueError, match=r"^the clock must be a 1-bit input of adder8 \(inputs: clk, a, b\), "
                                         r"not 'clock'$"):  # fmt: skip
        synthesize(d, top="adder8", clock="clock", cache_dir=cache)
    with pytest.raises(TypeError, match=r"^plan must be given with a network, not None$"):
        synthesize(object(), cache_dir=cache)


def test_wrapper_puts_every_port_between_registers_on_three_pins():
    ports = [Port("clk", "input", 1), Port("x", "input", 3), Port("y", "output", 6), Port("z", "output", 1)]
    text = wrapper_verilog("dp", ports, "clk")
    assert "module fxnet_synth_wrap (input wire clk, input wire si, output wire so);" in text
    assert "fx_in <= {fx_in[1:0], si};" in text and "fx_fold0 <= fx_out;" in text
    assert "dp dut (.clk(clk), .x(fx_in[2:0]), .y(fx_out[5:0]), .z(fx_out[6:6]));" in text
    # 7 output bits fold 4 to 1 per registered level: 7 -> 2 -> 1
    assert "fx_fold1[1] <= ^fx_fold0[6:4];" in text and "assign so = fx_fold2[0];" in text


def test_device_tables_name_their_datasheet():
    for name, t in TARGETS.items():
        assert t.name == name
        if name != "generic":
            assert t.datasheet and t.luts and t.brams is not None
    # capacities (Lattice iCE40 UltraPlus and iCE40 LP/HX family data sheets; from memory)
    assert (TARGETS["ice40-up5k"].luts, TARGETS["ice40-up5k"].brams, TARGETS["ice40-up5k"].dsps) == (5280, 30, 8)
    assert (TARGETS["ice40-hx8k"].luts, TARGETS["ice40-hx8k"].brams) == (7680, 32)
    assert (TARGETS["ice40-hx1k"].luts, TARGETS["ice40-hx1k"].brams) == (1280, 16)


def test_network_and_plan_go_through_write_datapath(tools, tmp_path, cache):
    net = fxnet_widgets.Network.from_layers([([[0.5, -0.25, 0.875]], [0.0], "relu")])
    plan = fxnet_widgets.Plan.uniform(net, weight_bits=6, weight_frac=4, acc_bits=14, out_bits=6, out_frac=3)
    if not hasattr(fxnet_widgets, "write_datapath"):
        msg = r"^fxnet_widgets.write_datapath must be installed to synthesize a network and plan, but it is missing$"
        with pytest.raises(ToolError, match=msg):
            synthesize(net, plan, cache_dir=cache)
        return
    r = synthesize(net, plan, target="ice40-up5k", video="1280x720p60", cache_dir=cache)
    assert r.plan_digest is not None and r.latency is not None and r.luts > 0
    again = synthesize(net, plan, target="ice40-up5k", video="1280x720p60", cache_dir=cache)
    assert again.cached and again == r
