"""The datapath as a VHDL-2008 entity (IEEE 1076-2008), ``fxnet_datapath``, architecture ``rtl``.

The same levels, widths, registers and names as the Verilog module. Values are
``numeric_std`` ``signed``/``unsigned`` signals; every operand is resized to
the result's width first (``resize`` only where it widens; a slice where the
value is proven to fit fewer bits, since ``resize`` of a narrowing ``signed``
keeps the sign bit). Tables are constant arrays read at elaboration from the
same ``$readmemh`` images as the Verilog ROMs (``std.textio``, ``hread``).
"""

from __future__ import annotations

from ..formats import bits_for_range
from ._graph import Sig, round_bits, wrap_to
from ._resolve import Resolved

__all__ = ["vhdl_entity"]


def _lit(v: int, w: int, signed: bool) -> str:
    if -(1 << 31) < v < (1 << 31):
        return f"to_signed({v}, {w})" if signed else f"to_unsigned({v}, {w})"
    bits = format(v % (1 << w), f"0{w}b")
    return f'{"signed" if signed else "unsigned"}\'("{bits}")'


class _Writer:
    def __init__(self, r: Resolved) -> None:
        self.r = r

    def name(self, s: Sig) -> str:
        t = self.r.target(s)
        if self.r.is_const(t):
            return _lit(t.args[0], t.width, t.signed)
        return t.name

    def fit(self, s: Sig, w: int, signed: bool | None = None) -> str:
        """``s`` as ``w`` bits of type signed (``signed``) or unsigned; by default its own type."""
        t = self.r.target(s)
        if t.op == "const":
            sig = s.signed if signed is None else signed
            return _lit(wrap_to(t.args[0], w) if sig else t.args[0] % (1 << w), w, sig)
        n, sw = self.name(s), s.width
        if w == sw:
            core = n
        elif w < sw:
            core = f"{n}({w - 1} downto 0)"
        else:
            core = f"resize({n}, {w})"  # extends by the source's type
        if signed is None or signed == s.signed:
            return core
        return f"{'signed' if signed else 'unsigned'}({core})"

    def bit(self, s: Sig, i: int) -> str:
        return f"{self.name(s)}({min(i, s.width - 1)})"

    def bits_or(self, s: Sig, msb: int) -> str:
        msb = min(msb, s.width - 1)
        return self.bit(s, 0) if msb == 0 else f"(or {self.name(s)}({msb} downto 0))"

    def expr(self, s: Sig, ib: int) -> str:  # noqa: C901 - one case per operation
        op, a, n = s.op, s.args, s.width
        if op == "port":
            return f"unsigned(in_data({a[0] * ib + ib - 1} downto {a[0] * ib}))"
        if op == "pass":
            return self.name(a[0])
        if op == "const":
            return _lit(a[0], n, s.signed)
        if op == "mul":
            src, w = a
            ws = src.width + (0 if src.signed else 1)
            # the product of a ws-bit and a wb-bit value has ws+wb bits; its value fits n of them
            return f"resize({self.fit(src, ws, True)} * {_lit(w, bits_for_range(w, w), True)}, {n})"
        if op == "add":
            return f"{self.fit(a[0], n, True)} + {self.fit(a[1], n, True)}"
        if op == "wrap":
            return f"{self.name(a[0])}({a[1] - 1} downto 0)"
        if op == "sat":
            src, A = a
            hi, lo = (1 << (A - 1)) - 1, -(1 << (A - 1))
            out = self.fit(src, n)
            if src.lo < lo:
                out = f"{_lit(lo, n, True)} when {self.name(src)} < {_lit(lo, src.width, True)} else {out}"
            if src.hi > hi:
                out = f"{_lit(hi, n, True)} when {self.name(src)} > {_lit(hi, src.width, True)} else {out}"
            return out
        if op == "round":
            return self.round(s)
        if op == "clamp":
            return self.clamp(s)
        if op == "rom":
            kind = "signed" if s.signed else "unsigned"
            return f"{kind}(L{a[1]}_TABLE(to_integer({self.name(a[0])})))"
        if op == "ge":
            src, t = a
            cw = max(src.width + (0 if src.signed else 1), bits_for_range(t, t))
            return f'"1" when {self.fit(src, cw, True)} >= {_lit(t, cw, True)} else "0"'
        if op == "maxcode":
            return f"{self.name(a[1])} when {self.name(a[1])} > {self.name(a[0])} else {self.name(a[0])}"
        if op == "maxidx":
            return f"{self.name(a[3])} when {self.name(a[2])} > {self.name(a[0])} else {self.name(a[1])}"
        raise AssertionError(op)

    def round(self, s: Sig) -> str:
        src, k, mode = s.args
        n, w, nm = s.width, src.width, self.name(src)
        ke, q_msb, q_lsb = round_bits(w, k, n)
        q = f"{nm}({q_msb} downto {q_lsb})"
        if q_msb - q_lsb + 1 < n:
            q = f"resize({q}, {n})"  # a slice of a signed value is signed: resize sign-extends
        if mode == "floor":
            return q
        h, sign = self.bit(src, ke - 1), self.bit(src, w - 1)
        rest = self.bits_or(src, ke - 2) if ke >= 2 else None
        if mode == "half-up":
            up = h
        elif mode == "half-even":
            up = f"{h} and ({rest} or {self.bit(src, ke)})" if rest else f"{h} and {self.bit(src, ke)}"
        elif mode == "half-away":
            up = f"{h} and ({rest} or not {sign})" if rest else f"{h} and not {sign}"
        else:  # trunc: a negative value with a remainder goes up
            up = f"{sign} and {self.bits_or(src, ke - 1)}"
        return f"{q} + signed(resize(unsigned'(0 => ({up})), {n}))"

    def clamp(self, s: Sig) -> str:
        src, m, ilo, ihi, offset = s.args
        n = s.width
        c_lo, c_hi = -((-ilo) >> m), ihi >> m
        if m >= n:
            v = _lit(-offset, n, s.signed)
        else:
            v = self.fit(src, n, s.signed)
            if m:
                v = f"shift_left({v}, {m})"
            if offset:
                v = f"{v} xor {_lit(1 << (n - 1), n, False)}"  # + 2^(n-1): offset binary (sign bit inverted)
        out = v
        if src.hi > c_hi:
            out = f"{_lit(ihi - offset, n, s.signed)} when {self.name(src)} > {_lit(c_hi, src.width, True)} else {out}"
        if src.lo < c_lo:
            out = f"{_lit(ilo - offset, n, s.signed)} when {self.name(src)} < {_lit(c_lo, src.width, True)} else {out}"
        return out


def _table_reader(layer: int, words: int, bits: int, file: str) -> list[str]:
    d = 4 * ((bits + 3) // 4)
    t = f"l{layer}_table_t"
    return [
        f"  type {t} is array (0 to {words - 1}) of std_logic_vector({bits - 1} downto 0);",
        f"  -- layer {layer}'s table from its $readmemh image: a '//' line, then one hex word per line",
        f"  impure function l{layer}_table_read(name : string) return {t} is",
        "    file f : text open read_mode is name;",
        "    variable ln : line;",
        f"    variable word : std_logic_vector({d - 1} downto 0);",
        f"    variable t : {t} := (others => (others => '0'));",
        "    variable k : natural := 0;",
        "  begin",
        "    while not endfile(f) and k < t'length loop",
        "      readline(f, ln);",
        "      if ln'length > 0 and ln(ln'left) /= '/' then",
        "        hread(ln, word);",
        f"        t(k) := word({bits - 1} downto 0);",
        "        k := k + 1;",
        "      end if;",
        "    end loop;",
        "    return t;",
        "  end function;",
        f'  constant L{layer}_TABLE : {t} := l{layer}_table_read("{file}");',
    ]


def vhdl_entity(r: Resolved, header: list[str], table_files: dict[int, str], table_words: dict[int, int]) -> str:
    """The source of ``fxnet_datapath.vhd``."""
    d, levels, cuts = r.design, r.levels, r.cuts
    W = _Writer(r)
    ib, nin = d.input_bits, d.n_inputs
    bo = d.layers[-1].out_bits
    lat = len(cuts)
    out = ["-- " + h if h else "--" for h in header]
    out += [
        "library ieee;",
        "use ieee.std_logic_1164.all;",
        "use ieee.numeric_std.all;",
        "use std.textio.all;",
        "",
        "entity fxnet_datapath is",
        "  port (",
        "    clk          : in  std_logic;  -- rising edge",
        "    rst          : in  std_logic;  -- synchronous, active high: clears the valid pipeline",
        "    in_valid     : in  std_logic;  -- a sample is on in_data this clock",
        f"    in_data      : in  std_logic_vector({nin * ib - 1} downto 0);  -- input i (unsigned) at i*{ib}",
        f"    out_valid    : out std_logic;  -- high exactly {lat} clocks after each accepted sample",
        f"    out_codes    : out std_logic_vector({d.n_outputs * bo - 1} downto 0);  -- output j at j*{bo}",
        f"    out_decision : out std_logic_vector({d.decision_bits - 1} downto 0)",
        "  );",
        "end entity fxnet_datapath;",
        "",
        "architecture rtl of fxnet_datapath is",
    ]
    for n in sorted(table_files):
        out += _table_reader(n, table_words[n], d.layers[n - 1].out_bits, table_files[n])
    body: list[str] = []
    stage = 0
    for li, lev in enumerate(levels):
        live = [s for s in lev.sigs if r.declared(s)]
        if not live:
            continue
        reg = li in cuts
        if reg:
            stage += 1
        out.append(f"  -- {lev.title} ({f'register stage {stage}' if reg else 'combinational'})")
        for s in live:
            kind = "constant" if s.op == "const" else "signal"
            init = f" := {W.expr(s, ib)}" if s.op == "const" else ""
            out.append(f"  {kind} {s.name} : {'signed' if s.signed else 'unsigned'}({s.width - 1} downto 0){init};")
        live = [s for s in live if s.op != "const"]
        if not live:
            continue
        body.append(f"  -- {lev.title}")
        if reg:
            body += [f"  stage{stage} : process (clk)", "  begin", "    if rising_edge(clk) then"]
            body += [f"      {s.name} <= {W.expr(s, ib)};" for s in live]
            body += ["    end if;", "  end process;"]
        else:
            body += [f"  {s.name} <= {W.expr(s, ib)};" for s in live]
    if lat:
        out.append(f"  signal valid_pipe : std_logic_vector({lat - 1} downto 0);")
    out.append("begin")
    out += body
    out.append("  -- valid pipeline (the only reset)")
    if lat == 0:
        out.append("  out_valid <= in_valid;")
    else:
        nxt = f"valid_pipe({lat - 2} downto 0) & in_valid" if lat > 1 else "(0 => in_valid)"
        out += [
            "  valid : process (clk)",
            "  begin",
            "    if rising_edge(clk) then",
            "      if rst = '1' then",
            "        valid_pipe <= (others => '0');",
            "      else",
            f"        valid_pipe <= {nxt};",
            "      end if;",
            "    end if;",
            "  end process;",
            f"  out_valid <= valid_pipe({lat - 1});",
        ]
    codes = " & ".join(f"std_logic_vector({W.name(c)})" for c in reversed(r.codes))
    out += [f"  out_codes <= {codes};", f"  out_decision <= std_logic_vector({W.name(r.decision)});"]
    out += ["end architecture rtl;", ""]
    return "\n".join(out)
