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
        b = rank_candidates(tgt, feats, synth.candidates(), dask_address="local", **kw)
    pd.testing.assert_frame_equal(a.table, b.table)
    pd.testing.assert_frame_equal(a.summary, b.summary)
