"""Self-checking test benches for the datapath (Verilog-2005 and VHDL-2008).

The golden outputs come from :func:`~fxnet_widgets.core.kernel.emulate`. The
clock-by-clock schedule is made here, seeded: a reset at the start, bursts of
back-to-back samples, random idle clocks (with junk on ``in_data``), single
idle clocks, and one reset pulse mid-stream while samples are in flight.
Every clock has one stimulus word ``{rst, in_valid, in_data}`` and one
expected word ``{out_valid, out_codes, out_decision}``, derived from the
contract: a sample accepted in clock ``c`` comes out in clock ``c + L`` unless
``rst`` is high in one of the clocks ``c .. c + L - 1``. The benches compare
``out_valid`` every clock (from clock 1, after the first reset edge) and the
codes and decision whenever ``out_valid`` is expected, print one line::

    fxnet datapath <language> bench: PASS|FAIL <n> clocks, <m> outputs compared, <e> mismatches

and exit non-zero on a mismatch.
"""

from __future__ import annotations

import itertools

import numpy as np

from ..export._design import Design
from ..kernel import emulate
from ..network import Network, as_codes
from ..plan import Plan

__all__ = ["bench_files", "default_vectors", "schedule", "STIMULUS_FILE", "EXPECT_FILE"]

STIMULUS_FILE = "fxnet_tb_stimulus.memh"
EXPECT_FILE = "fxnet_tb_expect.memh"
_EXHAUSTIVE_BITS = 12


def default_vectors(n_in: int, bits: int, seed: int = 0, n_random: int = 1000) -> np.ndarray:
    """Every input when there are at most 2^12, else the corners and ``n_random`` seeded random ones."""
    hi = (1 << bits) - 1
    if n_in * bits <= _EXHAUSTIVE_BITS:
        return np.array(list(itertools.product(range(hi + 1), repeat=n_in)), dtype=np.int64)
    rng = np.random.default_rng(seed)
    corners = np.array([[0] * n_in, [hi] * n_in, [hi * (i % 2) for i in range(n_in)]], dtype=np.int64)
    return np.vstack([corners, rng.integers(0, hi + 1, (n_random, n_in))])


def schedule(n_samples: int, latency: int, seed: int = 0) -> tuple[list[int], list[int], list[int]]:
    """Per clock: ``rst``, ``in_valid`` and the sample index (-1: junk or a sample the reset drops)."""
    rng = np.random.default_rng(seed)
    rst: list[int] = [1, 1, 1]
    valid: list[int] = [0, 1, 1]  # clock 0 is not compared (before the first edge)
    pulse_done = False
    while True:
        kind = int(rng.integers(0, 3))
        n = int(rng.integers(4, 40))
        if kind == 0:
            seg = [1] * n  # back-to-back
        elif kind == 1:
            seg = [int(v) for v in rng.random(n) < 0.5]  # random idle clocks
        else:
            seg = [1, 0] * (n // 2)  # single idle clocks
        valid += seg
        rst += [0] * len(seg)
        if not pulse_done and sum(valid) > n_samples // 2:
            rst.append(1)  # one reset pulse while samples are in flight
            valid.append(1)
            pulse_done = True
        if _survivors(rst, valid, latency) >= n_samples and pulse_done:
            break
        if sum(valid) > 4 * n_samples + 200:  # pragma: no cover - a schedule always gets there
            raise AssertionError("schedule does not converge")
    index = [-1] * len(valid)
    k = 0
    for c, v in enumerate(valid):
        if not v:
            continue
        if _killed(rst, c, latency):
            continue
        if k == n_samples:
            valid[c] = 0
            continue
        index[c] = k
        k += 1
    tail = latency + 3
    return rst + [0] * tail, valid + [0] * tail, index + [-1] * tail


def _killed(rst: list[int], c: int, latency: int) -> bool:
    return any(rst[c : c + latency])


def _survivors(rst: list[int], valid: list[int], latency: int) -> int:
    return sum(1 for c, v in enumerate(valid) if v and not _killed(rst, c, latency))


def _hex_lines(words: list[int], bits: int, title: str) -> str:
    d = (bits + 3) // 4
    return f"// {title}\n" + "".join(f"{w:0{d}x}\n" for w in words)


def bench_files(network: Network, plan: Plan, design: Design, latency: int, codes: np.ndarray | None) -> dict[str, str]:
    """The bench sources and their stimulus/expected images (file name -> text)."""
    nin, ib = design.n_inputs, design.input_bits
    if codes is None:
        codes = default_vectors(nin, ib)
    flat, _ = as_codes(codes, ib, nin, what="testbench codes")
    if flat.shape[0] == 0:
        raise ValueError("testbench codes must hold at least one vector, not 0")
    em = emulate(network, plan, flat)
    out_codes, decisions = np.asarray(em.out_codes), np.asarray(em.decisions)
    bo, nout, db = design.layers[-1].out_bits, design.n_outputs, design.decision_bits
    dbits, cbits = nin * ib, nout * bo
    rst, valid, index = schedule(flat.shape[0], latency)
    rng = np.random.default_rng(1)
    stim, expect = [], []
    n_checked = 0
    for c in range(len(valid)):
        if index[c] >= 0 or valid[c]:
            row = flat[index[c]] if index[c] >= 0 else flat[int(rng.integers(0, flat.shape[0]))]
        else:
            row = rng.integers(0, 1 << ib, nin)  # junk on an idle clock
        data = sum(int(x) << (i * ib) for i, x in enumerate(row))
        stim.append((rst[c] << (dbits + 1)) | (valid[c] << dbits) | data)
        src = c - latency
        word = 0
        if src >= 0 and index[src] >= 0:
            k = index[src]
            packed = sum((int(v) % (1 << bo)) << (j * bo) for j, v in enumerate(out_codes[k].tolist()))
            word = (1 << (cbits + db)) | (packed << db) | int(decisions[k])
            n_checked += 1
        expect.append(word)
    assert n_checked == flat.shape[0]
    n = len(stim)
    sw, ew = dbits + 2, cbits + db + 1
    files = {
        STIMULUS_FILE: _hex_lines(stim, sw, f"fxnet datapath bench: {n} clocks of {{rst, in_valid, in_data}}"),
        EXPECT_FILE: _hex_lines(
            expect, ew, f"fxnet datapath bench: {n} clocks of {{out_valid, out_codes, out_decision}}"
        ),
        "fxnet_datapath_tb.v": _verilog(n, dbits, cbits, db),
        "fxnet_datapath_tb.vhd": _vhdl(n, dbits, cbits, db),
    }
    return files


def _verilog(n: int, dbits: int, cbits: int, db: int) -> str:
    sw, ew = dbits + 2, cbits + db + 1
    return f"""// fxnet datapath test bench (Verilog-2005), generated by fxnet-widgets; run with the directory as cwd
`timescale 1ns / 1ps
module fxnet_datapath_tb;
reg clk = 1'b0;
reg rst = 1'b1;
reg in_valid = 1'b0;
reg [{dbits - 1}:0] in_data = {dbits}'d0;
wire out_valid;
wire [{cbits - 1}:0] out_codes;
wire [{db - 1}:0] out_decision;
reg [{sw - 1}:0] stim [0:{n - 1}];
reg [{ew - 1}:0] golden [0:{n - 1}];
integer t, errors, compared;
fxnet_datapath dut (.clk(clk), .rst(rst), .in_valid(in_valid), .in_data(in_data),
                    .out_valid(out_valid), .out_codes(out_codes), .out_decision(out_decision));
initial begin
  $readmemh("{STIMULUS_FILE}", stim);
  $readmemh("{EXPECT_FILE}", golden);
  errors = 0;
  compared = 0;
  for (t = 0; t < {n}; t = t + 1) begin
    {{rst, in_valid, in_data}} = stim[t];  // clock t's inputs
    #1;
    if (t >= 1) begin
      if (out_valid !== golden[t][{ew - 1}]) begin
        errors = errors + 1;
        if (errors <= 5) $display("MISMATCH clock %0d: out_valid %b, expected %b", t, out_valid, golden[t][{ew - 1}]);
      end else if (out_valid) begin
        compared = compared + 1;
        if (out_codes !== golden[t][{ew - 2}:{db}] || out_decision !== golden[t][{db - 1}:0]) begin
          errors = errors + 1;
          if (errors <= 5) $display("MISMATCH clock %0d: codes %h decision %0d, expected %h %0d", t, out_codes,
                                    out_decision, golden[t][{ew - 2}:{db}], golden[t][{db - 1}:0]);
        end
      end
    end
    #4 clk = 1'b1;  // rising edge t
    #5 clk = 1'b0;
  end
  $display("fxnet datapath verilog bench: %0s %0d clocks, %0d outputs compared, %0d mismatches",
           (errors == 0) ? "PASS" : "FAIL", {n}, compared, errors);
`ifdef __ICARUS__
  if (errors != 0) $finish_and_return(1);  // Icarus extension: exit status
`endif
  $finish;
end
endmodule
"""


def _vhdl(n: int, dbits: int, cbits: int, db: int) -> str:
    sw, ew = dbits + 2, cbits + db + 1
    dsw, dew = 4 * ((sw + 3) // 4), 4 * ((ew + 3) // 4)
    return f"""-- fxnet datapath test bench (VHDL-2008), generated by fxnet-widgets; run with the directory as cwd
library ieee;
use ieee.std_logic_1164.all;
use std.textio.all;

entity fxnet_datapath_tb is
end entity fxnet_datapath_tb;

architecture sim of fxnet_datapath_tb is
  type words_t is array (0 to {n - 1}) of std_logic_vector({max(dsw, dew) - 1} downto 0);
  impure function read_words(name : string; digits : natural) return words_t is
    file f : text open read_mode is name;
    variable ln : line;
    variable w : std_logic_vector(4 * digits - 1 downto 0);
    variable r : words_t := (others => (others => '0'));
    variable k : natural := 0;
  begin
    while not endfile(f) and k < r'length loop
      readline(f, ln);
      if ln'length > 0 and ln(ln'left) /= '/' then
        hread(ln, w);
        r(k)(w'range) := w;
        k := k + 1;
      end if;
    end loop;
    return r;
  end function;
  constant STIM : words_t := read_words("{STIMULUS_FILE}", {dsw // 4});
  constant GOLDEN : words_t := read_words("{EXPECT_FILE}", {dew // 4});
  signal clk, rst, in_valid, out_valid : std_logic := '0';
  signal in_data : std_logic_vector({dbits - 1} downto 0) := (others => '0');
  signal out_codes : std_logic_vector({cbits - 1} downto 0);
  signal out_decision : std_logic_vector({db - 1} downto 0);
begin
  dut : entity work.fxnet_datapath
    port map (clk => clk, rst => rst, in_valid => in_valid, in_data => in_data,
              out_valid => out_valid, out_codes => out_codes, out_decision => out_decision);
  run : process
    variable errors, compared : natural := 0;
    variable msg : line;
  begin
    for t in 0 to {n - 1} loop
      rst <= STIM(t)({sw - 1});
      in_valid <= STIM(t)({sw - 2});
      in_data <= STIM(t)({dbits - 1} downto 0);
      wait for 1 ns;
      if t >= 1 then
        if out_valid /= GOLDEN(t)({ew - 1}) then
          errors := errors + 1;
          if errors <= 5 then
            report "MISMATCH clock " & integer'image(t) & ": out_valid" severity note;
          end if;
        elsif out_valid = '1' then
          compared := compared + 1;
          if out_codes /= GOLDEN(t)({ew - 2} downto {db}) or out_decision /= GOLDEN(t)({db - 1} downto 0) then
            errors := errors + 1;
            if errors <= 5 then
              report "MISMATCH clock " & integer'image(t) & ": out_codes or out_decision" severity note;
            end if;
          end if;
        end if;
      end if;
      wait for 4 ns;
      clk <= '1';  -- rising edge t
      wait for 5 ns;
      clk <= '0';
    end loop;
    if errors = 0 then
      write(msg, string'("fxnet datapath vhdl bench: PASS "));
    else
      write(msg, string'("fxnet datapath vhdl bench: FAIL "));
    end if;
    write(msg, integer'image({n}) & " clocks, " & integer'image(compared) & " outputs compared, "
          & integer'image(errors) & " mismatches");
    writeline(output, msg);
    if errors = 0 then std.env.stop(0); else std.env.stop(1); end if;
    wait;
  end process;
end architecture sim;
"""
