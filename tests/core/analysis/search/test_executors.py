"""Executors: identical records whatever runs them; the default pool; progress callbacks."""

import concurrent.futures as cf
import io
import os

from fxnet_widgets.core.analysis import SerialExecutor, sweep, text_progress
from fxnet_widgets.core.analysis.search import executors


def test_executors_give_identical_records(net, codes, grid, records):
    with cf.ProcessPoolExecutor(max_workers=2) as ex:
        assert sweep(net, codes, grid, executor=ex) == records
    with cf.ThreadPoolExecutor(max_workers=2) as ex:
        assert sweep(net, codes, grid, executor=ex) == records
    assert sweep(net, codes, grid) == records  # default policy: small work runs in this process


def test_default_local_pool(net, codes, grid, records, monkeypatch):
    monkeypatch.setattr(executors, "INLINE_WORK", 0)  # force the default local process pool
    made = []
    real = executors.local_pool
    monkeypatch.setattr(executors, "local_pool", lambda n: made.append(n) or real(n))
    assert sweep(net, codes, grid) == records
    assert made == [os.cpu_count()]


def test_progress_callback(net, codes):
    calls = []
    sweep(net, codes, {"table_bits": [5, 6, 7]}, executor=SerialExecutor(), progress=lambda d, t: calls.append((d, t)))
    assert calls[0] == (0, 3) and calls[-1] == (3, 3)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
    buf = io.StringIO()
    bar = text_progress(buf, width=10)
    bar(2, 4)
    bar(4, 4)
    assert buf.getvalue() == "\r[#####.....] 2/4 plans\r[##########] 4/4 plans\n"


def test_worker_counts_come_from_documented_interfaces():
    # a pool made here knows its size; an executor of unknown size counts as this machine's CPUs
    # (concurrent.futures documents max_workers only as a constructor argument)
    assert executors.worker_count(SerialExecutor()) == 1
    pool = executors.local_pool(2)
    try:
        assert executors.worker_count(pool) == 2
    finally:
        pool.shutdown()
    with cf.ThreadPoolExecutor(max_workers=2) as ex:
        assert executors.worker_count(ex) == (os.cpu_count() or 1)

    class FakeClient:  # the dask.distributed Client interface used: nthreads(), get_executor(), submit()
        def nthreads(self):
            return {"tcp://a": 2, "tcp://b": 3}

        def get_executor(self):
            return SerialExecutor()

        def submit(self, *a):
            raise AssertionError("the runner submits through get_executor()")

    with executors.Runner(FakeClient(), work=1) as runner:
        assert runner.workers == 5 and runner.serial
