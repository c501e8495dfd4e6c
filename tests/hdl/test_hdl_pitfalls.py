"""The three HDL pitfalls the benches guard against, each shown once on purpose.

Each test runs a tiny program in the real simulator and checks that the naive
form gives the wrong answer and the form the benches use gives the contract's.
"""

from __future__ import annotations

import subprocess
from pathlib import Path

import numpy as np
import pytest
from fxnet_hdl_benches import need_tool

from fxnet_widgets.core.formats import wrap


def _verilog(tmp_path: Path, body: str) -> list[int]:
    iverilog, vvp = need_tool("iverilog"), need_tool("vvp")
    src = tmp_path / "t.v"
    src.write_text(f"module t;\n{body}\nendmodule\n")
    subprocess.run([iverilog, "-g2005", "-o", str(tmp_path / "t.vvp"), str(src)], check=True, capture_output=True)
    out = subprocess.run([vvp, "-n", str(tmp_path / "t.vvp")], check=True, capture_output=True, text=True).stdout
    return [int(v) for v in out.split()]


def _vhdl(tmp_path: Path, decl: str, body: str) -> list[int]:
    ghdl = need_tool("ghdl")
    src = tmp_path / "t.vhd"
    src.write_text(
        "library ieee; use ieee.std_logic_1164.all; use ieee.numeric_std.all;\n"
        "entity t is end entity;\narchitecture a of t is begin\nprocess\n"
        f"{decl}\nbegin\n{body}\nwait;\nend process;\nend architecture;\n"
    )
    opts = ["--std=08", f"--workdir={tmp_path}"]
    subprocess.run([ghdl, "-a", *opts, str(src)], check=True, capture_output=True)
    r = subprocess.run([ghdl, "--elab-run", *opts, "t"], check=True, capture_output=True, text=True)
    return [
        int(line.rsplit(":", 1)[1]) for line in r.stdout.splitlines() + r.stderr.splitlines() if "(report note)" in line
    ]


@pytest.mark.hdl
def test_verilog_unsigned_operand_makes_the_product_unsigned(tmp_path: Path) -> None:
    # IEEE 1364-2005 section 5.5.1: if any operand is unsigned, the expression is unsigned
    naive, fixed = _verilog(
        tmp_path,
        """reg signed [7:0] w; reg [7:0] x; reg signed [31:0] p;
initial begin
  w = -3; x = 200;
  p = w * x; $display("%0d", p);
  p = w * $signed({1'b0, x}); $display("%0d", p);
end""",
    )
    assert fixed == -600  # -3 * 200
    assert naive == (253 * 200)  # w read as unsigned 253 (two's complement of -3 in 8 bits)


@pytest.mark.hdl
def test_verilog_part_select_is_unsigned(tmp_path: Path) -> None:
    # IEEE 1364-2005 section 5.5.1: bit-select and part-select results are unsigned
    naive, fixed = _verilog(
        tmp_path,
        """localparam [15:0] P = 16'hF008; reg signed [63:0] r;
initial begin
  r = P[15:8] >>> 2; $display("%0d", r);
  r = $signed(P[15:8]) >>> 2; $display("%0d", r);
end""",
    )
    assert fixed == -16 >> 2  # 0xF0 is -16 in 8 bits; >>> of a signed value is arithmetic (floor)
    assert naive == 0xF0 >> 2  # 60: a logical shift of the unsigned 240


@pytest.mark.hdl
def test_vhdl_resize_keeps_the_sign_bit(tmp_path: Path) -> None:
    # IEEE 1076-2008 numeric_std RESIZE (signed): when narrowing, the sign bit is kept
    # together with the rightmost bits; slicing keeps the rightmost bits only (a wrap)
    naive, fixed = _vhdl(
        tmp_path,
        "variable s : signed(9 downto 0) := to_signed(200, 10);",
        "report integer'image(to_integer(resize(s, 8)));\nreport integer'image(to_integer(s(7 downto 0)));",
    )
    assert fixed == int(wrap(np.array([200]), 8)[0]) == -56  # two's-complement wrap, 200 - 256
    assert naive == 72  # sign bit 0 kept, then the low 7 bits 1001000
