"""What the hardware panel and the report show of one synthesis result, as plain data, text and HTML.

Pure functions (no widgets): the panel (:mod:`.hardware`) and the report
(:mod:`fxnet_widgets.report._hardware`) draw the same rows and verdicts from them.
"""

from __future__ import annotations

import os
import shutil
import time
from dataclasses import dataclass

from ..core.synth import SynthesisResult, target
from ..core.synth.tools import PACKAGES

__all__ = ["ResourceRow", "resource_rows", "bar_html", "missing_tools", "tools_line", "settings_of"]

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


def bar_html(share: float | None, over: bool, width: int = 120) -> str:
    """A horizontal utilisation bar (red above 100 %) and its percentage; "-" without a device."""
    if share is None:
        return "-"
    colour = "#b00020" if over else "#4a7fb5"
    return (f"<div class='fxnet-bar' style='display:inline-block;vertical-align:middle;width:{width}px;"
            f"background:#eee'><div style='width:{min(share, 100.0):.0f}%;height:8px;background:{colour}'></div>"
            f"</div> {share:.1f} %")  # fmt: skip


#: seconds a PATH look-up is reused: the panel redraws on every control change, and a look-up
#: stats each PATH directory (about 0.1 ms a redraw here); a tool installed meanwhile shows this soon
_LOOKUP_SECONDS = 2.0
_FOUND: dict[tuple[str, str], tuple[float, bool]] = {}


def _on_path(name: str) -> bool:
    key, now = (name, os.environ.get("PATH", "")), time.monotonic()
    hit = _FOUND.get(key)
    if hit is None or now - hit[0] > _LOOKUP_SECONDS:
        hit = _FOUND[key] = (now, shutil.which(name) is not None)
    return hit[1]


def missing_tools(target_name: str) -> list[str]:
    """The tools a synthesis for ``target_name`` needs that are not on PATH (a PATH look-up, no tool run;
    reused for a moment under the same PATH)."""
    needed = ["yosys"] + (["nextpnr-ice40"] if target(target_name).places else [])
    return [name for name in needed if not _on_path(name)]


def tools_line(target_name: str) -> str:
    """One line naming the missing tools and their Debian packages ("" when all are there)."""
    gone = missing_tools(target_name)
    if not gone:
        return ""
    pkgs = [PACKAGES.get(n, n) for n in gone]
    verb = "is" if len(gone) == 1 else "are"
    return (f"cannot synthesize for {target_name}: {' and '.join(gone)} {verb} not installed "
            f"(Debian package{'s' if len(gone) > 1 else ''} {', '.join(pkgs)}: apt-get install {' '.join(pkgs)})")


def settings_of(result: SynthesisResult) -> str:
    """The target, device and clock a result was computed for, in words."""
    return f"{result.target} ({result.device}), {result.clock_text()}"
