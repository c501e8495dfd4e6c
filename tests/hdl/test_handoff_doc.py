"""The Verilog sketch in docs/handoff.md computes layer 1 of the demo bit for bit."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import pytest
from fxnet_hdl_benches import need_tool
from fxnet_random_designs import demo_design

from fxnet_widgets.core.export import export

DOC = Path(__file__).resolve().parents[2] / "docs" / "handoff.md"

DRIVER = """
module doc_tb;
`include "fxnet_design.vh"
reg [FXNET_INPUT_BITS-1:0] vin [0:FXNET_N_VECTORS*FXNET_N_INPUTS-1];
reg [FXNET_L1_ACC_BITS-1:0] gacc [0:FXNET_N_VECTORS*FXNET_L1_N_OUT-1];
reg [FXNET_L1_OUT_BITS-1:0] gcode [0:FXNET_N_VECTORS*FXNET_L1_N_OUT-1];
reg [FXNET_N_INPUTS*FXNET_INPUT_BITS-1:0] x;
wire [FXNET_L1_ACC_BITS-1:0] acc0, acc2;
wire [FXNET_L1_OUT_BITS-1:0] code0, code2;
fxnet_l1_neuron #(.J(0)) n0 (x, acc0, code0);
fxnet_l1_neuron #(.J(2)) n2 (x, acc2, code2);
integer t, i, errors;
initial begin
  $readmemh(FXNET_VECTORS_INPUTS_FILE, vin);
  $readmemh(FXNET_L1_VECTORS_ACC_FILE, gacc);
  $readmemh(FXNET_L1_VECTORS_CODES_FILE, gcode);
  errors = 0;
  for (t = 0; t < FXNET_N_VECTORS; t = t + 1) begin
    for (i = 0; i < FXNET_N_INPUTS; i = i + 1) x[i*FXNET_INPUT_BITS +: FXNET_INPUT_BITS] = vin[t*FXNET_N_INPUTS + i];
    #1;
    if (acc0 !== gacc[t*FXNET_L1_N_OUT] || code0 !== gcode[t*FXNET_L1_N_OUT]) errors = errors + 1;
    if (acc2 !== gacc[t*FXNET_L1_N_OUT + 2] || code2 !== gcode[t*FXNET_L1_N_OUT + 2]) errors = errors + 1;
  end
  $display("doc sketch: %0d vectors, %0d mismatches", FXNET_N_VECTORS, errors);
end
endmodule
"""


@pytest.mark.hdl
def test_doc_verilog_sketch_matches_golden_vectors(tmp_path: Path) -> None:
    iverilog, vvp = need_tool("iverilog"), need_tool("vvp")
    blocks = re.findall(r"```verilog\n(.*?)```", DOC.read_text(), flags=re.S)
    assert len(blocks) == 1
    net, plan, codes, _ = demo_design(400, use_assets=False)
    lp = plan.layers[0]
    assert (lp.acc_overflow, lp.index_round, net.layers[0].activation) == ("wrap", "floor", "sigmoid")
    export(net, plan, tmp_path / "hw", vectors=codes)
    src = tmp_path / "doc.v"
    src.write_text(blocks[0] + DRIVER)
    c = subprocess.run(
        [iverilog, "-g2005", "-I", str(tmp_path / "hw"), "-o", str(tmp_path / "doc.vvp"), str(src)],
        capture_output=True, text=True,
    )  # fmt: skip
    assert c.returncode == 0, c.stderr
    r = subprocess.run([vvp, "-n", str(tmp_path / "doc.vvp")], capture_output=True, text=True, cwd=tmp_path / "hw")
    assert "doc sketch: 400 vectors, 0 mismatches" in r.stdout, r.stdout + r.stderr
