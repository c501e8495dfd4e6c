"""Run code in a Jupyter kernel through a jupyter_client client and collect its stdout (tests only)."""

from __future__ import annotations

import time
from typing import Any


def run_code(kc: Any, code: str, timeout: float = 60, seen: list | None = None) -> str:
    """Execute ``code`` on client ``kc``; its stdout once the kernel is idle again.

    An error in the code raises AssertionError with its traceback; so does no answer within
    ``timeout`` seconds. Every iopub message of other requests read meanwhile goes to ``seen``.
    """
    msg_id = kc.execute(code)
    out = []
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        m = kc.get_iopub_msg(timeout=timeout)
        if m["parent_header"].get("msg_id") != msg_id:
            if seen is not None:
                seen.append(m)
            continue
        if m["msg_type"] == "stream":
            out.append(m["content"]["text"])
        elif m["msg_type"] == "error":
            raise AssertionError("\n".join(m["content"]["traceback"]))
        elif m["msg_type"] == "status" and m["content"]["execution_state"] == "idle":
            return "".join(out)
    raise AssertionError(f"the kernel did not answer within {timeout:.0f} s")
