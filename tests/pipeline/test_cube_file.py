"""indices.parquet written from the cube one key at a time, read back by pandas and pyarrow
(the reference readers) as the same long table the cube describes."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

from impactlink.indices import IndexCube
from impactlink.pipeline.publish import write_cube_parquet
from impactlink.pipeline.state import CubeFile


def _cube() -> IndexCube:
    rng = np.random.default_rng(5)
    weeks = pd.date_range("2001-01-01", periods=30, freq="7D")  # Mondays
    ids = ("19001", "19003", "08005")  # kept as text, leading zero included
    arrays = {}
    for key in (("spi", 4), ("spei", 13), ("soil_moisture", 0)):
        a = rng.normal(size=(len(weeks), len(ids)))
        a[: key[1] // 2] = np.nan  # spin-up of the accumulation
        arrays[key] = a
    return IndexCube(weeks, ids, arrays, {})


def test_the_file_is_the_cubes_long_table_in_float32(tmp_path, monkeypatch):
    cube = _cube()
    want = cube.to_frame()
    monkeypatch.setattr(IndexCube, "to_frame", lambda *a, **k: pytest.fail("built the frame"))
    write_cube_parquet(CubeFile(cube), tmp_path / "indices.parquet")
    got = pd.read_parquet(tmp_path / "indices.parquet")
    assert list(got.columns) == ["county_id", "week", "index", "scale_weeks", "value"]
    assert got[["county_id", "index"]].astype(str).equals(want[["county_id", "index"]].astype(str))
    assert (pd.to_datetime(got["week"]) == pd.to_datetime(want["week"])).all()
    assert (got["scale_weeks"].to_numpy() == want["scale_weeks"].to_numpy()).all()
    assert got["value"].dtype == np.float32
    assert np.array_equal(np.isnan(got["value"]), np.isnan(want["value"]))
    # float32 rounding: relative error at most 2**-24 (IEEE 754 binary32)
    np.testing.assert_allclose(got["value"], want["value"], rtol=2.0 ** -24, equal_nan=True)
    assert isinstance(got["index"].dtype, pd.CategoricalDtype)


def test_one_row_group_per_key_and_nan_as_null(tmp_path):
    cube = _cube()
    path = tmp_path / "indices.parquet"
    write_cube_parquet(CubeFile(cube), path)
    meta = pq.ParquetFile(path).metadata
    assert meta.num_row_groups == 3 and meta.num_rows == 3 * 30 * 3
    nulls = sum(meta.row_group(g).column(4).statistics.null_count for g in range(3))
    assert nulls == sum(int(np.isnan(a).sum()) for a in cube.arrays.values())
    spi = pd.read_parquet(path, filters=[("index", "==", "spi")])  # one key, read alone
    assert len(spi) == 30 * 3 and set(spi["index"].astype(str)) == {"spi"}


def test_monthly_names_and_same_bytes_twice(tmp_path):
    cube = _cube()
    a, b = tmp_path / "a.parquet", tmp_path / "b.parquet"
    for p in (a, b):
        write_cube_parquet(CubeFile(cube, time_col="month", scale_col="scale_months"), p)
    assert a.read_bytes() == b.read_bytes()
    assert {"month", "scale_months"} <= set(pd.read_parquet(a).columns)
