"""Tests that need an outside tool: skip on a developer machine, fail in CI (``FXNET_REQUIRE_TOOLS=1``)."""

from __future__ import annotations

import os

import pytest


def require_tools() -> bool:
    """True when a missing tool must fail the test (CI sets ``FXNET_REQUIRE_TOOLS=1``)."""
    return os.environ.get("FXNET_REQUIRE_TOOLS", "") not in ("", "0")


def missing(reason: str) -> None:
    """Skip with ``reason`` on a developer machine; fail in CI."""
    if require_tools():
        pytest.fail(f"{reason} (FXNET_REQUIRE_TOOLS=1: a missing tool is a failure)", pytrace=False)
    pytest.skip(reason)
