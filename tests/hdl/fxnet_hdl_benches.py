"""Test benches (Verilog-2005 and VHDL-2008) that recompute an exported network.

The benches are written per export from its ``manifest.json`` (the number of
layers and which of them have a table), but every number they use comes from
the exported files: the widths, shifts, modes, weights and biases from the
Verilog include / VHDL package, the tables from the ``$readmemh`` images
(Verilog) or the package's constant arrays (VHDL), the inputs and the expected
results from the golden-vector images. Each bench computes every neuron per
``semantics.md`` (exact sum, wrap/saturate to the accumulator width, shift
with the index rounding, clamp, table look-up, decision), compares every
accumulator, code and decision with the golden vectors, prints one line::

    fxnet <language> bench: PASS|FAIL <n> vectors, <a> accumulators, <c> codes, <d> decisions compared, <m> mismatches

and exits non-zero when anything differs.

Pitfalls handled (and each tested on purpose in ``test_hdl_pitfalls.py``):

* Verilog: one unsigned operand makes the whole expression unsigned, so
  unsigned words are widened with ``$signed({1'b0, x})``; part-selects are
  unsigned, so signed words are read with ``$signed(P[e*W +: W])``;
* VHDL: ``numeric_std.resize`` of a signed value keeps the sign bit when it
  narrows, so the accumulator wraps by slicing ``s(A-1 downto 0)``.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

from fxtools import missing

RESULT = re.compile(
    r"fxnet (verilog|vhdl) bench: (PASS|FAIL) (\d+) vectors, (\d+) accumulators, (\d+) codes, "
    r"(\d+) decisions compared, (\d+) mismatches"
)


def need_tool(name: str) -> str:
    """Path of ``name``; skip (or fail with ``FXNET_REQUIRE_TOOLS=1``) when missing."""
    path = shutil.which(name)
    if path is None:
        missing(f"{name} is not installed (Debian package {'iverilog' if name in ('iverilog', 'vvp') else 'ghdl'})")
    return path


def _layers(export_dir: Path) -> list[dict]:
    return json.loads((export_dir / "manifest.json").read_text())["layers"]


# ---------------------------------------------------------------------------------
# Verilog-2005
def verilog_bench(export_dir: Path) -> str:
    """Source of module ``fxnet_tb`` for the export in ``export_dir`` (run from that directory)."""
    layers = _layers(export_dir)
    nl = len(layers)
    decl, init, body = [], [], []
    decl.append("reg [FXNET_INPUT_BITS-1:0] vin [0:FXNET_N_VECTORS*FXNET_N_INPUTS-1];")
    decl.append("reg [FXNET_DECISION_BITS-1:0] gdec [0:FXNET_N_VECTORS-1];")
    decl.append("reg signed [63:0] u1 [0:FXNET_N_INPUTS-1];")
    init.append("$readmemh(FXNET_VECTORS_INPUTS_FILE, vin);")
    init.append("$readmemh(FXNET_VECTORS_DECISIONS_FILE, gdec);")
    for ld in layers:
        n = ld["layer"]
        P = f"FXNET_L{n}"
        decl += [
            f"reg [{P}_ACC_BITS-1:0] gacc{n} [0:FXNET_N_VECTORS*{P}_N_OUT-1];",
            f"reg [{P}_OUT_BITS-1:0] gcode{n} [0:FXNET_N_VECTORS*{P}_N_OUT-1];",
            f"reg signed [63:0] u{n + 1} [0:{P}_N_OUT-1];",
            f"localparam signed [63:0] AMAX{n} = (64'sd1 <<< ({P}_ACC_BITS-1)) - 64'sd1;",
            f"localparam signed [63:0] AMIN{n} = -(64'sd1 <<< ({P}_ACC_BITS-1));",
            f"localparam signed [63:0] IMIN{n} = {P}_INDEX_MIN;",
            f"localparam signed [63:0] IMAX{n} = {P}_INDEX_MAX;",
            # |s_A| <= 2^61, so a right shift by 62 gives what any larger shift gives
            f"localparam integer K{n} = ({P}_SHIFT > 62) ? 62 : {P}_SHIFT;",
        ]
        init += [f"$readmemh({P}_VECTORS_ACC_FILE, gacc{n});", f"$readmemh({P}_VECTORS_CODES_FILE, gcode{n});"]
        if ld["table"] is not None:
            decl.append(f"reg [{P}_OUT_BITS-1:0] tab{n} [0:(1<<{P}_TABLE_BITS)-1];")
            decl.append(f"reg [{P}_OUT_BITS-1:0] word{n};")
            init.append(f"$readmemh({P}_TABLE_FILE, tab{n});")
        lookup = (
            f"""          word{n} = tab{n}[a - IMIN{n}];
          if ({P}_OUT_SIGNED != 0) code = $signed(word{n});
          else code = $signed({{1'b0, word{n}}});"""
            if ld["table"] is not None
            else "          code = a;"
        )
        body.append(
            f"""      // layer {n} ({ld["activation"]})
      for (j = 0; j < {P}_N_OUT; j = j + 1) begin
          s = $signed({P}_BIASES[j*{P}_ACC_BITS +: {P}_ACC_BITS]);
          for (i = 0; i < {P}_N_IN; i = i + 1)
              s = s + $signed({P}_WEIGHTS[(j*{P}_N_IN + i)*{P}_WEIGHT_BITS +: {P}_WEIGHT_BITS]) * u{n}[i];
          if ({P}_ACC_SATURATE != 0) begin
              if (s > AMAX{n}) sa = AMAX{n};
              else if (s < AMIN{n}) sa = AMIN{n};
              else sa = s;
          end else
              sa = $signed(s[{P}_ACC_BITS-1:0]);
          if (K{n} > 0) begin
              half = 64'sd1 <<< (K{n} - 1);
              case ({P}_INDEX_ROUND)
                  FXNET_ROUND_FLOOR: a = sa >>> K{n};
                  FXNET_ROUND_TRUNC: a = (sa < 0) ? -((-sa) >>> K{n}) : (sa >>> K{n});
                  FXNET_ROUND_HALF_UP: a = (sa + half) >>> K{n};
                  FXNET_ROUND_HALF_AWAY: begin
                      mag = ((sa < 0) ? -sa : sa) + half;
                      mag = mag >>> K{n};
                      a = (sa < 0) ? -mag : mag;
                  end
                  default: begin
                      q = sa >>> K{n};
                      r = sa - (q <<< K{n});
                      a = ((r > half) || (r == half && q[0])) ? q + 64'sd1 : q;
                  end
              endcase
          end else if (K{n} == 0)
              a = sa;
          else begin
              // left shift: decide the clamp before shifting, so nothing overflows
              if (sa > (IMAX{n} >>> (-K{n}))) a = IMAX{n};
              else if (sa < -((-IMIN{n}) >>> (-K{n}))) a = IMIN{n};
              else a = sa <<< (-K{n});
          end
          if (a < IMIN{n}) a = IMIN{n};
          else if (a > IMAX{n}) a = IMAX{n};
{lookup}
          u{n + 1}[j] = code;
          nacc = nacc + 1;
          if (sa[{P}_ACC_BITS-1:0] !== gacc{n}[t*{P}_N_OUT + j]) begin
              errors = errors + 1;
              if (errors <= 5)
                  $display("MISMATCH vector %0d layer {n} neuron %0d: accumulator %0d, golden word %h",
                           t, j, sa, gacc{n}[t*{P}_N_OUT + j]);
          end
          ncode = ncode + 1;
          if (code[{P}_OUT_BITS-1:0] !== gcode{n}[t*{P}_N_OUT + j]) begin
              errors = errors + 1;
              if (errors <= 5)
                  $display("MISMATCH vector %0d layer {n} neuron %0d: code %0d, golden word %h",
                           t, j, code, gcode{n}[t*{P}_N_OUT + j]);
          end
      end"""
        )
    last = f"FXNET_L{nl}"
    decision = f"""      if (FXNET_N_OUTPUTS == 1)
          dec = (u{nl + 1}[0] >= FXNET_THRESHOLD_CODE) ? 1 : 0;
      else begin
          dec = 0;
          best = u{nl + 1}[0];
          for (j = 1; j < {last}_N_OUT; j = j + 1)
              if (u{nl + 1}[j] > best) begin best = u{nl + 1}[j]; dec = j; end
      end
      ndec = ndec + 1;
      if (dec[FXNET_DECISION_BITS-1:0] !== gdec[t]) begin
          errors = errors + 1;
          if (errors <= 5) $display("MISMATCH vector %0d: decision %0d, golden %0d", t, dec, gdec[t]);
      end"""
    nl_ = "\n"
    return f"""// generated test bench (tests/hdl/fxnet_hdl_benches.py); Verilog-2005, run from the export directory
`timescale 1ns/1ns
module fxnet_tb;
`include "fxnet_design.vh"
{nl_.join(decl)}
reg signed [63:0] s, sa, a, q, r, half, mag, code, best;
integer t, i, j, dec, errors, nacc, ncode, ndec;
initial begin
{nl_.join("  " + x for x in init)}
  errors = 0; nacc = 0; ncode = 0; ndec = 0;
  for (t = 0; t < FXNET_N_VECTORS; t = t + 1) begin
      for (i = 0; i < FXNET_N_INPUTS; i = i + 1)
          u1[i] = $signed({{1'b0, vin[t*FXNET_N_INPUTS + i]}});  // unsigned input: widen with a 0 sign bit
{nl_.join(body)}
{decision}
  end
  $display("fxnet verilog bench: %0s %0d vectors, %0d accumulators, %0d codes, %0d decisions compared, %0d mismatches",
           (errors == 0) ? "PASS" : "FAIL", FXNET_N_VECTORS, nacc, ncode, ndec, errors);
  if (errors != 0) $finish_and_return(1);  // Icarus extension: exit status
  $finish;
end
endmodule
"""


def run_verilog(export_dir: Path, build: Path) -> tuple[int, str]:
    """Compile and run the Verilog bench; ``(exit status, output)``."""
    iverilog, vvp = need_tool("iverilog"), need_tool("vvp")
    build.mkdir(parents=True, exist_ok=True)
    src = build / "fxnet_tb.v"
    src.write_text(verilog_bench(export_dir))
    out = build / "fxnet_tb.vvp"
    c = subprocess.run(
        [iverilog, "-g2005", "-Wall", "-I", str(export_dir), "-o", str(out), str(src)],
        capture_output=True, text=True, timeout=300,
    )  # fmt: skip
    if c.returncode:
        return c.returncode, "iverilog: " + c.stdout + c.stderr
    r = subprocess.run([vvp, "-n", str(out)], capture_output=True, text=True, cwd=export_dir, timeout=600)
    return r.returncode, r.stdout + r.stderr


# ---------------------------------------------------------------------------------
# VHDL-2008
def vhdl_bench(export_dir: Path) -> str:
    """Source of entity ``fxnet_tb`` for the export in ``export_dir`` (run from that directory)."""
    layers = _layers(export_dir)
    nl = len(layers)
    decl, init, body = [], [], []
    decl.append("variable vin : word_array(0 to FXNET_N_VECTORS*FXNET_N_INPUTS-1);")
    decl.append("variable gdec : word_array(0 to FXNET_N_VECTORS-1);")
    decl.append("variable u1 : s64_array(0 to FXNET_N_INPUTS-1);")
    init.append("read_memh(FXNET_VECTORS_INPUTS_FILE, vin);")
    init.append("read_memh(FXNET_VECTORS_DECISIONS_FILE, gdec);")
    for ld in layers:
        n = ld["layer"]
        P = f"FXNET_L{n}"
        decl += [
            f"variable gacc{n}, gcode{n} : word_array(0 to FXNET_N_VECTORS*{P}_N_OUT-1);",
            f"variable u{n + 1} : s64_array(0 to {P}_N_OUT-1);",
            f"variable p{n} : signed({P}_WEIGHT_BITS+63 downto 0);",
            f"constant AMAX{n} : signed(63 downto 0) := shift_left(to_signed(1, 64), {P}_ACC_BITS-1) - 1;",
            f"constant AMIN{n} : signed(63 downto 0) := -shift_left(to_signed(1, 64), {P}_ACC_BITS-1);",
            f"constant IMIN{n} : signed(63 downto 0) := to_signed({P}_INDEX_MIN, 64);",
            f"constant IMAX{n} : signed(63 downto 0) := to_signed({P}_INDEX_MAX, 64);",
            f"constant K{n} : integer := minimum({P}_SHIFT, 62);",
        ]
        init += [f"read_memh({P}_VECTORS_ACC_FILE, gacc{n});", f"read_memh({P}_VECTORS_CODES_FILE, gcode{n});"]
        if ld["table"] is not None:
            # the package's table must equal the $readmemh image, word for word
            decl.append(f"variable timg{n} : word_array(0 to 2**{P}_TABLE_BITS-1);")
            init += [
                f"read_memh({P}_TABLE_FILE, timg{n});",
                f"for e in {P}_TABLE'range loop",
                "  ntab := ntab + 1;",
                f"  if std_logic_vector({P}_TABLE(e)) /= timg{n}(e)({P}_OUT_BITS-1 downto 0) then",
                f'    mismatch("layer {n} table word " & integer\'image(e) & ": package and image differ");',
                "  end if;",
                "end loop;",
            ]
        lookup = (
            f"        code := signed(resize({P}_TABLE(to_integer(a - IMIN{n})), 64));"
            if ld["table"] is not None
            else "        code := a;"
        )
        body.append(
            f"""      -- layer {n} ({ld["activation"]})
      for j in 0 to {P}_N_OUT-1 loop
        s := resize({P}_BIASES(j), 64);
        for i in 0 to {P}_N_IN-1 loop
          p{n} := {P}_WEIGHTS(j*{P}_N_IN + i) * u{n}(i);
          s := s + p{n}(63 downto 0);  -- the product fits 64 bits; slicing keeps its value
        end loop;
        if {P}_ACC_SATURATE then
          if s > AMAX{n} then sa := AMAX{n};
          elsif s < AMIN{n} then sa := AMIN{n};
          else sa := s;
          end if;
        else
          sa := resize(s({P}_ACC_BITS-1 downto 0), 64);  -- wrap: slice, then sign-extend
        end if;
        if K{n} > 0 then
          half := shift_left(to_signed(1, 64), K{n} - 1);
          case {P}_INDEX_ROUND is
            when FXNET_ROUND_FLOOR => a := shift_right(sa, K{n});
            when FXNET_ROUND_TRUNC =>
              if sa < 0 then a := -shift_right(-sa, K{n}); else a := shift_right(sa, K{n}); end if;
            when FXNET_ROUND_HALF_UP => a := shift_right(sa + half, K{n});
            when FXNET_ROUND_HALF_AWAY =>
              mag := shift_right(abs(sa) + half, K{n});
              if sa < 0 then a := -mag; else a := mag; end if;
            when others =>
              q := shift_right(sa, K{n});
              r := sa - shift_left(q, K{n});
              if r > half or (r = half and q(0) = '1') then a := q + 1; else a := q; end if;
          end case;
        elsif K{n} = 0 then
          a := sa;
        else
          if sa > shift_right(IMAX{n}, -K{n}) then a := IMAX{n};
          elsif sa < -shift_right(-IMIN{n}, -K{n}) then a := IMIN{n};
          else a := shift_left(sa, -K{n});
          end if;
        end if;
        if a < IMIN{n} then a := IMIN{n}; elsif a > IMAX{n} then a := IMAX{n}; end if;
{lookup}
        u{n + 1}(j) := code;
        nacc := nacc + 1;
        if std_logic_vector(sa({P}_ACC_BITS-1 downto 0)) /= gacc{n}(t*{P}_N_OUT + j)({P}_ACC_BITS-1 downto 0) then
          mismatch("vector " & integer'image(t) & " layer {n} neuron " & integer'image(j) & ": accumulator");
        end if;
        ncode := ncode + 1;
        if std_logic_vector(code({P}_OUT_BITS-1 downto 0)) /= gcode{n}(t*{P}_N_OUT + j)({P}_OUT_BITS-1 downto 0) then
          mismatch("vector " & integer'image(t) & " layer {n} neuron " & integer'image(j) & ": code");
        end if;
      end loop;"""
        )
    last = f"FXNET_L{nl}"
    if layers[-1]["n_out"] == 1:
        decision = (
            f"""      if u{nl + 1}(0) >= to_signed(FXNET_THRESHOLD_CODE, 64) then dec := 1; else dec := 0; end if;"""
        )
    else:
        decision = f"""      dec := 0;
      best := u{nl + 1}(0);
      for j in 1 to {last}_N_OUT-1 loop
        if u{nl + 1}(j) > best then best := u{nl + 1}(j); dec := j; end if;
      end loop;"""
    nl_ = "\n"
    return f"""-- generated test bench (tests/hdl/fxnet_hdl_benches.py); VHDL-2008, run from the export directory
library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;
use std.textio.all;
use work.fxnet_design_pkg.all;

entity fxnet_tb is
end entity fxnet_tb;

architecture sim of fxnet_tb is
  type s64_array is array (natural range <>) of signed(63 downto 0);
  type word_array is array (natural range <>) of std_logic_vector(63 downto 0);

  -- read a $readmemh image: '//' comment lines, one hex word per line, address order
  procedure read_memh(constant name : in string; variable words : out word_array) is
    file f : text open read_mode is name;
    variable ln : line;
    variable v : unsigned(63 downto 0);
    variable k : natural := 0;
    variable d : integer;
    variable seen : boolean;
  begin
    while not endfile(f) loop
      readline(f, ln);
      seen := false;
      v := (others => '0');
      if ln'length >= 2 and ln(ln'left) = '/' then
        next;
      end if;
      for c in ln'range loop
        d := -1;
        case ln(c) is
          when '0' to '9' => d := character'pos(ln(c)) - character'pos('0');
          when 'a' to 'f' => d := character'pos(ln(c)) - character'pos('a') + 10;
          when 'A' to 'F' => d := character'pos(ln(c)) - character'pos('A') + 10;
          when others => null;
        end case;
        if d >= 0 then
          v := shift_left(v, 4) + to_unsigned(d, 64);
          seen := true;
        end if;
      end loop;
      if seen then
        assert k <= words'high report name & ": more words than expected" severity failure;
        words(k) := std_logic_vector(v);
        k := k + 1;
      end if;
    end loop;
    assert k = words'length report name & ": fewer words than expected" severity failure;
  end procedure;
begin
  process
{nl_.join("    " + x for x in decl)}
    variable s, sa, a, q, r, half, mag, code, best : signed(63 downto 0);
    variable dec : integer;
    variable errors, nacc, ncode, ndec, ntab : natural := 0;
    variable msg : line;
    procedure mismatch(constant what : in string) is
    begin
      errors := errors + 1;
      if errors <= 5 then
        report "MISMATCH " & what severity note;
      end if;
    end procedure;
  begin
{nl_.join("    " + x for x in init)}
    for t in 0 to FXNET_N_VECTORS-1 loop
      for i in 0 to FXNET_N_INPUTS-1 loop
        u1(i) := signed(vin(t*FXNET_N_INPUTS + i));  -- zero-extended unsigned input
      end loop;
{nl_.join(body)}
{decision}
      ndec := ndec + 1;
      if to_integer(unsigned(gdec(t)(FXNET_DECISION_BITS-1 downto 0))) /= dec then
        mismatch("vector " & integer'image(t) & ": decision");
      end if;
    end loop;
    if errors = 0 then
      write(msg, string'("fxnet vhdl bench: PASS "));
    else
      write(msg, string'("fxnet vhdl bench: FAIL "));
    end if;
    write(msg, integer'image(FXNET_N_VECTORS) & " vectors, " & integer'image(nacc) & " accumulators, "
          & integer'image(ncode) & " codes, " & integer'image(ndec) & " decisions compared, "
          & integer'image(errors) & " mismatches");
    writeline(output, msg);
    write(msg, "fxnet vhdl bench: " & integer'image(ntab) & " table words of the package compared with the images");
    writeline(output, msg);
    if errors = 0 then std.env.stop(0); else std.env.stop(1); end if;
    wait;
  end process;
end architecture sim;
"""


def run_vhdl(export_dir: Path, build: Path) -> tuple[int, str]:
    """Analyse, elaborate and run the VHDL bench; ``(exit status, output)``."""
    ghdl = need_tool("ghdl")
    build.mkdir(parents=True, exist_ok=True)
    src = build / "fxnet_tb.vhd"
    src.write_text(vhdl_bench(export_dir))
    opts = ["--std=08", f"--workdir={build}"]
    a = subprocess.run(
        [ghdl, "-a", *opts, str(export_dir / "fxnet_design_pkg.vhd"), str(src)],
        capture_output=True, text=True, timeout=300,
    )  # fmt: skip
    if a.returncode:
        return a.returncode, "ghdl -a: " + a.stdout + a.stderr
    r = subprocess.run(
        [ghdl, "--elab-run", *opts, "fxnet_tb"], capture_output=True, text=True, cwd=export_dir, timeout=600
    )
    return r.returncode, r.stdout + r.stderr


def parse_result(output: str) -> dict[str, int | str] | None:
    """The bench's result line as a dict, or None when there is none."""
    m = RESULT.search(output)
    if not m:
        return None
    keys = ("language", "verdict", "vectors", "accumulators", "codes", "decisions", "mismatches")
    return {k: (v if i < 2 else int(v)) for i, (k, v) in enumerate(zip(keys, m.groups()))}
