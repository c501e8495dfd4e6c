"""The record of one synthesis run: resources, timing, device, tool versions."""

from __future__ import annotations

from dataclasses import dataclass, field, fields
from typing import Any

__all__ = ["SynthesisResult", "CAUTION"]

#: shown beside every figure of open-tool synthesis (README, widget, report)
CAUTION = (
    "Synthesis and place-and-route figures from open-source tools are estimates for the named device and "
    "tool version, not sign-off: vendor tools, constraints and the rest of the design change them."
)

_UTIL_NAMES = {"luts": "LUTs", "ffs": "flip-flops", "brams": "block RAMs", "dsps": "DSP blocks"}


@dataclass(frozen=True)
class SynthesisResult:
    """Resources and timing of one design on one target, measured by Yosys (and nextpnr-ice40).

    ``fmax_mhz`` is None where no place and route ran (targets other than iCE40, a
    design that does not fit, or a design without a register-to-register path);
    ``meets_clock`` is None without both a requested clock and ``fmax_mhz``.
    ``plan_digest`` names the (network, plan) the design was generated from (None for
    a design given as Verilog). ``cached`` is True when the figures came from the cache.
    """

    target: str
    device: str
    top: str
    luts: int
    ffs: int
    carries: int
    brams: int
    dsps: int
    capacity: dict[str, int | None]
    fits: bool
    fmax_mhz: float | None
    clock_mhz: float | None
    video: str | None
    meets_clock: bool | None
    latency: int | None
    seed: int
    tools: dict[str, str]
    utilization: dict[str, list[int]]
    design_digest: str
    plan_digest: str | None
    key: str
    cached: bool = field(default=False, compare=False)

    @property
    def caution(self) -> str:
        return f"{CAUTION} Device: {self.device}; tools: {'; '.join(self.tools.values())}."

    @property
    def margin(self) -> float | None:
        """``fmax_mhz / clock_mhz`` (above 1: the clock is met with room to spare)."""
        if self.fmax_mhz is None or not self.clock_mhz:
            return None
        return self.fmax_mhz / self.clock_mhz

    def use(self) -> dict[str, tuple[int, int | None]]:
        """``{resource: (used, capacity)}`` for LUTs, flip-flops, block RAMs and DSP blocks."""
        return {k: (int(getattr(self, k)), self.capacity.get(k)) for k in _UTIL_NAMES}

    def clock_text(self) -> str:
        """The clock this result was computed for, in words ("74.25 MHz (1280x720p60)", "no clock")."""
        if self.clock_mhz is None:
            return "no clock"
        return f"{self.clock_mhz:g} MHz" + (f" ({self.video})" if self.video else "")

    def clock_verdict(self) -> str | None:
        """The maximum clock against the required one: met / NOT met with margin and slack; None without a clock."""
        if self.clock_mhz is None:
            return None
        wanted = self.clock_text()
        if self.meets_clock is None or self.fmax_mhz is None or self.margin is None:
            why = ("the design does not fit" if not self.fits else "no place and route for this target"
                   if "nextpnr-ice40" not in self.tools else "no register-to-register path")  # fmt: skip
            return f"required clock {wanted}: not timed ({why})"
        slack = self.fmax_mhz - self.clock_mhz
        if self.meets_clock:
            return f"required clock {wanted}: met (margin x{self.margin:.2f}, {slack:.2f} MHz to spare)"
        return f"required clock {wanted}: NOT met (margin x{self.margin:.2f}, {-slack:.2f} MHz short)"

    def overflows(self) -> list[str]:
        """One phrase per resource the design needs more of than the device has."""
        return [
            f"{used} {_UTIL_NAMES[k]} of the {cap} on {self.device}"
            for k, (used, cap) in self.use().items()
            if cap is not None and used > cap
        ]

    def to_dict(self) -> dict[str, Any]:
        d = {f.name: getattr(self, f.name) for f in fields(self)}
        d["margin"] = self.margin
        d["caution"] = self.caution
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any], *, cached: bool = False) -> SynthesisResult:
        names = {f.name for f in fields(cls)} - {"cached"}
        missing = sorted(names - set(d))
        if missing:
            raise ValueError(f"a synthesis record must hold {', '.join(missing)}, but it does not")
        return cls(**{k: d[k] for k in names}, cached=cached)

    def summary(self) -> str:
        """Deterministic text: resources, fit, timing and the caution."""
        lines = [f"synthesis for {self.target} ({self.device}), top {self.top}"]
        for k, (used, cap) in self.use().items():
            share = f" of {cap} ({100 * used / cap:.1f} %)" if cap else (f" of {cap}" if cap == 0 else "")
            lines.append(f"  {_UTIL_NAMES[k]}: {used}{share}")
        lines.append(f"  carry cells: {self.carries}")
        over = self.overflows()
        lines.append("  fits the device" if not over else f"  does NOT fit: needs {'; '.join(over)}")
        if self.latency is not None:
            lines.append(f"  latency: {self.latency} clocks")
        if self.fmax_mhz is not None:
            lines.append(f"  maximum clock (nextpnr, seed {self.seed}): {self.fmax_mhz:.2f} MHz")
        verdict = self.clock_verdict()
        if verdict is not None:
            lines.append("  " + verdict)
        lines.append("  tools: " + "; ".join(self.tools.values()))
        lines.append("  " + CAUTION)
        return "\n".join(lines)
