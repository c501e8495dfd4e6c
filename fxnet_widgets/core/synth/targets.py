"""Synthesis targets: the Yosys script of each, and the capacity of its device.

Capacities are the logic cells (one 4-input LUT and one flip-flop each on iCE40),
block RAMs and multiplier blocks of one device, as its family datasheet lists them:

* iCE40 UltraPlus: Lattice "iCE40 UltraPlus Family Data Sheet" (FPGA-DS-02008),
  table "iCE40 UltraPlus Family Selection Guide": iCE40UP5K 5280 LUTs, 30 sysMEM
  blocks of 4 kbit, 8 DSP blocks (from memory).
* iCE40 LP/HX: Lattice "iCE40 LP/HX Family Data Sheet" (DS1040), table "iCE40 LP/HX
  Family Selection Guide": HX1K 1280 LUTs and 16 blocks of 4 kbit, HX8K 7680 LUTs and
  32 blocks (from memory).
* Xilinx 7 series: "7 Series FPGAs Data Sheet: Overview" (DS180), XC7A35T: 20800
  LUT6, 41600 flip-flops, 50 RAMB36 (100 RAMB18), 90 DSP48E1 (from memory).
* ECP5: Lattice "ECP5 and ECP5-5G Family Data Sheet" (FPGA-DS-02012), LFE5U-25F:
  24000 LUTs, 56 sysMEM blocks of 18 kbit, 28 18x18 multipliers (from memory).

Counts of block RAM are in the device's own block (4 kbit on iCE40, RAMB18 on
Xilinx 7, 18 kbit on ECP5); a RAMB36 counts as two RAMB18.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

__all__ = ["Target", "TARGETS", "target"]


@dataclass(frozen=True)
class Target:
    """One synthesis target: a Yosys command, cell names to count, and the device's capacity."""

    name: str
    device: str
    yosys_command: str  # Yosys commands; {top} and {json} are filled in
    lut_cells: tuple[str, ...]  # cell type prefixes counted as LUTs
    ff_cells: tuple[str, ...]  # ... as flip-flops
    carry_cells: tuple[str, ...]
    bram_cells: tuple[tuple[str, int], ...]  # (cell type, blocks it counts as)
    dsp_cells: tuple[str, ...]
    luts: int | None  # capacity (None: no device)
    ffs: int | None
    brams: int | None
    dsps: int | None
    nextpnr: tuple[str, ...] = ()  # nextpnr-ice40 device options; empty: no place and route
    datasheet: str = ""

    @property
    def places(self) -> bool:
        """True when the target is placed and routed (and so timed) by nextpnr-ice40."""
        return bool(self.nextpnr)

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name, "device": self.device, "luts": self.luts, "ffs": self.ffs, "brams": self.brams,
            "dsps": self.dsps, "places": self.places, "datasheet": self.datasheet,
        }  # fmt: skip


_ICE40_FF = ("SB_DFF",)
_OUT = " -top {top} -json {json}"
_THEN_JSON = " -top {top}; write_json {json}"
_UP = "Lattice iCE40 UltraPlus Family Data Sheet (FPGA-DS-02008)"
_HX = "Lattice iCE40 LP/HX Family Data Sheet (DS1040)"


def _ice40(name: str, device: str, luts: int, brams: int, dsps: int, pnr: tuple[str, ...], sheet: str) -> Target:
    cmd = ("synth_ice40 -dsp" if dsps else "synth_ice40") + _OUT
    return Target(
        name, device, cmd, ("SB_LUT4",), _ICE40_FF, ("SB_CARRY",), (("SB_RAM40_4K", 1),), ("SB_MAC16",),
        luts, luts, brams, dsps, pnr, sheet,
    )  # fmt: skip


TARGETS: dict[str, Target] = {
    t.name: t
    for t in (
        _ice40("ice40-up5k", "iCE40UP5K-SG48", 5280, 30, 8, ("--up5k", "--package", "sg48"), _UP),
        _ice40("ice40-hx8k", "iCE40HX8K-CT256", 7680, 32, 0, ("--hx8k", "--package", "ct256"), _HX),
        _ice40("ice40-hx1k", "iCE40HX1K-TQ144", 1280, 16, 0, ("--hx1k", "--package", "tq144"), _HX),
        Target(
            "xilinx-7", "XC7A35T", "synth_xilinx -family xc7" + _THEN_JSON, ("LUT",), ("FD",), ("CARRY4",),
            (("RAMB18E1", 1), ("RAMB36E1", 2)), ("DSP48E1",), 20800, 41600, 100, 90, (),
            "7 Series FPGAs Data Sheet: Overview (DS180)",
        ),
        Target(
            "ecp5-25k", "LFE5U-25F", "synth_ecp5" + _THEN_JSON, ("LUT4",), ("TRELLIS_FF",), ("CCU2C",),
            (("DP16KD", 1),), ("MULT18X18D",), 24000, 24000, 56, 28, (),
            "Lattice ECP5 and ECP5-5G Family Data Sheet (FPGA-DS-02012)",
        ),
        Target(
            "generic", "generic 4-input LUTs", "synth -flatten -top {top}; abc -lut 4; opt_clean; write_json {json}",
            ("$lut",), ("$_DFF", "$_SDFF", "$_DFFE", "$_SDFFE", "$_SDFFCE"), (), (), (), None, None, None, None, (), "",
        ),
    )
}  # fmt: skip


def target(name: str) -> Target:
    """The target called ``name`` (one of :data:`TARGETS`)."""
    if name not in TARGETS:
        raise ValueError(f"target must be one of {', '.join(TARGETS)}, not {name!r}")
    return TARGETS[name]
