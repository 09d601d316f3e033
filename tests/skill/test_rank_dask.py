"""The candidate grid gives the same table on a local Dask cluster as in-process."""

from __future__ import annotations

import warnings

import pandas as pd
import pytest

from impactlink.skill import SkillWarning, rank_candidates

from . import synth


def test_same_table_on_a_local_dask_cluster():
    pytest.importorskip("distributed")
    tgt, feats = synth.planted_target(3)
    kw = dict(n_boot=20, pairs=False, challenger=False, seed=7)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SkillWarning)
        a = rank_candidates(tgt, feats, synth.candidates(), **kw)
        try:
            b = rank_candidates(tgt, feats, synth.candidates(), dask_address="local", **kw)
        finally:
            from impactlink.execution import close_local_cluster

            close_local_cluster()
    pd.testing.assert_frame_equal(a.table, b.table)
    pd.testing.assert_frame_equal(a.summary, b.summary)


def test_same_table_when_a_worker_is_killed_mid_grid():
    """A real two-process cluster on loopback; after the first chunk of fits comes back one
    worker process is killed (SIGKILL; its nanny starts another). The scheduler recomputes
    the chunks the dead worker held (dask.distributed's documented resilience), so the
    candidate grid comes back complete, once per chunk, and the table equals the
    in-process one."""
    distributed = pytest.importorskip("distributed")
    import os
    import signal

    tgt, feats = synth.planted_target(4)
    kw = dict(n_boot=20, pairs=True, challenger=False, seed=3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SkillWarning)
        a = rank_candidates(tgt, feats, synth.candidates(), **kw)
        with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                      host="127.0.0.1", dashboard_address="127.0.0.1:0"
                                      ) as cluster, distributed.Client(cluster) as client:
            client.wait_for_workers(2)
            victim = sorted(client.scheduler_info()["workers"])[0]
            pid = client.run(os.getpid, workers=[victim])[victim]
            killed: list[str] = []

            def kill_once(line: str) -> None:
                if not killed:
                    killed.append(line)
                    os.kill(pid, signal.SIGKILL)

            b = rank_candidates(tgt, feats, synth.candidates(), progress=kill_once,
                                dask_address=cluster.scheduler_address, **kw)
            after = set(client.scheduler_info()["workers"])
    assert killed and victim not in after
    pd.testing.assert_frame_equal(a.table, b.table)
    pd.testing.assert_frame_equal(a.summary, b.summary)


def _reader(tgt, seed):
    """The synthetic world as an index cube, read through the pipeline's FeatureReader."""
    from impactlink.indices.cube import IndexCube
    from impactlink.link.features import feature_reader

    arrays, n_weeks, spin = synth.world(seed)
    weeks = pd.date_range(pd.Timestamp("2001-01-01") - pd.Timedelta(weeks=spin),
                          periods=n_weeks, freq="7D")
    cube = IndexCube(weeks, tuple(f"c{c:02d}" for c in range(12)), arrays)
    return cube, feature_reader(tgt, cube)


def test_feature_reader_on_a_cluster_sends_the_cube_once_per_session():
    """The pipeline's path: a FeatureReader (cube arrays + row positions) as features, the
    histograms built on a real two-worker cluster, two targets in one session. The reader
    reads what the synthetic world's own gather reads; the tables equal the in-process ones
    made with that gather; the cube is scattered once for both targets."""
    distributed = pytest.importorskip("distributed")
    import numpy as np

    from impactlink import execution

    kw = dict(n_boot=20, pairs=True, challenger=False, seed=5)
    binary, feats = synth.planted_target(3)
    ordinal, _ = synth.planted_target(3, kind="ordinal")
    cube, rd_bin = _reader(binary, 3)
    from impactlink.link.features import feature_reader

    rd_ord = feature_reader(ordinal, cube)
    for c in synth.candidates():
        np.testing.assert_array_equal(rd_bin(*c), feats(*c))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SkillWarning)
        ref = [rank_candidates(t, feats, synth.candidates(), **kw) for t in (binary, ordinal)]
        with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                      host="127.0.0.1", dashboard_address="127.0.0.1:0"
                                      ) as cluster:
            addr = cluster.scheduler_address
            with execution.dask_session(addr):
                a = rank_candidates(binary, rd_bin, synth.candidates(), dask_address=addr,
                                    **kw)
                sent = execution._MEMOS[addr][id(cube.arrays)][1]
                b = rank_candidates(ordinal, rd_ord, synth.candidates(), dask_address=addr,
                                    **kw)
                assert execution._MEMOS[addr][id(cube.arrays)][1] is sent
    for r, got in zip(ref, (a, b), strict=True):
        pd.testing.assert_frame_equal(r.table, got.table)
        pd.testing.assert_frame_equal(r.summary, got.summary)
