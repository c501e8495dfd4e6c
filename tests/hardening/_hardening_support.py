"""Shared helpers of the hardening tests: case counters, example budgets, error checks."""

from __future__ import annotations

import atexit
import os
import shutil
import tempfile
from collections import Counter
from pathlib import Path

from fxnet_widgets.core.fileio import FileFormatError

#: generated cases per test (reported at the end of the run by ``conftest.py``)
COUNTS: Counter[str] = Counter()

#: the long profile (``FXNET_HYPOTHESIS_PROFILE=long``) multiplies every budget by this
LONG_FACTOR = 10


def examples(n: int) -> int:
    """The example budget of one test: ``n``, or ``n * LONG_FACTOR`` under the long profile."""
    return n * LONG_FACTOR if os.environ.get("FXNET_HYPOTHESIS_PROFILE") == "long" else n


def count(name: str) -> None:
    """Count one generated case of test ``name``."""
    COUNTS[name] += 1


#: the documented errors of bad input (architecture.md, "Errors"; fileio.FileFormatError)
DOCUMENTED = (TypeError, ValueError, FileFormatError)


def check_message(exc: BaseException, prefix: str | None = None) -> str:
    """Assert a documented error with one clear line (optionally starting with ``prefix``)."""
    assert isinstance(exc, DOCUMENTED), f"undocumented error {type(exc).__name__}: {exc}"
    msg = str(exc)
    assert msg and msg.strip() == msg, f"empty or padded message {msg!r}"
    assert "\n" not in msg and "\r" not in msg, f"message is not one line: {msg!r}"
    assert "Traceback" not in msg, msg
    if prefix is not None:
        assert msg.startswith(prefix), f"message does not start with {prefix!r}: {msg!r}"
    return msg


def scratch_dir(prefix: str) -> Path:
    """A scratch directory for thousands of small files (a RAM disk where there is one), removed at exit."""
    ram = "/dev/shm" if os.access("/dev/shm", os.W_OK) else None
    path = Path(tempfile.mkdtemp(prefix=prefix, dir=ram))
    atexit.register(shutil.rmtree, path, True)
    return path
