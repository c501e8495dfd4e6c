"""Progress callbacks: ``progress(done, total)`` after each finished chunk of plans."""

from __future__ import annotations

import sys
import threading
from collections.abc import Callable
from typing import TextIO

__all__ = ["Progress", "text_progress"]

#: ``progress(done, total)``: called with 0 first, then after each finished chunk
Progress = Callable[[int, int], None]


def text_progress(stream: TextIO | None = None, width: int = 30, label: str = "plans") -> Progress:
    """A progress callback drawing a text bar (``[#####.....] 12/40 plans``) on ``stream``.

    ``stream`` defaults to ``sys.stderr``; the bar is redrawn in place and ends
    with a newline when ``done == total``.

    >>> import io
    >>> buf = io.StringIO()
    >>> text_progress(buf, width=4)(4, 4)
    >>> buf.getvalue()
    '\\r[####] 4/4 plans\\n'
    """
    lock = threading.Lock()

    def report(done: int, total: int) -> None:
        out = stream if stream is not None else sys.stderr
        filled = width if total <= 0 else int(width * done / total)
        with lock:
            out.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {done}/{total} {label}")
            if done >= total:
                out.write("\n")
            out.flush()

    return report
