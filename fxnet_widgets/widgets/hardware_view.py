"""What the hardware panel and the report show of one synthesis result, as plain data, text and HTML.

Pure functions (no widgets): the panel (:mod:`.hardware`) and the report
(:mod:`fxnet_widgets.report._hardware`) draw the same rows and verdicts from them.
"""

from __future__ import annotations

import shutil
from dataclasses import dataclass

from ..core.synth import SynthesisResult, target
from ..core.synth.tools import PACKAGES

__all__ = ["ResourceRow", "resource_rows", "clock_verdict", "bar_html", "missing_tools", "tools_line", "settings_of",
           "clock_of"]

_NAMES = {"luts": "LUTs", "ffs": "flip-flops", "brams": "block RAMs", "dsps": "DSP blocks"}


@dataclass(frozen=True)
class ResourceRow:
    """One resource: calibrated estimate (None: none for it), measured count, device capacity and share."""

    key: str
    name: str
    estimated: int | None
    measured: int
    capacity: int | None

    @property
    def share(self) -> float | None:
        """Measured as a percentage of the device's capacity (None without a device)."""
        return 100.0 * self.measured / self.capacity if self.capacity else None

    @property
    def over(self) -> bool:
        return self.capacity is not None and self.measured > self.capacity

    def text(self) -> str:
        est = f"estimated {self.estimated}, " if self.estimated is not None else ""
        share = f" of {self.capacity} ({self.share:.1f} %)" if self.share is not None else ""
        return f"{self.name}: {est}measured {self.measured}{share}"


def resource_rows(result: SynthesisResult, estimates: dict[str, int] | None) -> list[ResourceRow]:
    """LUTs, flip-flops, block RAMs and DSP blocks of ``result`` beside the estimates (``{key: count}``)."""
    est = estimates or {}
    return [ResourceRow(k, _NAMES[k], est.get(k), used, cap) for k, (used, cap) in result.use().items()]


def clock_verdict(result: SynthesisResult) -> str | None:
    """The maximum clock against the required one: met / NOT met with the margin; None without a clock."""
    if result.clock_mhz is None:
        return None
    wanted = clock_of(result)
    if result.meets_clock is None or result.fmax_mhz is None or result.margin is None:
        why = ("the design does not fit" if not result.fits else "no place and route for this target"
               if "nextpnr-ice40" not in result.tools else "no register-to-register path")  # fmt: skip
        return f"required clock {wanted}: not timed ({why})"
    slack = result.fmax_mhz - result.clock_mhz
    if result.meets_clock:
        return f"required clock {wanted}: met (margin x{result.margin:.2f}, {slack:.2f} MHz to spare)"
    return f"required clock {wanted}: NOT met (margin x{result.margin:.2f}, {-slack:.2f} MHz short)"


def bar_html(share: float | None, over: bool, width: int = 120) -> str:
    """A horizontal utilisation bar (red above 100 %) and its percentage; "-" without a device."""
    if share is None:
        return "-"
    colour = "#b00020" if over else "#4a7fb5"
    return (f"<div class='fxnet-bar' style='display:inline-block;vertical-align:middle;width:{width}px;"
            f"background:#eee'><div style='width:{min(share, 100.0):.0f}%;height:8px;background:{colour}'></div>"
            f"</div> {share:.1f} %")  # fmt: skip


def missing_tools(target_name: str) -> list[str]:
    """The tools a synthesis for ``target_name`` needs that are not on PATH (a PATH look-up, no tool run)."""
    needed = ["yosys"] + (["nextpnr-ice40"] if target(target_name).places else [])
    return [name for name in needed if shutil.which(name) is None]


def tools_line(target_name: str) -> str:
    """One line naming the missing tools and their Debian packages ("" when all are there)."""
    gone = missing_tools(target_name)
    if not gone:
        return ""
    pkgs = [PACKAGES.get(n, n) for n in gone]
    verb = "is" if len(gone) == 1 else "are"
    return (f"cannot synthesize for {target_name}: {' and '.join(gone)} {verb} not installed "
            f"(Debian package{'s' if len(gone) > 1 else ''} {', '.join(pkgs)}: apt-get install {' '.join(pkgs)})")


def clock_of(result: SynthesisResult) -> str:
    """The clock a result was computed for, in words ("74.25 MHz (1280x720p60)", "no clock")."""
    if result.clock_mhz is None:
        return "no clock"
    return f"{result.clock_mhz:g} MHz" + (f" ({result.video})" if result.video else "")


def settings_of(result: SynthesisResult) -> str:
    """The target, device and clock a result was computed for, in words."""
    return f"{result.target} ({result.device}), {clock_of(result)}"
