"""The generated reference datapath, simulated clock by clock in Icarus Verilog and GHDL, linted by Verilator.

Each case writes the datapath with its self-checking benches (``write_datapath(..., testbench=codes)``)
and runs them: the benches stream the golden vectors of ``emulate`` (every input when there are at most
2^12, else seeded random ones and the corners) with back-to-back samples, idle clocks carrying junk data
and a reset pulse while samples are in flight, and compare ``out_valid`` every clock and ``out_codes`` /
``out_decision`` whenever a sample is due, ``latency`` clocks after it went in (the contract's section
"Reference datapath (generated RTL)"). The expected values come from the project's kernel; the outside
references are the simulators, which implement IEEE 1364-2005 (iverilog -g2005) and IEEE 1076-2008
(ghdl --std=08) semantics, and Verilator's lint (``--lint-only -Wall``, no warning allowed).
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from fxnet_datapath_designs import random_case
from fxnet_datapath_tools import lint, parse, run_ghdl, run_iverilog
from fxnet_random_designs import demo_design, extreme_designs

from fxnet_widgets import write_datapath
from fxnet_widgets.core.datapath import default_vectors, plan_datapath, schedule
from fxnet_widgets.core.formats import shift_round
from fxnet_widgets.core.kernel import emulate
from fxnet_widgets.core.network import Network
from fxnet_widgets.core.plan import LayerPlan, Plan

RANDOM_SEEDS = range(30)
ROOT = Path(__file__).resolve().parents[2]


def _pipeline(seed: int, net: Network, plan: Plan) -> str | int:
    """Seed 5k: auto; 5k+1: 0 (combinational); 5k+2: 1; 5k+3: 3; 5k+4: a register after every level."""
    choice = ["auto", 0, 1, 3, None][seed % 5]
    if choice is None:
        return len(plan_datapath(net, plan).levels)
    return choice


def _check(d: Path, n_vectors: int) -> None:
    """Both benches pass with every vector compared; the module lints clean."""
    for language, run in (("verilog", run_iverilog), ("vhdl", run_ghdl)):
        rc, out = run(d)
        res = parse(out)
        assert res is not None, out[-3000:]
        assert (res["language"], res["verdict"], res["mismatches"]) == (language, "PASS", 0), out[-3000:]
        assert res["compared"] == n_vectors, out[-3000:]
        assert rc == 0, out[-3000:]
        assert "warning" not in out.lower(), out[-3000:]  # iverilog -Wall and ghdl -a say nothing
    rc, out = lint(d)
    assert (rc, out.strip()) == (0, ""), out[-3000:]


@pytest.mark.hdl
@pytest.mark.parametrize("seed", RANDOM_SEEDS)
def test_random_plan_bit_exact_in_both_languages(tmp_path: Path, seed: int) -> None:
    net, plan, codes = random_case(seed)
    pipeline = _pipeline(seed, net, plan)
    products = "shift-add" if seed % 3 == 2 else "multiply"  # CSD digits through the adder tree, or `*`
    r = write_datapath(net, plan, tmp_path / "dp", pipeline=pipeline, products=products, testbench=codes)
    if pipeline != "auto":
        assert r.latency == pipeline
    _check(tmp_path / "dp", len(codes))


def test_random_cases_cover_every_mode() -> None:
    """The 30 seeds draw every activation, rounding, overflow mode, both table samplings, left and right
    shifts, negative fractions, 1 to 3 layers, fan-in up to 8, one and several outputs, wide accumulators."""
    seen: dict[str, set] = {k: set() for k in ("act", "iround", "wround", "tround", "ovf", "sample", "layers")}
    shifts, fracs, fan_in, outs, acc = set(), set(), 0, set(), 0
    for seed in RANDOM_SEEDS:
        net, plan, _ = random_case(seed)
        seen["layers"].add(len(net.layers))
        outs.add(net.layers[-1].weights.shape[0] > 1)
        for L, lp in zip(net.layers, plan.layers):
            seen["act"].add(L.activation)
            seen["iround"].add(lp.index_round)
            seen["wround"].add(lp.weight_round)
            seen["ovf"].add(lp.acc_overflow)
            fan_in = max(fan_in, L.weights.shape[1])
            acc = max(acc, lp.acc_bits)
            fracs.add(lp.weight_frac < 0 or (lp.out_frac is not None and lp.out_frac < 0))
            if L.activation in ("sigmoid", "tanh"):
                seen["tround"].add(lp.table_round)
                seen["sample"].add(lp.table_sample)
        shifts.update(np.sign([Ly.shift for Ly in plan_datapath(net, plan).design.layers]).tolist())
    assert seen["act"] == {"sigmoid", "tanh", "relu", "identity"}
    for key in ("iround", "wround", "tround"):
        assert seen[key] == {"floor", "trunc", "half-up", "half-away", "half-even"}, key
    assert seen["ovf"] == {"wrap", "saturate"} and seen["sample"] == {"edge", "mid"}
    assert seen["layers"] == {1, 2, 3} and outs == {True, False} and fan_in == 8
    assert {-1, 1} <= shifts and True in fracs and acc >= 50


@pytest.mark.hdl
@pytest.mark.parametrize("case", sorted(extreme_designs()))
def test_corner_plans_bit_exact(tmp_path: Path, case: str) -> None:
    """Widest words (32-bit weights, 62-bit accumulators), shifts beyond 62 bits, 1-bit words, argmax ties."""
    net, plan, codes = extreme_designs()[case]
    write_datapath(net, plan, tmp_path / "dp", testbench=codes)
    _check(tmp_path / "dp", len(codes))


@pytest.mark.hdl
def test_demo_plan_bit_exact(tmp_path: Path) -> None:
    net, plan, codes, _ = demo_design(1500)
    r = write_datapath(net, plan, tmp_path / "dp", testbench=codes)
    assert r.meta["stages"][0] == "inputs" and r.meta["stages"][-1].startswith("decision")
    _check(tmp_path / "dp", len(codes))


@pytest.mark.hdl
@pytest.mark.parametrize("what", ["table word", "weight"])
def test_a_corrupted_table_word_or_weight_fails_the_benches(tmp_path: Path, what: str) -> None:
    net, plan, codes, _ = demo_design(400, use_assets=False)
    d = tmp_path / "dp"
    write_datapath(net, plan, d, pipeline=4, testbench=codes)
    if what == "table word":
        # flip one bit of the layer-2 table word that the most vectors read
        L = plan_datapath(net, plan).design.layers[1]
        index = np.clip(shift_round(emulate(net, plan, codes).acc[1][:, 0], L.shift, L.index_round), L.index_min,
                        L.index_max)  # fmt: skip
        address = int(np.bincount(index - L.index_min).argmax())
        f = d / "fxnet_layer2_table.memh"
        lines = f.read_text().splitlines()
        lines[1 + address] = format(int(lines[1 + address], 16) ^ 0x01, "02x")  # line 0 is the comment
        f.write_text("\n".join(lines) + "\n")
    else:
        # one weight of neuron 0 of layer 1, one step toward zero, in both languages
        def step(w: int) -> int:
            return w - 1 if w > 0 else w + 1

        v = d / "fxnet_datapath.v"
        new, n = re.subn(r"(l1_n0_p0 (?:<=|=) .*\* )(-?)(\d+)'sd(\d+);",
                         lambda m: f"{m[1]}{m[2]}{m[3]}'sd{abs(step(int(m[2] + m[4])))};", v.read_text())  # fmt: skip
        assert n == 1
        v.write_text(new)
        h = d / "fxnet_datapath.vhd"
        new, n = re.subn(r"(l1_n0_p0 <= resize\(.* \* to_signed\()(-?\d+)", lambda m: f"{m[1]}{step(int(m[2]))}",
                         h.read_text())  # fmt: skip
        assert n == 1
        h.write_text(new)
    for language, run in (("verilog", run_iverilog), ("vhdl", run_ghdl)):
        rc, out = run(d)
        res = parse(out)
        assert res is not None and res["language"] == language, out[-2000:]
        assert res["verdict"] == "FAIL" and res["mismatches"] > 0 and rc != 0, out[-2000:]


@pytest.mark.hdl
def test_a_bench_for_another_latency_fails(tmp_path: Path) -> None:
    """The benches check ``out_valid`` clock by clock: one register stage more or less is a failure."""
    net, plan = _small()
    codes = default_vectors(2, 4)
    write_datapath(net, plan, tmp_path / "dut", pipeline=3, testbench=codes)
    write_datapath(net, plan, tmp_path / "other", pipeline=4, testbench=codes)
    for name in ("fxnet_tb_stimulus.memh", "fxnet_tb_expect.memh", "fxnet_datapath_tb.v", "fxnet_datapath_tb.vhd"):
        (tmp_path / "dut" / name).write_bytes((tmp_path / "other" / name).read_bytes())
    for language, run in (("verilog", run_iverilog), ("vhdl", run_ghdl)):
        rc, out = run(tmp_path / "dut")
        res = parse(out)
        assert res is not None and (res["language"], res["verdict"]) == (language, "FAIL") and rc != 0, out[-2000:]


def test_schedule_has_bursts_gaps_and_a_reset_in_flight() -> None:
    rst, valid, index = schedule(300, latency=5)
    assert len(rst) == len(valid) == len(index)
    assert sorted(i for i in index if i >= 0) == list(range(300))  # every sample once, in order
    runs = "".join(map(str, valid)).split("0")
    assert max(len(r) for r in runs) >= 4  # back-to-back samples
    assert "101" in "".join(map(str, valid))  # single idle clocks
    pulse = [c for c in range(3, len(rst)) if rst[c]]
    assert len(pulse) == 1
    c = pulse[0]
    # samples that entered within the latency before the pulse are dropped (none of them is expected)
    assert any(valid[k] for k in range(c - 4, c + 1)) and all(index[k] < 0 for k in range(c - 4, c + 1))
    assert rst[:3] == [1, 1, 1] and valid[0] == 0


def test_default_vectors_are_exhaustive_for_small_inputs() -> None:
    v = default_vectors(3, 4)
    assert v.shape == (4096, 3) and len({tuple(r) for r in v.tolist()}) == 4096
    w = default_vectors(3, 8)
    assert w.shape == (1003, 3) and w[:2].tolist() == [[0, 0, 0], [255, 255, 255]]


def _small() -> tuple[Network, Plan]:
    net = Network.from_layers([([[1.0, -1.0], [0.5, 0.25]], [0.25, 0.0], "tanh")], input_bits=4)
    plan = Plan((LayerPlan(weight_bits=6, weight_frac=4, acc_bits=10, table_bits=6, table_frac=4, out_bits=6),))
    return net, plan


def test_files_ports_and_metadata(tmp_path: Path) -> None:
    net, plan = _small()
    r = write_datapath(net, plan, tmp_path / "dp", pipeline=2)
    assert r.files == ("datapath.json", "fxnet_datapath.v", "fxnet_datapath.vhd", "fxnet_layer1_table.memh")
    meta = json.loads((tmp_path / "dp" / "datapath.json").read_text())
    assert (meta["kind"], meta["version"], meta["latency"], meta["top"]) == ("fxnet.datapath", 1, 2, "fxnet_datapath")
    assert meta["ports"] == {"n_inputs": 2, "input_bits": 4, "in_data_bits": 8, "n_outputs": 2, "code_bits": 6,
                             "code_signed": True, "out_codes_bits": 12, "decision_bits": 1}  # fmt: skip
    v = (tmp_path / "dp" / "fxnet_datapath.v").read_text()
    # the contract's ports, widths as in its table: n_out * Bo codes, max(1, ceil(log2 n_out)) decision bits
    ports = ("input  wire clk", "input  wire rst", "input  wire in_valid", "input  wire [7:0] in_data",
             "output wire out_valid", "output wire [11:0] out_codes", "output wire [0:0] out_decision")  # fmt: skip
    for port in ports:
        assert port in v
    assert '$readmemh("fxnet_layer1_table.memh"' in v  # bare file name
    assert "layer 1 (tanh, 2->2): weights Q1.4 (6 b)" in v  # the plan in Q notation in the header
    vh = (tmp_path / "dp" / "fxnet_datapath.vhd").read_text()
    assert 'l1_table_read("fxnet_layer1_table.memh")' in vh and "entity fxnet_datapath is" in vh
    # inference only: no module or component instance at all (so no vendor primitive), one module
    assert re.findall(r"^\s*module\s+(\w+)", v, flags=re.M) == ["fxnet_datapath"]
    assert not re.search(r"^\s*[A-Za-z_]\w*\s+(#\s*\(.*\)\s*)?\w+\s*\(\s*\.", v, flags=re.M)
    assert "component" not in vh and "port map" not in vh


def test_pipeline_counts_and_errors(tmp_path: Path) -> None:
    net, plan = _small()
    levels = len(plan_datapath(net, plan).levels)
    for n in range(levels + 1):
        assert plan_datapath(net, plan, pipeline=n).cuts.__len__() == n
    with pytest.raises(ValueError, match=rf"^pipeline must be 'auto' or an integer from 0 to {levels}, not 99$"):
        write_datapath(net, plan, tmp_path / "x", pipeline=99)
    with pytest.raises(ValueError, match=r"^clock_mhz must be above 0 and at most 2000, not -1$"):
        write_datapath(net, plan, tmp_path / "x", clock_mhz=-1)
    with pytest.raises(ValueError, match=r"^video must be one of .*, not '720p'$"):
        write_datapath(net, plan, tmp_path / "x", video="720p")
    with pytest.raises(ValueError, match=r"^products must be one of multiply, shift-add, not 'csd'$"):
        write_datapath(net, plan, tmp_path / "x", products="csd")
    assert not (tmp_path / "x").exists()  # nothing half-written
    # a faster clock never needs fewer registers (auto adds them where the estimate is too long)
    lat = [len(plan_datapath(net, plan, clock_mhz=f).cuts) for f in (25.0, 74.25, 300.0, 1000.0)]
    assert lat == sorted(lat) and lat[0] >= 4


def test_shift_add_products_are_the_csd_digits(tmp_path: Path) -> None:
    """``products="shift-add"``: one term per nonzero canonical-signed digit (a weight of 7 = 8 - 1: two terms,
    Reitwiesner's recoding, from memory), each a signed power of two times the input."""
    net = Network.from_layers([([[7 / 16, -3 / 16]], [0.0], "identity")], input_bits=4)
    plan = Plan((LayerPlan(weight_bits=5, weight_frac=4, acc_bits=12, out_bits=8, out_frac=8),))
    write_datapath(net, plan, tmp_path / "dp", pipeline=0, products="shift-add")
    v = (tmp_path / "dp" / "fxnet_datapath.v").read_text()
    terms = re.findall(r"assign (l1_n0_p\d+s\d+) = .* \* (-?)\d+'sd(\d+);", v)  # sign, width, magnitude
    assert sorted((n, int(m + w)) for n, m, w in terms) == [
        ("l1_n0_p0s0", -1), ("l1_n0_p0s3", 8), ("l1_n0_p1s0", 1), ("l1_n0_p1s2", -4)
    ]  # fmt: skip


def test_cli_writes_the_datapath_and_reports_bad_input(tmp_path: Path) -> None:
    net, plan = _small()
    net.save(tmp_path / "net.json")
    plan.save(tmp_path / "plan.json")
    cmd = [
        sys.executable,
        "-m",
        "fxnet_widgets.cli",
        "datapath",
        str(tmp_path / "net.json"),
        str(tmp_path / "plan.json"),
    ]
    p = subprocess.run([*cmd, "-o", str(tmp_path / "dp"), "--pipeline", "3", "--json"], capture_output=True,
                       text=True, cwd=ROOT)  # fmt: skip
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    assert (doc["kind"], doc["latency"], doc["pipeline"]) == ("fxnet.datapath", 3, 3)
    p = subprocess.run([*cmd, "-o", str(tmp_path / "tb"), "--testbench", "--video", "1920x1080p60"],
                       capture_output=True, text=True, cwd=ROOT)  # fmt: skip
    assert p.returncode == 0, p.stderr
    assert (tmp_path / "tb" / "fxnet_datapath_tb.v").exists() and "latency" in p.stdout
    assert json.loads((tmp_path / "tb" / "datapath.json").read_text())["clock_mhz"] == 148.5  # CTA-861 VIC 16
    p = subprocess.run([*cmd, "-o", str(tmp_path / "bad"), "--pipeline", "fast"], capture_output=True, text=True,
                       cwd=ROOT)  # fmt: skip
    assert p.returncode == 2 and p.stderr.count("\n") == 1
    assert "--pipeline: must be 'auto' or a number of register stages, not 'fast'" in p.stderr
