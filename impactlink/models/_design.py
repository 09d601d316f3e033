"""Design matrices of impact models: index features, covariates, seasonal harmonics, traits.

The same :class:`DesignSpec` builds the columns at fit time and for new rows (curves,
outlook), so a model predicts from exactly the predictors it was fitted on.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from impactlink.errors import ModelError
from impactlink.schema import COUNTY

#: Mean length of the year in ISO weeks (365.2425 / 7), the period of weekly harmonics.
WEEKS_PER_YEAR = 365.2425 / 7.0

SEASON_COLUMNS = ("season_sin", "season_cos")


@dataclass(frozen=True)
class DesignSpec:
    """How the predictor columns of one model are built.

    Attributes
    ----------
    features : tuple of str
        Names of the index features (``"x"`` when a single unnamed array was given); the first
        is the primary feature that impact curves vary.
    covariates : tuple of str
        Columns taken from the target frame (e.g. ``persistence_4``).
    seasonal : {"none", "week", "month"}
        First harmonic of the season: sin and cos of 2*pi*season/period, with period
        52.18 for ISO weeks (365.2425/7) and 12 for months.
    traits : tuple of str
        County trait columns, standardised with ``trait_mean`` and ``trait_sd``.
    trait_table : pandas.DataFrame or None
        Standardised trait values indexed by county_id.
    columns : tuple of str
        Final predictor names, in the order of the coefficient vector.
    reference : dict
        Value of each column at which curves hold it (its mean over the fitted rows).
    """

    features: tuple[str, ...]
    covariates: tuple[str, ...] = ()
    seasonal: str = "none"
    traits: tuple[str, ...] = ()
    trait_table: pd.DataFrame | None = None
    columns: tuple[str, ...] = ()
    reference: dict | None = None

    @property
    def needs(self) -> tuple[str, ...]:
        """Columns of ``frame`` that :meth:`build` needs."""
        out = list(self.covariates)
        if self.seasonal != "none":
            out.append("season")
        if self.traits:
            out.append(COUNTY)
        return tuple(out)

    def build(self, x: dict[str, np.ndarray], frame: pd.DataFrame | None, n: int) -> pd.DataFrame:
        """Predictor columns for ``n`` rows (NaN where a value is missing)."""
        missing = [f for f in self.features if f not in x]
        if missing:
            raise ModelError(
                f"x lacks feature(s) {missing}; the model was fitted on {list(self.features)}"
            )
        cols: dict[str, np.ndarray] = {}
        for f in self.features:
            v = np.asarray(x[f], dtype=float).reshape(-1)
            if v.shape[0] != n:
                raise ModelError(f"x[{f!r}] has {v.shape[0]} values; expected {n}")
            cols[f] = v
        need = self.needs
        if need:  # covariates, season or traits: all read from frame
            if frame is None:
                raise ModelError(
                    f"this model needs frame columns {list(need)} (covariates, season or "
                    "county_id for traits); pass frame=..."
                )
            lacking = [c for c in need if c not in frame.columns]
            if lacking:
                raise ModelError(
                    f"frame lacks column(s) {lacking}; the model needs {list(need)}"
                )
            if len(frame) != n:
                raise ModelError(f"frame has {len(frame)} rows; expected {n} (one per x value)")
            cols.update(self._frame_columns(frame))
        out = pd.DataFrame(cols)
        if self.columns:
            out = out[list(self.columns)]
        return out

    def _frame_columns(self, frame: pd.DataFrame) -> dict[str, np.ndarray]:
        """Covariate, seasonal-harmonic and trait columns read from ``frame``, in that order."""
        cols: dict[str, np.ndarray] = {}
        for c in self.covariates:
            cols[c] = pd.to_numeric(frame[c], errors="coerce").to_numpy(dtype=float)
        if self.seasonal != "none":
            s = pd.to_numeric(frame["season"], errors="coerce").to_numpy(dtype=float)
            period = WEEKS_PER_YEAR if self.seasonal == "week" else 12.0
            cols[SEASON_COLUMNS[0]] = np.sin(2.0 * np.pi * s / period)
            cols[SEASON_COLUMNS[1]] = np.cos(2.0 * np.pi * s / period)
        if self.traits:
            tt = self.trait_table
            if tt is None:
                raise ModelError(
                    f"DesignSpec has traits {list(self.traits)} but no trait_table; build the "
                    "spec with the standardised trait table it was fitted on"
                )
            ids = frame[COUNTY].astype(str)
            for t in self.traits:
                cols[t] = ids.map(tt[t]).to_numpy(dtype=float)
        return cols


def as_feature_dict(x, n: int | None = None, *, name: str = "x") -> dict[str, np.ndarray]:
    """Normalise ``x`` (1-D array or mapping name -> 1-D array) to a dict of float arrays."""
    if isinstance(x, dict):
        if not x:
            raise ModelError("x is an empty dict; expected at least one feature array")
        out = {str(k): np.asarray(v, dtype=float).reshape(-1) for k, v in x.items()}
    else:
        arr = np.asarray(x, dtype=float)
        if arr.ndim != 1:
            raise ModelError(
                f"x has shape {arr.shape}; expected a 1-D array or a dict of 1-D arrays"
            )
        out = {name: arr}
    if n is not None:
        for k, v in out.items():
            if v.shape[0] != n:
                raise ModelError(
                    f"feature {k!r} has {v.shape[0]} values but the target frame has {n} rows"
                )
    return out


def standardise_traits(traits: pd.DataFrame, county_ids: pd.Series) -> tuple[pd.DataFrame, str]:
    """Numeric trait columns indexed by county_id, standardised over the target's counties.

    Returns the table and a note on dropped columns (non-numeric or constant).
    """
    if COUNTY not in traits.columns:
        raise ModelError(
            f"traits has columns {list(traits.columns)}; expected a 'county_id' column"
        )
    t = traits.copy()
    t[COUNTY] = t[COUNTY].astype(str)
    t = t.drop_duplicates(COUNTY).set_index(COUNTY)
    num = t.select_dtypes("number")
    notes = []
    dropped = [c for c in t.columns if c not in num.columns]
    if dropped:
        notes.append(f"non-numeric trait column(s) {dropped} ignored")
    used = num.reindex(pd.Index(county_ids.astype(str).unique()))
    mean, sd = used.mean(), used.std(ddof=0)
    const = [c for c in num.columns if not (sd[c] > 0)]
    if const:
        notes.append(f"constant trait column(s) {const} dropped")
    keep = [c for c in num.columns if c not in const]
    table = (num[keep] - mean[keep]) / sd[keep]
    return table, "; ".join(notes)
