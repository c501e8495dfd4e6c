"""The datapath as a Verilog-2005 module (IEEE 1364-2005), top ``fxnet_datapath``.

Every signal is declared with the width its value interval needs, every
expression has operands of exactly the result's width (sign- or
zero-extended, or their low bits when the value is proven to fit), so the
module is clean under ``verilator --lint-only -Wall``. Pipeline registers have
no reset (their value outside ``out_valid`` is unspecified); only the valid
pipeline is reset. Tables are ROMs read from ``$readmemh`` images by bare file
name, with a registered read where a register bank follows the table.
"""

from __future__ import annotations

from ..formats import bits_for_range
from ._graph import Sig, round_bits, wrap_to
from ._resolve import Resolved

__all__ = ["verilog_module", "vlit"]


def vlit(v: int, w: int) -> str:
    """A signed ``w``-bit literal of ``v`` (``-(w'sd...)`` form; the most negative value as hex)."""
    if v >= 0:
        return f"{w}'sd{v}"
    if v == -(1 << (w - 1)):
        return f"{w}'sh{(1 << (w - 1)):x}"
    return f"-{w}'sd{-v}"


def _ulit(v: int, w: int) -> str:
    return f"{w}'d{v % (1 << w)}"


class _Writer:
    def __init__(self, r: Resolved) -> None:
        self.r = r

    def name(self, s: Sig) -> str:
        t = self.r.target(s)
        if self.r.is_const(t):
            v = t.args[0]
            return vlit(v, t.width) if t.signed else _ulit(v, t.width)
        return t.name

    def fit(self, s: Sig, w: int) -> str:
        """The value of ``s`` as ``w`` bits (extended by its signedness, or its low bits)."""
        t = self.r.target(s)
        if t.op == "const":
            return vlit(wrap_to(t.args[0], w), w) if t.signed else _ulit(t.args[0], w)
        n, sw = self.name(s), s.width
        if w == sw:
            return n
        if w < sw:
            return f"{n}[{w - 1}:0]"
        fill = f"{n}[{sw - 1}]" if s.signed else "1'b0"
        return f"{{{{{w - sw}{{{fill}}}}}, {n}}}"

    def sfit(self, s: Sig, w: int) -> str:
        return f"$signed({self.fit(s, w)})"

    def cmp(self, s: Sig) -> str:
        n = self.name(s)
        return f"$signed({n})" if s.signed else n

    def bit(self, s: Sig, i: int) -> str:
        return f"{self.name(s)}[{min(i, s.width - 1)}]"

    def bits_or(self, s: Sig, msb: int) -> str:
        msb = min(msb, s.width - 1)
        return f"{self.name(s)}[0]" if msb == 0 else f"(|{self.name(s)}[{msb}:0])"

    def expr(self, s: Sig, ib: int) -> str:  # noqa: C901 - one case per operation
        op, a, n = s.op, s.args, s.width
        if op == "port":
            return f"in_data[{a[0] * ib + ib - 1}:{a[0] * ib}]"
        if op == "pass":
            return self.name(a[0])
        if op == "const":
            return vlit(a[0], n) if s.signed else _ulit(a[0], n)
        if op == "mul":
            return f"{self.sfit(a[0], n)} * {vlit(wrap_to(a[1], n), n)}"  # modulo 2^n: the product fits
        if op == "add":
            return f"{self.sfit(a[0], n)} + {self.sfit(a[1], n)}"
        if op == "wrap":
            return f"{self.name(a[0])}[{a[1] - 1}:0]"
        if op == "sat":
            src, A = a
            hi, lo = (1 << (A - 1)) - 1, -(1 << (A - 1))
            out = self.fit(src, n)
            if src.lo < lo:
                out = f"({self.cmp(src)} < {vlit(lo, src.width)}) ? {vlit(lo, n)} : {out}"
            if src.hi > hi:
                out = f"({self.cmp(src)} > {vlit(hi, src.width)}) ? {vlit(hi, n)} : {out}"
            return out
        if op == "round":
            return self.round(s)
        if op == "clamp":
            return self.clamp(s)
        if op == "rom":
            return f"{s.name}_table[{self.name(a[0])}]"
        if op == "ge":
            src, t = a
            cw = max(src.width + (0 if src.signed else 1), bits_for_range(t, t))
            return f"{self.sfit(src, cw)} >= {vlit(t, cw)}"
        if op == "maxcode":
            return f"({self.cmp(a[1])} > {self.cmp(a[0])}) ? {self.name(a[1])} : {self.name(a[0])}"
        if op == "maxidx":
            return f"({self.cmp(a[2])} > {self.cmp(a[0])}) ? {self.name(a[3])} : {self.name(a[1])}"
        raise AssertionError(op)

    def round(self, s: Sig) -> str:
        src, k, mode = s.args
        n, w, nm = s.width, src.width, self.name(src)
        ke, q_msb, q_lsb = round_bits(w, k, n)
        c = q_msb - q_lsb + 1
        q = f"{nm}[{q_msb}:{q_lsb}]"
        if c < n:
            q = f"{{{{{n - c}{{{nm}[{w - 1}]}}}}, {q}}}"
        if mode == "floor":
            return q
        h, sign = self.bit(src, ke - 1), self.bit(src, w - 1)
        rest = self.bits_or(src, ke - 2) if ke >= 2 else None
        if mode == "half-up":
            up = h
        elif mode == "half-even":
            up = f"{h} & ({rest} | {self.bit(src, ke)})" if rest else f"{h} & {self.bit(src, ke)}"
        elif mode == "half-away":
            up = f"{h} & ({rest} | ~{sign})" if rest else f"{h} & ~{sign}"
        else:  # trunc: a negative value with a remainder goes up
            up = f"{sign} & {self.bits_or(src, ke - 1)}"
        inc = f"({up})" if n == 1 else f"{{{{{n - 1}{{1'b0}}}}, {up}}}"
        return f"{q} + {inc}"

    def clamp(self, s: Sig) -> str:
        src, m, ilo, ihi, offset = s.args
        n = s.width
        c_lo, c_hi = -((-ilo) >> m), ihi >> m
        if m == 0:
            v = self.fit(src, n)
        elif m < n:
            v = f"{{{self.fit(src, n - m)}, {m}'b0}}"
        else:
            v = f"{n}'b0"
        if offset:
            v = f"{v} ^ {_ulit(1 << (n - 1), n)}"  # + 2^(n-1): offset binary (sign bit inverted)
        out = v
        if src.hi > c_hi:
            out = f"({self.cmp(src)} > {vlit(c_hi, src.width)}) ? {_ulit(ihi - offset, n)} : {out}"
        if src.lo < c_lo:
            out = f"({self.cmp(src)} < {vlit(c_lo, src.width)}) ? {_ulit(ilo - offset, n)} : {out}"
        return out


def _decl(s: Sig, kind: str) -> str:
    sign = " signed" if s.signed else ""
    return f"{kind}{sign} [{s.width - 1}:0] {s.name};"


def verilog_module(r: Resolved, header: list[str], table_files: dict[int, str], table_words: dict[int, int]) -> str:
    """The source of ``fxnet_datapath.v``."""
    d, levels, cuts = r.design, r.levels, r.cuts
    W = _Writer(r)
    ib, nin = d.input_bits, d.n_inputs
    bo = d.layers[-1].out_bits
    lat = len(cuts)
    out = ["// " + h if h else "//" for h in header]
    out += [
        "`timescale 1ns / 1ps",
        "`default_nettype none",
        "",
        "module fxnet_datapath (",
        "    input  wire clk,                  // rising edge",
        "    input  wire rst,                  // synchronous, active high: clears the valid pipeline",
        "    input  wire in_valid,             // a sample is on in_data this clock",
        f"    input  wire [{nin * ib - 1}:0] in_data,    // input i (unsigned, {ib} b) at [i*{ib} +: {ib}]",
        f"    output wire out_valid,            // high exactly {lat} clocks after each accepted sample",
        f"    output wire [{d.n_outputs * bo - 1}:0] out_codes,  // output j at [j*{bo} +: {bo}]",
        f"    output wire [{d.decision_bits - 1}:0] out_decision",
        ");",
        "",
    ]
    stage = 0
    for li, lev in enumerate(levels):
        live = [s for s in lev.sigs if r.declared(s)]
        if not live:
            continue
        reg = li in cuts
        if reg:
            stage += 1
        what = f"register stage {stage}" if reg else "combinational"
        out.append(f"// ---- {lev.title} ({what})")
        for s in [s for s in live if s.op == "const"]:  # a constant whose bits are selected
            out += [_decl(s, "wire"), f"assign {s.name} = {W.expr(s, ib)};"]
        live = [s for s in live if s.op != "const"]
        for s in live:
            if s.op == "rom":
                out.append(f"reg [{s.width - 1}:0] {s.name}_table [0:{table_words[s.args[1]] - 1}];")
                out.append(f'initial $readmemh("{table_files[s.args[1]]}", {s.name}_table);')
            out.append(_decl(s, "reg" if reg else "wire"))
        if reg and live:
            out.append("always @(posedge clk) begin")
            out += [f"    {s.name} <= {W.expr(s, ib)};" for s in live]
            out.append("end")
        else:
            out += [f"assign {s.name} = {W.expr(s, ib)};" for s in live]
        out.append("")
    out.append("// ---- valid pipeline (the only reset)")
    if lat == 0:
        out += ["assign out_valid = in_valid;", "wire unused_clk_rst = clk ^ rst;  // no register: clk and rst unused"]
    else:
        out.append(f"reg [{lat - 1}:0] valid_pipe;" if lat > 1 else "reg valid_pipe;")
        nxt = f"{{valid_pipe[{lat - 2}:0], in_valid}}" if lat > 1 else "in_valid"
        out += [
            "always @(posedge clk) begin",
            f"    if (rst) valid_pipe <= {lat}'b0;",
            f"    else valid_pipe <= {nxt};",
            "end",
            f"assign out_valid = valid_pipe{f'[{lat - 1}]' if lat > 1 else ''};",
        ]
    codes = ", ".join(W.name(c) for c in reversed(r.codes))
    out += [f"assign out_codes = {{{codes}}};" if len(r.codes) > 1 else f"assign out_codes = {codes};"]
    out.append(f"assign out_decision = {W.name(r.decision)};")
    sink = r.unused_bits()
    if sink:
        parts = ", ".join(f"{n}[{m}:{lsb}]" for n, m, lsb in sink)
        out += [
            "",
            "// bits no result needs (the value fits fewer bits there, or the rounding drops them), read here so",
            "// the lint sees every bit used (Verilator exempts names containing 'unused'); synthesis removes it",
            f"wire unused_bits = ^{{{parts}}};",
        ]
    out += ["", "endmodule", "", "`default_nettype wire", ""]
    return "\n".join(out)
