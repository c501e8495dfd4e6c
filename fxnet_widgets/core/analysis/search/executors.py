"""Where the plans are evaluated: this process, a local process pool, or any executor.

The number of workers only decides how many chunks the plans are cut into
(a hint; results never depend on it). It is read through documented
interfaces only: a pool made here knows its own size, a ``dask.distributed``
``Client`` reports its threads (``Client.nthreads()``), and for any other
:class:`concurrent.futures.Executor` the count of this machine's CPUs stands in.

>>> with Runner(SerialExecutor(), work=10) as r:
...     r.workers
1
"""

from __future__ import annotations

import concurrent.futures as cf
import multiprocessing
import multiprocessing.context
import os
import sys
from collections.abc import Callable
from types import TracebackType
from typing import Any

__all__ = ["INLINE_WORK", "Runner", "SerialExecutor", "as_executor", "local_pool", "worker_count"]

#: below this many sample-evaluations (plans x samples), ``executor=None`` runs in
#: this process: starting workers would cost more than it saves
INLINE_WORK = 2_000_000


class SerialExecutor(cf.Executor):
    """An :class:`~concurrent.futures.Executor` that runs each task at once, in this process."""

    def submit(self, fn: Callable[..., Any], /, *args: Any, **kwargs: Any) -> cf.Future[Any]:
        """Run ``fn(*args, **kwargs)`` now; its result (or exception) is in the returned future."""
        fut: cf.Future[Any] = cf.Future()
        try:
            fut.set_result(fn(*args, **kwargs))
        except BaseException as exc:  # handed to the caller through the future
            fut.set_exception(exc)
        return fut


class _LocalPool(cf.ProcessPoolExecutor):
    """A process pool that remembers the ``max_workers`` it was made with."""

    def __init__(self, workers: int, ctx: multiprocessing.context.BaseContext) -> None:
        super().__init__(max_workers=workers, mp_context=ctx)
        self.workers = workers


def local_pool(workers: int) -> cf.Executor:
    """A process pool of ``workers``: forkserver where available, else spawn.

    Both re-import the main script in each worker (so a script needs the usual
    ``if __name__ == "__main__":`` guard); when the main module has no file to
    re-import (code piped on stdin), POSIX systems fork instead.
    """
    methods = multiprocessing.get_all_start_methods()
    main_file = getattr(sys.modules.get("__main__"), "__file__", None)
    spec = getattr(sys.modules.get("__main__"), "__spec__", None)
    ctx: multiprocessing.context.BaseContext
    if spec is None and main_file is not None and not os.path.isfile(main_file) and "fork" in methods:
        ctx = multiprocessing.get_context("fork")
    elif sys.platform != "win32" and "forkserver" in methods:
        ctx = multiprocessing.get_context("forkserver")
        assert __package__ is not None
        ctx.set_forkserver_preload([__package__])
    else:
        ctx = multiprocessing.get_context("spawn")
    return _LocalPool(workers, ctx)


def _is_dask_client(obj: Any) -> bool:
    return hasattr(obj, "get_executor") and hasattr(obj, "nthreads") and hasattr(obj, "submit")


def worker_count(executor: Any) -> int:
    """How many tasks ``executor`` runs at once, as far as documented interfaces tell.

    1 for :class:`SerialExecutor`; the size of a :func:`local_pool`; the sum of
    ``Client.nthreads()`` of a ``dask.distributed`` client; otherwise the number
    of CPUs of this machine (a hint for cutting work into chunks).
    """
    if isinstance(executor, SerialExecutor):
        return 1
    if isinstance(executor, _LocalPool):
        return executor.workers
    if _is_dask_client(executor):
        try:
            return max(1, int(sum(executor.nthreads().values())))
        except Exception:  # noqa: BLE001 - a count is only a hint for chunking
            pass
    return os.cpu_count() or 1


def as_executor(executor: Any) -> cf.Executor:
    """``executor`` itself, or the ``concurrent.futures`` face of a ``dask.distributed`` client."""
    if isinstance(executor, cf.Executor):
        return executor
    if _is_dask_client(executor):
        return executor.get_executor()
    raise TypeError(f"executor must be a concurrent.futures.Executor or a dask Client, not {type(executor).__name__}")


class Runner:
    """The executor of one sweep or tune; owns (and closes) a default local pool.

    ``executor`` None picks this process for small ``work`` (plans x samples below
    :data:`INLINE_WORK`) or a machine with one CPU, else a local pool of every
    CPU. A ``dask.distributed`` ``Client`` is used through ``Client.get_executor()``.
    """

    def __init__(self, executor: Any, work: int) -> None:
        self.owned = False
        if executor is None:
            if work < INLINE_WORK or (os.cpu_count() or 1) < 2:
                self.executor: cf.Executor = SerialExecutor()
            else:
                self.executor = local_pool(os.cpu_count() or 1)
                self.owned = True
            self.workers = worker_count(self.executor)
        else:
            self.executor = as_executor(executor)
            self.workers = worker_count(executor)

    @property
    def serial(self) -> bool:
        """True when the tasks run in this process, one after the other."""
        return isinstance(self.executor, SerialExecutor)

    @property
    def local(self) -> bool:
        """True for a :func:`local_pool` (workers on this machine: the data can go through shared memory)."""
        return isinstance(self.executor, _LocalPool)

    def close(self) -> None:
        """Shut down the pool if this runner made it."""
        if self.owned:
            self.executor.shutdown(wait=True)

    def __enter__(self) -> Runner:
        return self

    def __exit__(self, typ: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None) -> None:
        self.close()
