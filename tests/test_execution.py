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
    on_dask = map_tasks(_seeded_mean, TASKS, dask_address="local")
    assert serial == on_dask
