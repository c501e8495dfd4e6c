"""Counts read off the generated datapath itself, after the folding synthesis does on its own.

:func:`structure` walks the levels and register banks that
:func:`~fxnet_widgets.core.datapath.plan_datapath` builds (the structure the Verilog
writer prints) bit by bit. Every bit of every signal is a *net*: a constant, a copy
of another net (wiring: shifts by a power of two, sign extension, bit selection),
or the output of one operation on named input nets. Equal operations on equal nets
are one net (Yosys's ``opt_merge``); a register bank turns each net into a register
net, and a register of a constant is the constant (``opt_dff``). Liveness runs
backwards from the output ports over these nets, so logic nothing reads is gone, a
sum whose consumers keep its low bits only is that narrow, and a table word bit that
is the same in every word the address can reach is a constant.

Each table ROM is a block RAM or logic by the rule of Yosys's ``memory_libmap``: a
block RAM when its read is registered and the cheapest block layout (:func:`.mapping._bram`,
block kinds and costs in :data:`ROM_RULES`) costs less than its bits at the soft-logic
cost of a ROM bit (:data:`LOGIC_COST_ROM`), both for the table's whole word width (the
memory keeps every word bit, read or not: seen in the RTLIL before ``memory_libmap``,
``RD_DATA {unused[8:6], code[5:0]}``). Of a block RAM, the blocks that hold no read bit
of a word the address can reach are removed; Yosys tells the words apart by the address
nets (the copies of a sign bit are one net; a register of its inverse is another). The
output select of the words of a block row costs LUTs of the family's multiplexer.

Yosys sees structure, not value intervals, so a signal that only the intervals prove
constant still costs logic here, as it does after synthesis. :class:`Structure` lists
the counts; :mod:`.calibration` fits a few coefficients per target on them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..datapath._graph import Sig, round_bits, wrap_to
from ..datapath._resolve import Resolved
from .mapping import _LUT_INPUTS, DSP_RULES, LOGIC_COST_ROM, ROM_RULES, _bram, _mux_luts, dsp_count, family

__all__ = ["Structure", "structure", "ROM_RULES", "LOGIC_COST_ROM", "LUT_FEATURES", "DSP_RULES", "dsp_count", "family"]

#: the LUT features of :meth:`Structure.features`, in order
LUT_FEATURES = ("add_bits", "const_add_bits", "cmp_mux_bits", "rom_leaves", "rom_selects", "bram_mux_bits")


@dataclass(frozen=True)
class Structure:
    """Live bit counts of one datapath on one target family (after folding and dead-logic removal).

    ``add_bits``: adder bits of two variable terms (from the first bit where both may be
    nonzero); on Xilinx 7, where the carry chain (CARRY4) forms each sum bit itself and a
    LUT gives only its propagate ``a ^ b``, the distinct propagates of two different variable
    bits (sign-extension bits share one, as Yosys's ``opt_merge`` shares the LUT), and no
    adder bit with a constant term costs a LUT (its propagate is a wire or an INV cell);
    ``const_add_bits``: adder bits with a constant or one-bit term (a bias, a
    negated power-of-two product ``0 - x``, a rounding increment ``q + up``); ``cmp_bits``: comparator bits
    (saturation, clamps, threshold, argmax; one per compared bit); ``mux_bits``: bits
    chosen by those comparisons; ``rom_leaves``: per table in logic, the distinct
    pieces of its live word bits over the reachable words on one LUT's address inputs
    (4 on iCE40, 6 on Xilinx 7; a constant piece or an address bit is free, and on Xilinx 7,
    whose inverters are INV cells, so is a complement); ``rom_selects``: changes between consecutive
    pieces (the select tree); ``bram_mux_bits``: LUTs selecting, per word bit of a table in
    block RAM, one of the reachable words of a block row; ``reg_bits``: register nets (a
    registered table read in a block RAM has none) plus the valid pipeline; ``brams``: block RAMs; ``products``:
    ``(a_bits, b_bits, y_bits)`` of each live product written as ``*``.
    """

    add_bits: int
    const_add_bits: int
    cmp_bits: int
    mux_bits: int
    rom_leaves: int
    rom_selects: int
    bram_mux_bits: int
    reg_bits: int
    brams: int
    products: tuple[tuple[int, int, int], ...]

    def features(self) -> tuple[float, ...]:
        """The LUT features, in the order of :data:`LUT_FEATURES`."""
        return (float(self.add_bits), float(self.const_add_bits), float(self.cmp_bits + self.mux_bits),
                float(self.rom_leaves), float(self.rom_selects), float(self.bram_mux_bits))  # fmt: skip


class _Nets:
    """Interned nets: 0 and 1 are the constants; ``kind[id]``, ``deps[id]`` describe the others."""

    def __init__(self) -> None:
        self.ids: dict[Any, int] = {}
        self.kind: list[Any] = [None, None]
        self.deps: list[tuple[int, ...]] = [(), ()]

    def new(self, key: Any, kind: Any, deps: tuple[int, ...]) -> int:
        got = self.ids.get(key)
        if got is None:
            got = self.ids[key] = len(self.kind)
            self.kind.append(kind)
            self.deps.append(tuple(d for d in deps if d > 1))
        return got

    def inv(self, n: int) -> int:
        if n < 2:
            return 1 - n
        if self.kind[n] == "not":
            return self.deps[n][0]
        return self.new(("not", n), "not", (n,))


def _known(bits: tuple[int, ...] | list[int], signed: bool) -> int | None:
    """The value of constant nets (None if any is not constant)."""
    if any(b > 1 for b in bits):
        return None
    v = sum(b << i for i, b in enumerate(bits))
    return v - (1 << len(bits)) if signed and bits and bits[-1] else v


def _signed_width(bits: tuple[int, ...]) -> int:
    """Bits of a signed term once the copies of its top net are dropped (at least one)."""
    w = len(bits)
    while w > 1 and bits[w - 2] == bits[w - 1]:
        w -= 1
    return w


def _const_bits(v: int, n: int) -> list[int]:
    v = wrap_to(v, n) % (1 << n) if n > 0 else 0
    return [(v >> b) & 1 for b in range(n)]


class _Walk:
    def __init__(self, r: Resolved) -> None:
        self.r, self.nets = r, _Nets()
        self.bits: dict[int, list[int]] = {}
        self.cell: dict[int, tuple[Any, ...]] = {}  # signal id -> (op, first new net, ...) for counting
        self.pair: dict[int, tuple[int, int]] = {}  # adder net -> its operands' bits (the carry chain's propagate)

    def of(self, x: Sig, n: int) -> list[int]:
        """The nets of ``x`` as ``n`` bits (sign- or zero-extended, or its low bits)."""
        t = self.r.target(x)
        if t.op == "const":
            return _const_bits(int(t.args[0]), n)
        b = self.bits[id(t)]
        ext = b[-1] if t.signed else 0
        return (b + [ext] * max(0, n - len(b)))[:n]

    def round_up(self, src: list[int], ke: int, mode: str) -> int:
        """The net of the rounding increment (the writer's ``up``), folded where it is plain."""
        N, w = self.nets, len(src)

        def bit(i: int) -> int:
            return src[min(i, w - 1)]

        rest = [src[i] for i in range(min(ke - 2, w - 1) + 1)] if ke >= 2 else []
        rest = sorted({v for v in rest if v != 0})
        h = bit(ke - 1)
        if mode == "half-up" or h == 0:
            return h
        if mode == "half-even":
            other = bit(ke)
            if other == h or 1 in rest or h in rest:
                return h  # h & (... | h) is h
            if not rest:
                return h if other == 1 else (0 if other == 0 else N.new(("and", h, other), "mux", (h, other)))
            return N.new(("up", mode, h, tuple(rest), other), "mux", (h, other, *rest))
        return N.new(("up", mode, tuple(src), ke), "mux", tuple(src))

    def comb(self, s: Sig) -> list[int]:  # noqa: C901 - one case per operation
        op, a, n, N = s.op, s.args, s.width, self.nets
        if op == "port":
            return [N.new(("in", a[0], b), "in", ()) for b in range(n)]
        if op in ("pass", "wrap"):
            return self.of(a[0], n)
        if op == "mul":
            c, src = int(a[1]), self.of(a[0], n)
            sh = (abs(c) & -abs(c)).bit_length() - 1
            if c > 0 and c == 1 << sh:
                return ([0] * sh + src)[:n]
            key: tuple[Any, ...] = ("mul", c, tuple(src))
            tz = next((i for i, v in enumerate(src) if v != 0), n) + sh
            # bit b of x * c reads x's bits up to b - sh (a truncated product leaves the top of x unread,
            # as Yosys's ``wreduce`` finds)
            return [0 if b < tz else N.new(key + (b,), ("mul", c), tuple(src[: b - sh + 1])) for b in range(n)]
        if op == "add":
            x, y = sorted((tuple(self.of(a[0], n)), tuple(self.of(a[1], n))))
            kx, ky = _known(x, True), _known(y, True)
            if kx is not None and ky is not None:  # constants added: a constant
                return _const_bits(kx + ky, n)
            out, b = [], 0
            while b < n and (x[b] == 0 or y[b] == 0):  # no carry yet: the other term's bit
                out.append(y[b] if x[b] == 0 else x[b])
                b += 1
            key = ("add", x, y)
            kind = "addc" if max(x) < 2 or max(y) < 2 else "add"  # a constant term
            top = max(_signed_width(x), _signed_width(y)) + 1  # Yosys's wreduce: the sum's bits above
            for i in range(b, n):  # are copies of its sign bit
                if i >= top and out:
                    out.append(out[-1])
                    continue
                out.append(N.new(key + (i,), kind, x[: i + 1] + y[: i + 1]))
                self.pair[out[-1]] = (x[i], y[i])
            return out
        if op == "round":
            src = self.of(a[0], a[0].width)
            w = len(src)
            ke, q_msb, q_lsb = round_bits(w, a[1], n)
            q = src[q_lsb : q_msb + 1]
            q = (q + [src[-1]] * n)[:n]
            if a[2] == "floor":
                return q
            up = self.round_up(src, ke, a[2])
            if up == 0:
                return q
            kq = _known(q, True)
            if kq is not None and up == 1:
                return _const_bits(kq + 1, n)
            if n == 1 and up == q[0]:  # q + q in one bit: 0, found by ABC (after the register pass): a
                return [N.new(("opaque", tuple(q)), "opaque", ())]  # kept register of no inputs
            key = ("round", tuple(q), up)
            out = [N.new(key + (b,), "add" if b == 0 else "addc", tuple(q[: b + 1]) + (up,)) for b in range(n)]
            self.pair[out[0]] = (q[0], up)
            return out
        if op in ("sat", "clamp"):
            src_sig = self.r.target(a[0])
            src = self.of(a[0], a[0].width)
            k = _known(src, src_sig.signed)
            if k is not None:  # a constant clamped: a constant
                if op == "sat":
                    return _const_bits(min(max(k, -(1 << (a[1] - 1))), (1 << (a[1] - 1)) - 1), n)
                return _const_bits(min(max(k << a[1], a[2]), a[3]) - a[4], n)
            if op == "sat":
                hi = (1 << (a[1] - 1)) - 1
                lo, m, offset = -hi - 1, 0, 0
            else:
                m, ilo, ihi, offset = a[1], a[2], a[3], a[4]
                lo, hi = -((-ilo) >> m), ihi >> m
            compares = (src_sig.lo < lo) + (src_sig.hi > hi)
            v = ([0] * m + self.of(a[0], max(n - m, 0)))[:n]
            if offset:
                v[-1] = N.inv(v[-1])
            if not compares:
                return v
            key = (op, a[1:], tuple(src))
            self.cell[id(s)] = ("cmp", compares * len(src), key)
            return [N.new(key + (b,), "mux", tuple(src) + (v[b],)) for b in range(n)]
        if op == "ge":
            bits = tuple(self.of(a[0], a[0].width))
            kv = _known(bits, a[0].signed)
            if kv is not None:  # a constant compared: a constant
                return [int(kv >= a[1])]
            key = ("ge", a[1], bits)
            self.cell[id(s)] = ("cmp", len(bits) + 1, key)
            return [N.new(key, "mux", bits)]
        if op in ("maxcode", "maxidx"):
            ca, cb = (a[0], a[1]) if op == "maxcode" else (a[0], a[2])
            pa, pb = tuple(self.of(ca, ca.width)), tuple(self.of(cb, cb.width))
            sel = (a[0], a[1]) if op == "maxcode" else (a[1], a[3])
            va, vb = self.of(sel[0], n), self.of(sel[1], n)
            ka, kb = _known(pa, ca.signed), _known(pb, cb.signed)
            if ka is not None and kb is not None:  # constants compared: the choice is known
                return vb if kb > ka else va
            ckey = ("gt", pa, pb)
            self.cell[id(s)] = ("cmp", max(len(pa), len(pb)) + 1, ckey)
            return [va[b] if va[b] == vb[b] else N.new((op, ckey, va[b], vb[b]), "mux", pa + pb + (va[b], vb[b]))
                    for b in range(n)]  # fmt: skip
        if op == "rom":
            addr = tuple(self.of(a[0], a[0].width))
            self.cell[id(s)] = ("rom", addr)
            # one memory per neuron: Yosys does not merge memories, even equal ones on one address
            return [N.new(("rom", s.name, b), "rom", addr) for b in range(n)]
        raise AssertionError(op)


def _reachable(addr: tuple[int, ...], nets: _Nets, full: bool) -> np.ndarray:
    """The addresses the address nets can take: ``full``: knowing that a net and its inverse differ."""
    T = len(addr)
    a = np.arange(1 << T, dtype=np.int64)
    bits = (a[:, None] >> np.arange(T)[None, :]) & 1
    ok = np.ones(a.size, dtype=bool)
    first: dict[int, int] = {}
    for i, n in enumerate(addr):
        if n < 2:
            ok &= bits[:, i] == n
            continue
        base, flip = n, 0
        if full and nets.kind[n] == "not":
            base, flip = nets.deps[n][0], 1
        if base in first:
            ok &= bits[:, i] == (bits[:, first[base][0]] ^ flip ^ first[base][1])  # type: ignore[index]
        else:
            first[base] = (i, flip)  # type: ignore[assignment]
    return a[ok]


def _table(r: Resolved, layer: int) -> np.ndarray:
    """The table of ``layer`` as a (words x bits) 0/1 array (two's complement words)."""
    L = r.design.layers[layer - 1]
    assert L.table is not None
    words = np.asarray(L.table, dtype=np.int64) % (1 << L.out_bits)
    return ((words[:, None] >> np.arange(L.out_bits)[None, :]) & 1).astype(np.int8)


def structure(r: Resolved, target: str) -> Structure:  # noqa: C901 - the counting walk
    """The :class:`Structure` of the datapath ``r`` on ``target`` (an iCE40 target or ``xilinx-7``)."""
    fam = family(target)
    kinds = ROM_RULES[fam]
    logic_cost = LOGIC_COST_ROM[fam]
    free_inv = fam == "xilinx-7"
    k = _LUT_INPUTS[fam]
    W = _Walk(r)
    N = W.nets
    sigs = [s for lev in r.levels for s in lev.sigs if r.declared(s) and s.op != "const"]
    roms: dict[int, tuple[Sig, np.ndarray, np.ndarray]] = {}
    for s in sigs:
        comb = W.comb(s)
        if s.op == "rom":  # word bits equal over every reachable word are constants
            t = _table(r, int(s.args[1]))
            reach = _reachable(W.cell[id(s)][1], N, True)
            sub = t[reach]
            comb = [int(sub[0, b]) if sub[:, b].min() == sub[:, b].max() else c for b, c in enumerate(comb)]
            roms[id(s)] = (s, t, reach)
        if r.registered(s):
            comb = [c if c < 2 else N.new(("reg", c), "reg", (c,)) for c in comb]
        W.bits[id(s)] = comb
    # liveness over nets, from the output ports
    live: set[int] = set()
    todo = [n for c in [*r.codes, r.decision] for n in W.of(c, c.width) if n > 1]
    while todo:
        n = todo.pop()
        if n in live:
            continue
        live.add(n)
        todo.extend(d for d in N.deps[n] if d not in live)
    add = addc = cmp = mux = leaves = selects = regs = brams = bram_mux = 0
    chain_xor, propagates = fam == "xilinx-7", set()
    products: list[tuple[int, int, int]] = []
    bram_regs: set[int] = set()
    counted: set[Any] = set()
    for s in sigs:
        bits = [n for n in W.bits[id(s)] if n in live]
        comb_live = [n for n in bits if N.kind[n] != "reg"] if not r.registered(s) else \
            [N.deps[n][0] for n in bits if N.kind[n] == "reg"]  # fmt: skip
        info = W.cell.get(id(s))
        if info and info[0] == "cmp" and comb_live and info[2] not in counted:
            counted.add(info[2])
            cmp += info[1]
        if s.op == "rom" and comb_live:
            _, t, reach = roms[id(s)]
            cols = [b for b, n in enumerate(W.bits[id(s)]) if n in live]
            entries = t.shape[0]
            # the memory keeps the table's whole word (Yosys does not narrow a memory to the bits read)
            cost, kept, words = _bram(entries, t.shape[1], cols, kinds, _reachable(W.cell[id(s)][1], N, False))
            if r.registered(s) and entries * t.shape[1] * logic_cost > cost:
                brams += kept
                bram_mux += len(cols) * _mux_luts(words, k)
                bram_regs.update(bits)
            else:
                sub = t[reach]
                piece = min(1 << k, sub.shape[0])
                pad = (-sub.shape[0]) % piece
                if pad:
                    sub = np.vstack([sub, np.repeat(sub[-1:], pad, axis=0)])
                # equal pieces are one LUT, an address bit itself is none; on Xilinx 7 an inverter is a free
                # INV cell, so a piece and its complement are one LUT and an inverted address bit none
                trivial = {tuple(int(v) for v in (np.arange(piece) >> j) & 1) for j in range(piece.bit_length() - 1)
                           } if len(reach) == t.shape[0] else set()  # (rows in address order: every word reached)
                pieces: set[tuple[int, ...]] = set()
                for b in cols:
                    chunks = sub[:, b].reshape(-1, piece)
                    for ch in chunks.tolist():
                        key = tuple(1 - v for v in ch) if free_inv and ch[0] == 1 else tuple(ch)
                        if min(ch) != max(ch) and key not in trivial:
                            pieces.add(key)
                    selects += int(np.any(chunks[1:] != chunks[:-1], axis=1).sum())
                leaves += len(pieces)
        for n in set(comb_live):
            if n in counted:
                continue
            counted.add(n)
            kind = N.kind[n]
            if chain_xor:  # Xilinx 7: a LUT per distinct propagate of two different variable bits; none else
                pair = W.pair.get(n)
                if kind == "add" and pair is not None and min(pair) > 1 and pair[0] != pair[1]:
                    propagates.add((min(pair), max(pair)))
                if kind in ("add", "addc") or (isinstance(kind, tuple) and kind[0] == "mul" and kind[1] < 0
                                               and (-kind[1]) & (-kind[1] - 1) == 0):  # fmt: skip
                    continue
            if kind == "add":
                add += 1
            elif kind == "addc":
                addc += 1
            elif kind == "mux":
                mux += 1
            elif isinstance(kind, tuple) and kind[0] == "mul":
                c = kind[1]
                if c < 0 and (-c) & (-c - 1) == 0:  # 0 - x * 2^s
                    addc += 1
                elif ("prod", id(s)) not in counted:
                    counted.add(("prod", id(s)))
                    src = r.target(s.args[0])
                    top = max(b for b, m in enumerate(W.bits[id(s)]) if m in live) + 1
                    products.append((min(src.width + (0 if src.signed else 1), top),
                                     min(abs(c).bit_length() + 1, top), top))  # fmt: skip
    regs = sum(1 for n in live if N.kind[n] == "reg" and n not in bram_regs) + len(r.cuts)
    add += len(propagates)
    return Structure(add, addc, cmp, mux, leaves, selects, bram_mux, regs, brams, tuple(products))

