"""The tools' mapping rules the structural count follows: block RAM layout and cost, DSP blocks, multiplexers.

Each rule is Yosys 0.23's (its library files and pass options, named beside each table);
:mod:`.structure` applies them to the nets of a generated datapath.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["LOGIC_COST_ROM", "ROM_RULES", "DSP_RULES", "dsp_count", "family"]

#: soft-logic cost of one ROM bit that ``memory_libmap`` weighs against the block cost, per family:
#: 1/16 on iCE40 (the pass's default; from memory) and 1/64 on Xilinx 7 (found on the calibration
#: set: ROMs of 7168 and 8192 bits stay in LUTs, 11264 bits take a RAMB18)
LOGIC_COST_ROM = {"ice40": 1.0 / 16.0, "xilinx-7": 1.0 / 64.0}
#: per target family, the block kinds ``memory_libmap`` may use: ``(cost, blocks it counts as,
#: (depth, width) shapes)``. iCE40: ``cost 64`` of ``$__ICE40_RAM4K_`` in Yosys's
#: ``share/ice40/brams.txt`` (abits 11, widths 2 4 8 16). Xilinx 7: ``cost 129`` (18 kbit,
#: ``HALF``: a RAMB18E1) and ``cost 257`` (36 kbit, ``FULL``: a RAMB36E1, counted as two RAMB18)
#: in ``share/xilinx/brams_xc4v.txt``; shapes 16384 x 1 .. 512 x 36 and 32768 x 1 .. 1024 x 36
#: (7 Series Memory Resources, UG473; from memory).
ROM_RULES: dict[str, tuple[tuple[float, int, tuple[tuple[int, int], ...]], ...]] = {
    "ice40": ((64.0, 1, ((2048, 2), (1024, 4), (512, 8), (256, 16))),),
    "xilinx-7": ((129.0, 1, ((16384, 1), (8192, 2), (4096, 4), (2048, 9), (1024, 18), (512, 36))),
                 (257.0, 2, ((32768, 1), (16384, 2), (8192, 4), (4096, 9), (2048, 18), (1024, 36)))),
}  # fmt: skip
_LUT_INPUTS = {"ice40": 4, "xilinx-7": 6}


def family(target: str) -> str:
    """``"ice40"`` or ``"xilinx-7"``: the structural rules a target follows."""
    if target.startswith("ice40"):
        return "ice40"
    if target in ROM_RULES:
        return target
    raise ValueError(f"target must be an iCE40 target or xilinx-7 for a structural count, not {target!r}")


#: ``mul2dsp`` limits per family (A and B operand widths, least A, B and product widths) as Yosys 0.23
#: runs it: iCE40 from ``synth_ice40``'s help (``DSP_A_MAXWIDTH=16 DSP_B_MAXWIDTH=16 DSP_A_MINWIDTH=2
#: DSP_B_MINWIDTH=2 DSP_Y_MINWIDTH=11``); Xilinx 7 (25 x 18, ``DSP_A_MINWIDTH=2 DSP_B_MINWIDTH=2
#: DSP_Y_MINWIDTH=9``; from memory of ``synth_xilinx.cc``, checked by the benchmark's DSP counts)
DSP_RULES: dict[str, tuple[int, int, int, int, int]] = {"ice40": (16, 16, 2, 2, 11), "xilinx-7": (25, 18, 2, 2, 9)}


def dsp_count(target: str, a_bits: int, b_bits: int, y_bits: int) -> int:
    """DSP blocks Yosys gives one signed constant product of ``a_bits`` x ``b_bits`` into ``y_bits`` bits.

    ``mul2dsp`` (:data:`DSP_RULES`): a product below the least widths stays in LUTs, a wider
    one is split into pieces of the block's widths (the wider operand on the wider port).
    iCE40 counts are 0 unless the target maps DSPs (``ice40-up5k``: ``synth_ice40 -dsp``).
    """
    fam = family(target)
    if fam == "ice40" and target != "ice40-up5k":
        return 0
    amax, bmax, amin, bmin, ymin = DSP_RULES[fam]
    a, b = max(a_bits, b_bits), min(a_bits, b_bits)
    if a < amin or b < bmin or y_bits < ymin:
        return 0
    return -(-a // amax) * -(-b // bmax)


def _bram(entries: int, width: int, cols: list[int], kinds: tuple[tuple[float, int, tuple[tuple[int, int], ...]], ...],
          reach: np.ndarray) -> tuple[float, int, int]:  # fmt: skip
    """``(cost, blocks kept, reachable words per row)`` of a ROM of ``entries`` x ``width`` bits in block RAM.

    As ``memory_libmap`` lays a ROM out (seen in Yosys 0.23 netlists: block names, shapes
    and the blocks removed): for a block of ``d x w``, ``entries / d`` words side by side
    form one row of a ``d``-deep memory (the top address bits choose the word), cut into
    blocks of ``w`` bits; the cheapest layout wins (ties: the deeper block). The layout is
    of the whole word (``width``: the memory keeps the bits nothing reads). A block that
    holds no read bit (``cols``) of a word the address can reach is removed. Blocks kept are
    counted in the target's unit (a RAMB36 as two RAMB18).
    """
    best = None
    for cost, unit, shapes in kinds:
        for d, w in shapes:
            n = math.ceil(max(1, entries // d) * width / w)
            if best is None or (cost * n, -d) < (best[0], -best[1]):
                best = (cost * n, d, w, unit)
    assert best is not None
    total, d, w, unit = best
    words = set((reach // d).tolist()) if entries > d else {0}
    kept = {(q * width + b) // w for q in words for b in cols}
    return total, unit * len(kept), len(words)


def _mux_luts(k: int, inputs: int) -> int:
    """LUTs of one ``k``-to-1 multiplexer bit: LUT4s chain 2-to-1 steps (``k - 1``); a LUT6 is a
    4-to-1 multiplexer and the MUXF7/MUXF8 cells join up to four of them (``ceil(k / 4)``)."""
    if k <= 1:
        return 0
    return k - 1 if inputs == 4 else -(-k // 4)
