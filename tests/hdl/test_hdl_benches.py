"""Exports checked bit for bit in real HDL simulators (Icarus Verilog, GHDL).

Each bench (see ``fxnet_hdl_benches``) recomputes the network from the exported
constants and tables per ``semantics.md`` and compares every accumulator, code
and decision with the golden vectors. The reference for the expected values is
the project's kernel (``fxnet_widgets.emulate``); the simulators are the outside
check: Verilog per IEEE 1364-2005 and VHDL per IEEE 1076-2008 semantics, as
implemented by iverilog 11 and ghdl 2.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from fxnet_hdl_benches import parse_result, run_verilog, run_vhdl
from fxnet_random_designs import demo_design, extreme_designs, random_design

from fxnet_widgets.core.export import export
from fxnet_widgets.core.formats import shift_round
from fxnet_widgets.core.kernel import build_integer_network, emulate

RANDOM_SEEDS = range(24)
RUNNERS = {"verilog": run_verilog, "vhdl": run_vhdl}


def _export(tmp_path: Path, net, plan, codes) -> Path:
    d = tmp_path / "handoff"
    export(net, plan, d, vectors=codes)
    return d


def _assert_pass(language: str, rc: int, out: str, net, codes) -> None:
    res = parse_result(out)
    assert res is not None, out[-3000:]
    n = len(codes)
    neurons = sum(L.n_out for L in net.layers)
    assert (res["language"], res["verdict"], res["mismatches"]) == (language, "PASS", 0), out[-3000:]
    assert (res["vectors"], res["accumulators"], res["codes"], res["decisions"]) == (n, n * neurons, n * neurons, n)
    assert rc == 0, out[-3000:]


@pytest.mark.hdl
@pytest.mark.parametrize("language", sorted(RUNNERS))
@pytest.mark.parametrize("seed", RANDOM_SEEDS)
def test_random_design_bit_exact(tmp_path: Path, language: str, seed: int) -> None:
    net, plan, codes = random_design(seed)
    d = _export(tmp_path, net, plan, codes)
    rc, out = RUNNERS[language](d, tmp_path / "build")
    _assert_pass(language, rc, out, net, codes)


@pytest.mark.hdl
@pytest.mark.parametrize("language", sorted(RUNNERS))
@pytest.mark.parametrize("case", sorted(extreme_designs()))
def test_extreme_design_bit_exact(tmp_path: Path, language: str, case: str) -> None:
    net, plan, codes = extreme_designs()[case]
    d = _export(tmp_path, net, plan, codes)
    rc, out = RUNNERS[language](d, tmp_path / "build")
    _assert_pass(language, rc, out, net, codes)


@pytest.mark.hdl
@pytest.mark.parametrize("language", sorted(RUNNERS))
def test_demo_bit_exact(tmp_path: Path, language: str) -> None:
    net, plan, codes, _ = demo_design()
    d = _export(tmp_path, net, plan, codes)
    rc, out = RUNNERS[language](d, tmp_path / "build")
    _assert_pass(language, rc, out, net, codes)


def test_random_designs_cover_the_contract() -> None:
    """The random suite really exercises every mode (else a passing bench proves little)."""
    seen: dict[str, set] = {"activation": set(), "index_round": set(), "overflow_event": set(), "signed_out": set()}
    left = right = table_clamp = 0
    for seed in RANDOM_SEEDS:
        net, plan, codes = random_design(seed)
        intnet = build_integer_network(net, plan)
        em = emulate(net, plan, codes)
        for li, L in enumerate(intnet.layers):
            seen["activation"].add(L.activation)
            seen["index_round"].add(L.plan.index_round)
            seen["signed_out"].add(L.out_signed)
            if int(em.events[li]["acc_overflow"].sum()):
                seen["overflow_event"].add(L.plan.acc_overflow)
            left += L.shift < 0
            right += L.shift > 0
            table_clamp += int(em.events[li]["table_low"].sum() + em.events[li]["table_high"].sum()) > 0
    assert seen["activation"] == {"sigmoid", "tanh", "relu", "identity"}
    assert seen["index_round"] == {"floor", "trunc", "half-up", "half-away", "half-even"}
    assert seen["overflow_event"] == {"wrap", "saturate"}
    assert seen["signed_out"] == {True, False}
    assert left >= 5 and right >= 5 and table_clamp >= 5


def _used_address(net, plan, codes) -> tuple[int, int]:
    """(address, word) of the layer-1 table entry that vector 0, neuron 0 reads."""
    L = build_integer_network(net, plan).layers[0]
    s_a = emulate(net, plan, codes).acc[0][:1, :1]
    a = int(np.clip(shift_round(s_a, L.shift, L.plan.index_round), L.index_min, L.index_max)[0, 0])
    addr = a - L.index_min
    return addr, int(L.table[addr])


@pytest.mark.hdl
def test_corrupted_table_image_word_fails(tmp_path: Path) -> None:
    net, plan, codes, _ = demo_design(200, use_assets=False)
    d = _export(tmp_path, net, plan, codes)
    addr, word = _used_address(net, plan, codes)
    memh = d / "tables" / "layer1_table.memh"
    lines = memh.read_text().splitlines()
    assert int(lines[1 + addr], 16) == word  # line 0 is the // comment
    lines[1 + addr] = f"{word ^ 1:0{len(lines[1 + addr])}x}"
    memh.write_text("\n".join(lines) + "\n")
    rc, out = run_verilog(d, tmp_path / "build")
    res = parse_result(out)
    assert res is not None and res["verdict"] == "FAIL" and res["mismatches"] >= 1, out[-2000:]
    assert "MISMATCH vector 0 layer 1 neuron 0: code" in out
    assert rc != 0
    # the VHDL bench compares the package's table with the image word for word
    rc, out = run_vhdl(d, tmp_path / "build-vhdl")
    res = parse_result(out)
    assert res is not None and res["verdict"] == "FAIL" and res["mismatches"] == 1, out[-2000:]
    assert f"MISMATCH layer 1 table word {addr}: package and image differ" in out
    assert rc != 0


@pytest.mark.hdl
def test_corrupted_package_table_word_fails_vhdl(tmp_path: Path) -> None:
    net, plan, codes, _ = demo_design(200, use_assets=False)
    d = _export(tmp_path, net, plan, codes)
    addr, word = _used_address(net, plan, codes)
    pkg = d / "fxnet_design_pkg.vhd"
    text = pkg.read_text()
    start = text.index("constant FXNET_L1_TABLE :")
    body_start = text.index(":= (", start)
    lits = list(re.finditer(r'\d+X"([0-9A-F]+)"', text[body_start:]))
    m = lits[addr]
    assert int(m.group(1), 16) == word
    a, b = body_start + m.start(1), body_start + m.end(1)
    pkg.write_text(text[:a] + f"{word ^ 1:0{b - a}X}" + text[b:])
    rc, out = run_vhdl(d, tmp_path / "build")
    res = parse_result(out)
    assert res is not None and res["verdict"] == "FAIL" and res["mismatches"] >= 1, out[-2000:]
    assert "MISMATCH vector 0 layer 1 neuron 0: code" in out
    assert rc != 0
