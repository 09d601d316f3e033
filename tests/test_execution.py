"""The execution layer gives identical results in-process, on a process pool and on Dask."""

import numpy as np
import pytest

from impactlink.execution import map_tasks


def _seeded_mean(task):
    seed, n = task
    return float(np.random.default_rng(seed).normal(size=n).mean())


TASKS = [(s, 1000) for s in range(6)]


def test_process_pool_equals_in_process():
    lines = []
    serial = map_tasks(_seeded_mean, TASKS, progress=lines.append, label="demo")
    pooled = map_tasks(_seeded_mean, TASKS, jobs=2)
    assert serial == pooled
    assert lines[-1] == "demo: 6/6"


def test_empty_task_list():
    assert map_tasks(_seeded_mean, []) == []


def test_local_dask_cluster_equals_in_process():
    pytest.importorskip("distributed")
    serial = map_tasks(_seeded_mean, TASKS)
    from impactlink import execution

    on_dask = map_tasks(_seeded_mean, TASKS, dask_address="local")
    cluster = execution._LOCAL["cluster"]
    again = map_tasks(_seeded_mean, TASKS, dask_address="local")  # the same local cluster
    assert execution._LOCAL["cluster"] is cluster
    execution.close_local_cluster()
    assert serial == on_dask == again and not execution._LOCAL


def _slow_square(task):
    """A task that takes long enough for a worker to die while tasks are in flight."""
    import time

    time.sleep(0.25)
    return task * task


def test_worker_killed_mid_run_loses_and_duplicates_nothing():
    # A real two-process local cluster on loopback. After the first results arrive, one
    # worker process is killed with SIGKILL (its nanny starts a new one); the scheduler
    # reschedules the tasks the dead worker held (dask.distributed documents this as
    # "resilience": lost tasks are recomputed elsewhere), and map_tasks still returns
    # every result exactly once, in task order.
    distributed = pytest.importorskip("distributed")
    import os
    import signal

    tasks = list(range(24))
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address="127.0.0.1:0") as cluster:
        with distributed.Client(cluster) as killer:
            killer.wait_for_workers(2)
            before = set(killer.scheduler_info()["workers"])
            victim = sorted(before)[0]
            pid = killer.run(os.getpid, workers=[victim])[victim]
            killed = []

            def kill_once(line: str) -> None:
                if not killed:
                    killed.append(line)
                    os.kill(pid, signal.SIGKILL)

            out = map_tasks(_slow_square, tasks, dask_address=cluster.scheduler_address,
                            progress=kill_once, label="squares")
            after = set(killer.scheduler_info()["workers"])
    assert killed  # the kill was sent while tasks were still running
    assert victim not in after  # the victim process really died
    assert out == [t * t for t in tasks]  # nothing lost, nothing duplicated, in order


def _plus_shared(task, base, scale):
    seed, n = task
    return float(np.random.default_rng(seed).normal(size=n).mean() * scale + base.sum())


def test_shared_objects_reach_every_engine_and_travel_once():
    # fn(task, *shared) on each engine gives the in-process values; on Dask the shared
    # array is scattered once and found again by identity on the next call
    pytest.importorskip("distributed")
    from impactlink import execution

    base = np.arange(5.0)
    serial = map_tasks(_plus_shared, TASKS, shared=(base, 2.0))
    assert serial == [_plus_shared(t, base, 2.0) for t in TASKS]
    pooled = map_tasks(_plus_shared, TASKS, jobs=2, shared=(base, 2.0))
    try:
        on_dask = map_tasks(_plus_shared, TASKS, dask_address="local", shared=(base, 2.0))
        fut = execution._MEMOS["local"][id(base)][1]
        again = map_tasks(_plus_shared, TASKS, dask_address="local", shared=(base, 3.0))
        assert execution._MEMOS["local"][id(base)][1] is fut  # not scattered again
    finally:
        execution.close_local_cluster()
    assert serial == pooled == on_dask
    assert again == map_tasks(_plus_shared, TASKS, shared=(base, 3.0))
    assert "local" not in execution._MEMOS


def test_a_session_keeps_one_client_and_closes_it():
    distributed = pytest.importorskip("distributed")
    from impactlink import execution

    base = np.ones(3)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address="127.0.0.1:0") as cluster:
        addr = cluster.scheduler_address
        with execution.dask_session(addr):
            client = execution._CLIENTS[addr]
            a = map_tasks(_plus_shared, TASKS, dask_address=addr, shared=(base, 1.0))
            b = map_tasks(_plus_shared, TASKS, dask_address=addr, shared=(base, 1.0))
            assert execution._CLIENTS[addr] is client and len(execution._MEMOS[addr]) == 2
        assert addr not in execution._CLIENTS and addr not in execution._MEMOS
        c = map_tasks(_plus_shared, TASKS, dask_address=addr, shared=(base, 1.0))  # no session
        assert addr not in execution._CLIENTS
    assert a == b == c == map_tasks(_plus_shared, TASKS, shared=(base, 1.0))
