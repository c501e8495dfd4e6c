"""``fxnet synth``: one JSON object with the issue's keys, one-line errors."""

from __future__ import annotations

import contextlib
import io
import json
import shutil

import pytest
from fxtools import missing

from fxnet_widgets.cli import main

pytestmark = pytest.mark.synth

ADDER = """module adder8 (input wire clk, input wire [7:0] a, input wire [7:0] b, output reg [8:0] y);
  always @(posedge clk) y <= a + b;
endmodule
"""


def run_cli(args: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(args)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture()
def design(tmp_path, monkeypatch):
    monkeypatch.setenv("FXNET_SYNTH_CACHE", str(tmp_path / "cache"))
    d = tmp_path / "adder"
    d.mkdir()
    (d / "adder8.v").write_text(ADDER)
    return d


def test_json_has_the_documented_keys(design):
    for name in ("yosys", "nextpnr-ice40"):
        if shutil.which(name) is None:
            missing(f"{name} is not installed (Debian package {name})")
    code, out, err = run_cli(["synth", "--design", str(design), "--top", "adder8", "--video", "720p60", "--json"])
    assert code == 0, err
    doc = json.loads(out)
    for key in ("target", "luts", "ffs", "carries", "brams", "dsps", "fmax_mhz", "clock_mhz", "meets_clock",
                "latency", "tools"):  # fmt: skip
        assert key in doc
    # 1280x720p60: 74.25 MHz pixel clock (CTA-861 VIC 4)
    assert doc["target"] == "ice40-up5k" and doc["clock_mhz"] == pytest.approx(74.25)
    assert doc["meets_clock"] == (doc["fmax_mhz"] >= 74.25) and doc["ffs"] == 9
    code, out, _ = run_cli(["synth", "--design", str(design), "--top", "adder8", "--video", "720p60", "--json"])
    assert code == 0 and json.loads(out)["cached"] is True
    code, out, _ = run_cli(["synth", "--design", str(design), "--top", "adder8", "--video", "720p60"])
    assert "maximum clock (nextpnr, seed 1):" in out and "not sign-off" in out


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--target", "ice40-up9k"], "fxnet synth: --target must be one of ice40-up5k, ice40-hx8k, ice40-hx1k, "
                                     "xilinx-7, ecp5-25k, generic, not 'ice40-up9k'"),
        (["--clock", "50", "--video", "720p60"], "fxnet synth: give --clock or --video, not both"),
        (["--clock", "-1"], "fxnet synth: --clock must be a number between 0 and 10000, not '-1'"),
        (["--seed", "x"], "fxnet synth: --seed must be a whole number between 0 and 2147483647, not 'x'"),
        (["--seed", "2147483648"], "fxnet synth: --seed must be a whole number between 0 and 2147483647, "
                                   "not '2147483648'"),
        (["--pipeline", "deep"], "fxnet synth: --pipeline must be auto or a whole number, not 'deep'"),
    ],
)  # fmt: skip
def test_bad_arguments_are_one_line(design, args, message):
    code, out, err = run_cli(["synth", "--design", str(design), "--top", "adder8", *args])
    assert (code, out, err) == (2, "", message + "\n")


def test_network_and_plan_are_required_without_a_design(design):
    code, _, err = run_cli(["synth"])
    assert (code, err) == (2, "fxnet synth: NETWORK and PLAN are required (or --design DIR)\n")
