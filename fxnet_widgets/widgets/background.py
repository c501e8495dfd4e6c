"""One background run at a time for a panel: its thread, its stop flag, ``running``, ``stop()`` and ``join()``.

The refine and search panels mix this in: each starts ``self._thread`` itself, sets
``self._running`` while its work is in progress (the work clears it last, after any
hand-back to the kernel's thread), and reads ``self._stop`` between steps.
"""

from __future__ import annotations

import threading

__all__ = ["BackgroundRun"]


class BackgroundRun:
    """``running`` / ``stop()`` / ``join()`` over ``_thread``, ``_stop`` and ``_running`` (see the module text)."""

    def _init_run(self) -> None:
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._running = False

    @property
    def running(self) -> bool:
        return self._running

    def stop(self) -> None:
        """Ask the run to end at its next step (what is kept is the panel's to say)."""
        self._stop.set()

    def join(self, timeout: float | None = None) -> bool:
        """Wait for a background run; True when none is running any more."""
        t = self._thread
        if t is not None:
            t.join(timeout)
        return not self._running
