"""Hardware evidence from open-source tools: Yosys synthesis and nextpnr-ice40 place and route.

Figures from these tools are estimates for the named device and tool version, not
sign-off (:data:`CAUTION`).
"""

from __future__ import annotations

from .flow import FLOW_VERSION, default_cache_dir, synthesize
from .result import CAUTION, SynthesisResult
from .targets import TARGETS, Target, target
from .tools import SynthesisCancelled, ToolError, tool_version

__all__ = [
    "CAUTION", "FLOW_VERSION", "TARGETS", "SynthesisCancelled", "SynthesisResult", "Target", "ToolError",
    "default_cache_dir", "synthesize", "target", "tool_version",
]  # fmt: skip
