"""Running the open-source tools: found on PATH, versions captured, timeouts, cancellation.

A missing tool is one line naming the Debian package that provides it; a tool
that fails gives its last lines of output in the error.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import threading
import time
from collections.abc import Sequence
from pathlib import Path

__all__ = ["ToolError", "SynthesisCancelled", "PACKAGES", "tool_path", "tool_version", "run_tool"]

#: Debian package of each tool (packages.debian.org, common practice)
PACKAGES = {"yosys": "yosys", "nextpnr-ice40": "nextpnr-ice40"}

_POLL_SECONDS = 0.05
_TAIL_LINES = 12
_versions: dict[str, str] = {}
_versions_lock = threading.Lock()


class ToolError(RuntimeError):
    """A tool is missing, failed or ran out of time (the message is one line, plus the tool's last lines)."""


class SynthesisCancelled(RuntimeError):
    """The run was stopped through its ``cancel`` event."""


def tool_path(name: str) -> str:
    """The executable of ``name`` on PATH, or a :class:`ToolError` naming its Debian package."""
    found = shutil.which(name)
    if found is None:
        pkg = PACKAGES.get(name, name)
        raise ToolError(f"{name} must be installed to synthesize (Debian package {pkg}: apt-get install {pkg})")
    return found


def tool_version(name: str) -> str:
    """The first line the tool prints for its version (``yosys -V``, ``nextpnr-ice40 --version``), cached."""
    exe = tool_path(name)
    with _versions_lock:
        if exe in _versions:
            return _versions[exe]
    flag = "-V" if name == "yosys" else "--version"
    try:
        done = subprocess.run([exe, flag], capture_output=True, text=True, timeout=30, check=False)
    except (OSError, subprocess.TimeoutExpired) as exc:
        raise ToolError(f"{name} {flag} must print a version, but it failed ({exc})") from None
    lines = [ln.strip() for ln in (done.stdout + "\n" + done.stderr).splitlines() if ln.strip()]
    if done.returncode != 0 or not lines:
        raise ToolError(f"{name} {flag} must print a version, not exit with code {done.returncode}")
    version = lines[0]
    with _versions_lock:
        _versions[exe] = version
    return version


def _tail(path: Path, lines: int = _TAIL_LINES) -> str:
    try:
        text = path.read_text("utf-8", errors="replace")
    except OSError:
        return ""
    kept = [ln for ln in text.splitlines() if ln.strip()]
    errors = [ln for ln in kept[:-lines] if "ERROR" in ln][-4:]  # an error the tool reported before its last lines
    return "\n".join("  " + ln for ln in errors + kept[-lines:])


def run_tool(
    name: str,
    args: Sequence[str],
    cwd: str | os.PathLike[str],
    *,
    timeout: float,
    cancel: threading.Event | None = None,
    log: str | None = None,
) -> Path:
    """Run tool ``name`` with ``args`` in ``cwd``; return the path of its log (stdout and stderr).

    Raises :class:`ToolError` when the tool is missing, exits non-zero (with its last
    log lines) or runs longer than ``timeout`` seconds, and :class:`SynthesisCancelled`
    when ``cancel`` is set while it runs; the process is killed in both of the last cases.
    """
    exe = tool_path(name)
    log_path = Path(cwd) / (log or f"{name}.log")
    start = time.monotonic()
    with open(log_path, "wb") as fh:
        proc = subprocess.Popen(
            [exe, *args], cwd=cwd, stdout=fh, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
            start_new_session=True,
        )  # fmt: skip
        try:
            while proc.poll() is None:
                if cancel is not None and cancel.is_set():
                    raise SynthesisCancelled(f"{name} was stopped")
                if time.monotonic() - start > timeout:
                    raise ToolError(f"{name} must finish within {timeout:g} s, but it ran out of time\n"
                                    + _tail(log_path))  # fmt: skip
                time.sleep(_POLL_SECONDS)
        finally:
            if proc.poll() is None:
                proc.kill()
                proc.wait()
    if proc.returncode < 0:
        raise ToolError(f"{name} must succeed, but it crashed (signal {-proc.returncode}), a fault of the tool "
                        "itself; for a generated datapath try products='shift-add'; its last lines:\n"
                        + _tail(log_path))  # fmt: skip
    if proc.returncode != 0:
        raise ToolError(f"{name} must succeed, but it exited with code {proc.returncode}; its last lines:\n"
                        + _tail(log_path))  # fmt: skip
    return log_path
