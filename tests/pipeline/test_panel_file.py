"""panel.parquet written one target at a time, read back by pandas (the reference reader) as
the table ``pandas.concat`` of the targets' frames gives (:func:`impactlink.link.panel_frame`)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

from impactlink.link import Target, panel_frame
from impactlink.pipeline.publish import write_panel_parquet
from impactlink.pipeline.state import PanelFile


def _targets() -> tuple[Target, ...]:
    weeks = pd.date_range("2001-01-01", periods=6, freq="7D")
    county = pd.DataFrame({
        "unit_id": ["19001", "08005"] * 3, "county_id": ["19001", "08005"] * 3,
        "region": ["North"] * 6, "time": np.repeat(weeks[:3], 2),
        "year": np.full(6, 2001, np.int64), "season": np.repeat([1, 2, 3], 2),
        "level": [0, 1, 0, 2, 1, 0], "open_end": [True, False] * 3,
        "persistence_2": [np.nan, 0, 1, 0, 2, 1.0]})
    region = pd.DataFrame({
        "unit_id": ["North", "South"], "region": ["North", "South"],
        "time": pd.to_datetime(["2001-01-01", "2001-02-01"]),
        "year": np.array([2001, 2001], np.int32), "season": np.array([1, 2], np.int32),
        "level": [1, 0], "anomaly_pct": [12.5, -3.0]})
    return (Target("restrictions:state", "restrictions", "ordinal", "county_week", "state",
                   county, ("none", "1", "2")),
            Target("hay", "hay", "binary", "region_month", "monthly", region, ("no", "yes")),
            Target("empty", "empty", "binary", "county_week", "state", county.iloc[:0],
                   ("no", "yes")))


def test_the_file_is_the_concatenated_panel(tmp_path, monkeypatch):
    targets = _targets()
    want = panel_frame(targets)
    path = tmp_path / "panel.parquet"
    write_panel_parquet(PanelFile(targets), path)
    got = pd.read_parquet(path)
    assert list(got.columns) == list(want.columns)
    assert len(got) == len(want) == len(PanelFile(targets))
    for col in want.columns:  # same values, nulls where a target lacks the column
        a, b = got[col], want[col]
        assert np.array_equal(a.isna().to_numpy(), b.isna().to_numpy()), col
        keep = b.notna().to_numpy()
        if pd.api.types.is_numeric_dtype(b.dtype) and not pd.api.types.is_bool_dtype(b.dtype):
            np.testing.assert_array_equal(a[keep].astype(float), b[keep].astype(float))
        else:
            assert a[keep].astype(str).tolist() == b[keep].astype(str).tolist(), col
    assert pq.ParquetFile(path).metadata.num_row_groups == 3  # one per target


def test_never_builds_the_whole_panel(tmp_path, monkeypatch):
    import impactlink.link as link

    real = link.panel_frame

    def one_at_a_time(targets):
        targets = list(targets)
        if len(targets) > 1:
            pytest.fail("built the whole panel")
        return real(targets)

    monkeypatch.setattr(link, "panel_frame", one_at_a_time)
    a, b = tmp_path / "a.parquet", tmp_path / "b.parquet"
    for p in (a, b):
        write_panel_parquet(PanelFile(_targets()), p)
    assert a.read_bytes() == b.read_bytes()  # deterministic bytes
