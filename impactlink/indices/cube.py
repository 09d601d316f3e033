"""The in-memory container for index values: one (weeks, counties) array per (index, scale).

Every later stage reads index values through :class:`IndexCube`, never through a wide
table, so hundreds of candidates (index x scale x lag) never sit in memory at once.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from impactlink.errors import IndicesError
from impactlink.schema import COUNTY

from .timegrid import week_monday

__all__ = ["IndexCube", "array_of"]


@dataclass(frozen=True)
class IndexCube:
    """Index values on a regular weekly grid.

    Parameters
    ----------
    weeks : pandas.DatetimeIndex
        Mondays of ISO 8601 weeks, strictly increasing, 7 days apart (no gaps: a week
        with no data is a row of NaN, not a missing row).
    county_ids : tuple of str
        Column labels of every array, in order.
    arrays : dict
        ``{(index_name, scale_weeks): ndarray of shape (len(weeks), len(county_ids))}``,
        float64, NaN where undefined (spin-up of an accumulation, missing input).
        Index names are lower-case snake_case (``"spi"``, ``"spei"``, ``"eddi"``,
        ``"soil_moisture"``, ``"streamflow"``). Standardized indices are on the normal
        scale (negative = dry). ``scale_weeks`` is 0 for an indicator used as supplied.
    provenance : dict
        Method, parameters and calibration period per index, for the manifest.
    """

    weeks: pd.DatetimeIndex
    county_ids: tuple[str, ...]
    arrays: dict[tuple[str, int], np.ndarray]
    provenance: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        shape = (len(self.weeks), len(self.county_ids))
        for key, arr in self.arrays.items():
            if arr.shape != shape:
                raise IndicesError(
                    f"IndexCube array {key} has shape {arr.shape}; expected {shape} "
                    "(weeks, counties)"
                )

    # ------------------------------------------------------------------ access
    @property
    def keys(self) -> list[tuple[str, int]]:
        """All (index, scale_weeks) pairs, sorted."""
        return sorted(self.arrays)

    @property
    def index_names(self) -> list[str]:
        return sorted({k[0] for k in self.arrays})

    def get(self, index: str, scale_weeks: int) -> np.ndarray:
        """The (weeks, counties) array of one index at one scale."""
        return array_of(self.arrays, index, scale_weeks)

    def week_position(self, dates: pd.Series | pd.DatetimeIndex | np.ndarray) -> np.ndarray:
        """Row position of the ISO week that contains each date (-1 if outside the grid)."""
        monday = week_monday(dates)
        pos = ((monday - self.weeks[0]).days // 7).to_numpy()
        pos = np.where((pos >= 0) & (pos < len(self.weeks)), pos, -1)
        return pos.astype(np.int64)

    def county_position(self, county_ids) -> np.ndarray:
        """Column position of each county id (-1 if unknown)."""
        lookup = {c: i for i, c in enumerate(self.county_ids)}
        return np.array([lookup.get(str(c), -1) for c in county_ids], dtype=np.int64)

    def values_at(
        self,
        index: str,
        scale_weeks: int,
        week_pos: np.ndarray,
        county_pos: np.ndarray,
        *,
        lag_weeks: int = 0,
    ) -> np.ndarray:
        """Index value ``lag_weeks`` before each (week, county) position; NaN off the grid."""
        arr = self.get(index, scale_weeks)
        wp = np.asarray(week_pos, dtype=np.int64) - int(lag_weeks)
        cp = np.asarray(county_pos, dtype=np.int64)
        ok = (wp >= 0) & (wp < arr.shape[0]) & (cp >= 0)
        out = np.full(wp.shape, np.nan)
        out[ok] = arr[wp[ok], cp[ok]]
        return out

    # ------------------------------------------------------------------ tidy
    def to_frame(self, *, keys: list[tuple[str, int]] | None = None) -> pd.DataFrame:
        """Long tidy frame: county_id, week, index, scale_weeks, value.

        Built column by column for all keys at once: the county column is an Arrow string
        array taken from the county ids (no Python string per row), the index column a
        categorical from codes. On a national cube (150 M rows) this avoids the per-key
        frames, their concatenation and an object column of every row.
        """
        import pyarrow as pa

        keys = list(keys or self.keys)
        nw, nc = len(self.weeks), len(self.county_ids)
        n, k = nw * nc, len(keys)
        names = sorted({str(key[0]) for key in keys})
        codes = np.repeat(np.array([names.index(str(key[0])) for key in keys], np.int8), n)
        ids = pa.array([str(c) for c in self.county_ids], type=pa.large_string())
        county = ids.take(pa.array(np.tile(np.arange(nc, dtype=np.int32), nw * k)))
        value = np.empty(n * k)
        for i, key in enumerate(keys):
            value[i * n:(i + 1) * n] = self.arrays[key].ravel()
        return pd.DataFrame({
            COUNTY: pd.array(county, dtype="string"),
            "week": np.tile(np.repeat(self.weeks.values, nc), k),
            "index": pd.Categorical.from_codes(codes, categories=pd.Index(names)),
            "scale_weeks": np.repeat(np.array([key[1] for key in keys], np.int16), n),
            "value": value,
        })

    @classmethod
    def from_frame(cls, frame: pd.DataFrame, *, provenance: dict | None = None) -> IndexCube:
        """Inverse of :meth:`to_frame` (columns county_id, week, index, scale_weeks, value)."""
        weeks_all = pd.DatetimeIndex(pd.to_datetime(frame["week"]))
        start, end = weeks_all.min(), weeks_all.max()
        weeks = pd.date_range(start, end, freq="7D")
        counties = tuple(sorted(frame[COUNTY].astype(str).unique()))
        cpos = {c: i for i, c in enumerate(counties)}
        arrays = {}
        for (idx, scale), g in frame.groupby(["index", "scale_weeks"], observed=True):
            arr = np.full((len(weeks), len(counties)), np.nan)
            wp = ((pd.DatetimeIndex(pd.to_datetime(g["week"])) - start).days // 7).to_numpy()
            cp = g[COUNTY].astype(str).map(cpos).to_numpy()
            arr[wp, cp] = g["value"].to_numpy(dtype=float)
            arrays[(str(idx), int(scale))] = arr
        return cls(weeks=weeks, county_ids=counties, arrays=arrays, provenance=provenance or {})


def array_of(arrays: dict, index: str, scale_weeks: int) -> np.ndarray:
    """``arrays[(index, scale_weeks)]`` of a cube's arrays dict; a KeyError that lists the
    available keys otherwise (a lookup of a key the caller should have taken from them)."""
    try:
        return arrays[(index, int(scale_weeks))]
    except KeyError:
        raise KeyError(
            f"no index {index!r} at scale {scale_weeks} weeks; available: {sorted(arrays)}"
        ) from None
