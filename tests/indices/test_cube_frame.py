"""The long frame of an index cube: one column build for all keys equals the per-key frames."""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.indices.cube import IndexCube
from impactlink.schema import COUNTY


def _per_key_frames(cube: IndexCube, keys=None) -> pd.DataFrame:
    """The earlier construction, kept as the reference: one frame per key, concatenated."""
    nw, nc = len(cube.weeks), len(cube.county_ids)
    week_col = np.repeat(cube.weeks.values, nc)
    county_col = np.tile(np.asarray(cube.county_ids, dtype=object), nw)
    parts = [pd.DataFrame({COUNTY: county_col, "week": week_col, "index": key[0],
                           "scale_weeks": np.int16(key[1]), "value": cube.arrays[key].ravel()})
             for key in keys or cube.keys]
    out = pd.concat(parts, ignore_index=True)
    out["index"] = out["index"].astype("category")
    out[COUNTY] = out[COUNTY].astype("string")
    return out


def _cube() -> IndexCube:
    rng = np.random.default_rng(3)
    weeks = pd.date_range("2001-01-01", periods=60, freq="7D")
    ids = ("19001", "19003", "08005", "48201")
    arrays = {(ix, s): rng.normal(size=(60, 4)) for ix in ("spi", "spei", "eddi")
              for s in (4, 26)}
    arrays[("spi", 4)][:5] = np.nan  # spin-up rows stay NaN
    return IndexCube(weeks=weeks, county_ids=ids, arrays=arrays)


def test_frame_equals_the_per_key_frames_and_round_trips():
    cube = _cube()
    got = cube.to_frame()
    pd.testing.assert_frame_equal(got, _per_key_frames(cube))
    sub = [("spei", 26), ("eddi", 4)]
    pd.testing.assert_frame_equal(cube.to_frame(keys=sub), _per_key_frames(cube, sub))
    back = IndexCube.from_frame(got)
    for key, arr in cube.arrays.items():
        order = [cube.county_ids.index(c) for c in back.county_ids]
        np.testing.assert_array_equal(back.get(*key), arr[:, order])
