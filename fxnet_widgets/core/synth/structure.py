"""Counts read off the generated datapath itself, after the constant folding synthesis does.

:func:`structure` walks the levels and register banks that
:func:`~fxnet_widgets.core.datapath.plan_datapath` builds (the very structure the
Verilog writer prints) and counts, per operation class, the bits that logic must
compute once the folds that Yosys makes on its own are applied:

* bits known to be constant from the structure: the low zero bits of a shifted
  product (a power-of-two weight digit) and of sums of such terms, constants, and
  the bits of a table word that are equal in every word of the table;
* bits nothing live reads (dead logic is removed): liveness runs backwards from the
  output ports; a table whose every word is one constant reads no address; a sum
  whose consumer keeps only its low bits is as narrow as those bits;
* each table ROM is a block RAM or logic by the rule of Yosys's ``memory_libmap``:
  a block RAM when its read is registered and the block RAMs cost less than the
  ROM's bits at the soft-logic cost per ROM bit (:data:`LOGIC_COST_ROM`); the block
  cost per device is that of Yosys's own memory library files (quoted below).

Yosys sees the structure, not the value intervals, so a signal that only the
intervals prove constant (say, a layer whose every input lands on one table word)
still costs logic here, as it does after synthesis. What the counts are per class
is listed at :class:`Structure`; :mod:`.calibration` fits a few coefficients on them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..datapath._graph import Sig
from ..datapath._resolve import Resolved, _clamp_use, _round_use

__all__ = ["Structure", "structure", "ROM_RULES", "LOGIC_COST_ROM", "dsp48_count"]

#: soft-logic cost of one ROM bit in Yosys 0.23 ``memory_libmap`` (its default; from memory,
#: confirmed on the calibration set: every block-RAM count of the benchmark agrees)
LOGIC_COST_ROM = 1.0 / 16.0
#: per target family: ``(cost of one block, ((depth, width) shapes))``. iCE40: ``cost 64`` of
#: ``$__ICE40_RAM4K_`` in Yosys's ``share/ice40/brams.txt``, abits 11 (2048 x 2 .. 256 x 16).
#: Xilinx 7: ``cost 129`` of the 18 kbit (``HALF``) RAMB18 in ``share/xilinx/brams_xc4v.txt``,
#: 16384 x 1 .. 512 x 36 (UG473 RAMB18E1 shapes, from memory).
ROM_RULES: dict[str, tuple[float, tuple[tuple[int, int], ...]]] = {
    "ice40": (64.0, ((2048, 2), (1024, 4), (512, 8), (256, 16))),
    "xilinx-7": (129.0, ((16384, 1), (8192, 2), (4096, 4), (2048, 9), (1024, 18), (512, 36))),
}
_LUT_INPUTS = {"ice40": 4, "xilinx-7": 6}


def _family(target: str) -> str:
    if target.startswith("ice40"):
        return "ice40"
    if target in ROM_RULES:
        return target
    raise ValueError(f"target must be an iCE40 target or xilinx-7 for a structural count, not {target!r}")


@dataclass(frozen=True)
class Structure:
    """Bit counts of one datapath on one target family (all after constant folding and dead-logic removal).

    ``add_bits``: adder and subtractor bits (sums, negated power-of-two products, rounding
    increments); ``cmp_bits``: comparator bits (saturation, clamps, threshold, argmax);
    ``mux_bits``: bits chosen by those comparisons; ``rom_leaves``: per live table-word bit,
    the distinct non-constant pieces of one LUT's inputs (4 on iCE40, 6 on Xilinx 7);
    ``rom_selects``: the changes between consecutive pieces (the select tree those pieces
    need); ``reg_bits``: flip-flop bits of the register banks (a registered table read
    held in a block RAM has none) plus the valid pipeline; ``brams``: block RAMs of the
    tables the rule puts there; ``products``: ``(a_bits, b_bits, y_bits)`` of each live
    constant product written as ``*`` (products ``"multiply"``).
    """

    add_bits: int
    cmp_bits: int
    mux_bits: int
    rom_leaves: int
    rom_selects: int
    reg_bits: int
    brams: int
    products: tuple[tuple[int, int, int], ...]

    def features(self) -> tuple[float, ...]:
        """The LUT features, in the order of :data:`LUT_FEATURES`."""
        return (float(self.add_bits), float(self.cmp_bits + self.mux_bits), float(self.rom_leaves),
                float(self.rom_selects))  # fmt: skip


LUT_FEATURES = ("add_bits", "cmp_mux_bits", "rom_leaves", "rom_selects")
__all__ += ["LUT_FEATURES"]


def _blocks(entries: int, width: int, shapes: tuple[tuple[int, int], ...]) -> int:
    return min(math.ceil(entries / d) * math.ceil(width / w) for d, w in shapes)


def _table_bits(r: Resolved, layer: int) -> np.ndarray:
    """The table of ``layer`` as a (words x bits) 0/1 array (two's complement words)."""
    L = r.design.layers[layer - 1]
    assert L.table is not None
    words = np.asarray(L.table, dtype=np.int64) % (1 << L.out_bits)
    return ((words[:, None] >> np.arange(L.out_bits)[None, :]) & 1).astype(np.int8)


def _zeros(s: Sig, tz: dict[int, int], r: Resolved) -> int:
    """Low bits of ``s`` that are zero by structure."""
    op, a = s.op, s.args
    if op == "const":
        v = int(a[0])
        return s.width if v == 0 else min((v & -v).bit_length() - 1, s.width)
    src = [r.target(x) for x in a if isinstance(x, Sig)]
    if op == "pass":
        return tz.get(id(src[0]), 0)
    if op == "mul":
        c = abs(int(a[1]))
        return min(tz.get(id(src[0]), 0) + (c & -c).bit_length() - 1, s.width)
    if op == "add":
        return min(tz.get(id(src[0]), 0), tz.get(id(src[1]), 0))
    if op == "wrap":
        return min(tz.get(id(src[0]), 0), s.width)
    return 0


def dsp48_count(a_bits: int, b_bits: int, y_bits: int) -> int:
    """DSP48E1 blocks Yosys 0.23 ``synth_xilinx`` gives one signed product (its ``mul2dsp`` rule).

    ``mul2dsp`` is run with ``DSP_A_MAXWIDTH=25 DSP_B_MAXWIDTH=18 DSP_A_MINWIDTH=2
    DSP_B_MINWIDTH=2 DSP_Y_MINWIDTH=9 DSP_SIGNEDONLY=1`` (``synth_xilinx`` help, Yosys
    0.23): a product narrower than that stays in LUTs, a wider one is split into
    25 x 18 pieces (the wider operand on the 25-bit port).
    """
    a, b = max(a_bits, b_bits), min(a_bits, b_bits)
    if a < 2 or b < 2 or y_bits < 9:
        return 0
    return math.ceil(a / 25) * math.ceil(b / 18)


def structure(r: Resolved, target: str) -> Structure:  # noqa: C901 - one case per operation
    """The :class:`Structure` of the datapath ``r`` on ``target`` (an iCE40 target or ``xilinx-7``)."""
    fam = _family(target)
    block_cost, shapes = ROM_RULES[fam]
    k = _LUT_INPUTS[fam]
    sigs = [s for lev in r.levels for s in lev.sigs if r.declared(s) and s.op != "const"]
    # structural zeros, forwards
    tz: dict[int, int] = {}
    tables: dict[int, np.ndarray] = {}
    const_bits: dict[int, set[int]] = {}
    for s in sigs:
        tz[id(s)] = _zeros(s, tz, r)
        if s.op == "rom":
            layer = int(s.args[1])
            if layer not in tables:
                tables[layer] = _table_bits(r, layer)
            t = tables[layer]
            const_bits[id(s)] = {b for b in range(t.shape[1]) if t[:, b].min() == t[:, b].max()}
        else:
            const_bits[id(s)] = set(range(min(tz[id(s)], s.width)))
    # liveness, backwards: the bits something live reads, less the constant ones
    for s in sigs:
        s.used = set()
    for c in [*r.codes, r.decision]:
        t = r.target(c)
        if t.op != "const":
            t.use(t.width - 1)
    live: dict[int, set[int]] = {}
    for s in reversed(sigs):
        bits = s.used - const_bits[id(s)]
        if not bits:
            continue
        live[id(s)] = bits
        srcs = [r.target(a) for a in s.args if isinstance(a, Sig)]
        srcs = [x for x in srcs if x.op != "const"]
        top = max(bits)
        if s.op in ("pass", "mul", "add"):
            for x in srcs:
                x.use(min(x.width - 1, top))
        elif s.op == "wrap":
            srcs[0].use(min(s.args[1] - 1, top))
        elif s.op == "round" and srcs:
            _round_use(srcs[0], s.args[1], s.args[2], s.width)
        elif s.op in ("sat", "clamp") and srcs:
            _clamp_use(s, srcs[0])
        else:
            for x in srcs:
                x.use(x.width - 1)
    add = cmp = mux = leaves = selects = regs = brams = 0
    products: list[tuple[int, int, int]] = []
    compared: set[tuple[int, int]] = set()
    for s in sigs:
        bits = live.get(id(s))
        if not bits:
            continue
        top = max(bits) + 1
        srcs = [r.target(a) for a in s.args if isinstance(a, Sig)]
        registered = r.registered(s)
        in_bram = False
        if s.op == "add":
            add += max(0, top - max(tz.get(id(x), 0) if x.op != "const" else _zeros(x, tz, r) for x in srcs))
        elif s.op == "mul":
            c = int(s.args[1])
            if c < 0 and (-c) & (-c - 1) == 0:  # a negated power of two: a subtraction from zero
                add += max(0, top - tz[id(s)])
            elif c & (c - 1) != 0:  # a product written as *
                x = srcs[0]
                a_bits = min(x.width + (0 if x.signed else 1), top)
                products.append((a_bits, min(abs(c).bit_length() + 1, top), top))
        elif s.op == "round":
            if s.args[2] != "floor":
                add += top
        elif s.op in ("sat", "clamp"):
            src = srcs[0]
            if s.op == "sat":
                hi = (1 << (s.args[1] - 1)) - 1
                lo = -hi - 1
            else:
                m, ilo, ihi = s.args[1], s.args[2], s.args[3]
                lo, hi = -((-ilo) >> m), ihi >> m
            n_cmp = (src.lo < lo) + (src.hi > hi)
            cmp += n_cmp * src.width
            mux += n_cmp * len(bits)
        elif s.op == "ge":
            cmp += srcs[0].width + 1
        elif s.op in ("maxcode", "maxidx"):
            a, b = (srcs[0], srcs[1]) if s.op == "maxcode" else (srcs[0], srcs[2])
            if (id(a), id(b)) not in compared:
                compared.add((id(a), id(b)))
                cmp += max(a.width, b.width) + 1
            mux += len(bits)
        elif s.op == "rom":
            t = tables[int(s.args[1])]
            cols = sorted(bits)
            entries = t.shape[0]
            blocks = _blocks(entries, len(cols), shapes)
            in_bram = registered and entries * len(cols) * LOGIC_COST_ROM > block_cost * blocks
            if in_bram:
                brams += blocks
            else:
                piece = 1 << min(k, int(round(math.log2(entries))))
                for b in cols:
                    chunks = t[:, b].reshape(-1, piece)
                    rows = {tuple(ch) for ch in chunks.tolist() if min(ch) != max(ch)}
                    leaves += len(rows)
                    selects += int(np.any(chunks[1:] != chunks[:-1], axis=1).sum())
        if registered and not in_bram:
            regs += len(bits)
    regs += len(r.cuts)  # the valid pipeline
    return Structure(add, cmp, mux, leaves, selects, regs, brams, tuple(products))

