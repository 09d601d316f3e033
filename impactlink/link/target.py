"""The contract between linking and modelling: an impact target on its own grid.

A :class:`Target` is one outcome to predict (for example restriction level in force, restriction
onset within L weeks, maize shortfall class) as a tidy frame with one row per unit and time step
inside the source's coverage, plus the rule that aligns index values to each row. Features are
never stored as a wide table: :func:`impactlink.link.feature_values` computes one candidate
(index, scale, lag) at a time from an :class:`~impactlink.indices.cube.IndexCube`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import pandas as pd

__all__ = ["Target", "FeatureRule", "compact_frame"]

Grain = Literal["county_week", "county_year", "region_month"]
TargetKind = Literal["binary", "ordinal"]
Role = Literal["state", "onset", "escalation", "annual", "monthly", "count"]


@dataclass(frozen=True)
class FeatureRule:
    """How index values are aligned to a target row.

    ``reference`` is the week whose index value (minus the lag) is the feature:
    for county-week targets the row's own week; for annual targets ISO week
    ``season_week`` of the row's year; for monthly targets the last week that starts in the
    row's month. With ``window_weeks`` > 1 the feature is ``window_stat`` ("min" or "mean")
    over the ``window_weeks`` weeks ending at the reference week minus the lag.
    For region targets the county values are combined with ``weights``
    (region, county_id, weight; weights sum to 1 per region).

    ``season_end_weeks`` (annual targets only) makes the end of the accumulation window part
    of the search: the candidates read the index at each of these ISO weeks instead of at
    ``season_week`` minus the modelled lags. It is carried as lags from ``season_week`` (the
    latest end week), so the grid, the folds and the selection-aware estimate treat it like
    any other candidate dimension (:func:`impactlink.link.features.candidate_lags`).
    """

    reference: Literal["row_week", "season_week", "month_end"] = "row_week"
    season_week: int | None = None
    season_end_weeks: tuple[int, ...] = ()
    window_weeks: int = 1
    window_stat: Literal["value", "min", "mean"] = "value"
    weights: pd.DataFrame | None = None


@dataclass(frozen=True)
class Target:
    """One impact outcome on its own grid.

    Attributes
    ----------
    name : str
        Unique target name, ``"<impact>"`` or ``"<impact>:<role>"`` (e.g. ``"restrictions:onset"``).
    impact : str
        The impact name from the project file.
    kind : {"binary", "ordinal"}
        Binary targets have levels {0, 1}; ordinal targets 0..K (0 = no impact).
    grain : {"county_week", "county_year", "region_month"}
    role : str
        "state", "onset", "escalation", "annual", "monthly" or "count".
    frame : pandas.DataFrame
        One row per unit and time step in coverage (and, for onset/escalation targets, at risk).
        Columns: ``unit_id`` (county_id or region), ``county_id`` (county grain), ``region``,
        ``time`` (datetime64: week Monday, Jan 1 of the year, or first of the month),
        ``year`` (int, the fold key), ``season`` (int: ISO week 1-52 or month 1-12),
        ``level`` (int 0..K), and ``persistence_<L>`` (int level known L weeks before
        ``time``; NaN where unknown) for each modelled lag where persistence is meaningful.
        Source-specific extras (e.g. ``departure_pct``) may follow.
    levels : tuple of str
        Label of each level 0..K.
    rule : FeatureRule
    horizon_weeks : int
        For onset/escalation targets, the event window L (an onset within t+1..t+L); 0 otherwise.
    provenance : dict
        Settings, row counts (rows in coverage, at risk, events), flags (e.g. circularity).
    """

    name: str
    impact: str
    kind: TargetKind
    grain: Grain
    role: Role
    frame: pd.DataFrame
    levels: tuple[str, ...]
    rule: FeatureRule = field(default_factory=FeatureRule)
    horizon_weeks: int = 0
    provenance: dict = field(default_factory=dict)

    @property
    def n_levels(self) -> int:
        return len(self.levels)

    @property
    def events(self) -> int:
        """Rows with an impact (level >= 1)."""
        return int((self.frame["level"] >= 1).sum())


#: Float columns of a target that hold whole numbers or NaN only (levels known L weeks
#: before, weeks since an episode ended).
_WHOLE_FLOAT_PREFIXES = ("persistence_", "weeks_since_end")


def compact_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """A target frame in 32-bit columns where that is exact: int64 columns whose values fit
    int32 as int32, and the whole-number float columns (``persistence_<L>``,
    ``weeks_since_end``) as float32 (whole numbers below 2**24 and NaN are exact in IEEE 754
    binary32). The values are unchanged; a national weekly target (4.6 M rows) needs about
    200 MB less."""
    out = {}
    lo, hi = np.iinfo(np.int32).min, np.iinfo(np.int32).max
    for col in frame.columns:
        s = frame[col]
        if s.dtype == np.int64:
            v = s.to_numpy()
            if not v.size or (v.min() >= lo and v.max() <= hi):
                out[col] = s.astype(np.int32)
        elif s.dtype == np.float64 and str(col).startswith(_WHOLE_FLOAT_PREFIXES):
            v = s.to_numpy()
            fin = v[np.isfinite(v)]
            if (fin == np.round(fin)).all() and (np.abs(fin) < 2**24).all():
                out[col] = s.astype(np.float32)
    return frame.assign(**out) if out else frame
