"""A dask.distributed client runs sweeps and tune with results equal to local ones."""

import pytest

from fxnet_widgets.core.analysis import SerialExecutor, sweep, tune

distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, silence_logs=40
    )
    c = distributed.Client(cluster)
    yield c
    c.close()
    cluster.close()


def test_dask_local_cluster_equals_local(net, codes, client):
    grid = {"weight_frac": [2, 3, 4], "table_bits": [6, 8]}
    local = sweep(net, codes, grid, executor=SerialExecutor())
    assert sweep(net, codes, grid, executor=client) == local
    assert sweep(net, codes, grid, executor=client.get_executor()) == local


def test_dask_tune_equals_local(net, codes, client):
    small = codes[:800]
    a = tune(net, small, 0.02, executor=SerialExecutor())
    b = tune(net, small, 0.02, executor=client)
    assert a.plan == b.plan and a.steps == b.steps and a.records == b.records
