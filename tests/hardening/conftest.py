"""Hardening tests: make the shared helpers importable and report the generated cases."""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

from _hardening_support import COUNTS  # noqa: E402


def pytest_terminal_summary(terminalreporter, exitstatus, config):  # noqa: ARG001
    if not COUNTS:
        return
    terminalreporter.section("hardening: generated cases")
    for name, n in sorted(COUNTS.items()):
        terminalreporter.write_line(f"{n:7d}  {name}")
    terminalreporter.write_line(f"{sum(COUNTS.values()):7d}  total")
