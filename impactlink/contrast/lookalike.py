"""Look-alike counties: close in index terms in the same weeks of the same drought, yet with
very different impacts."""

from __future__ import annotations

from dataclasses import replace
from typing import Literal

import numpy as np
import pandas as pd

from impactlink.contrast.pairwise import pairwise_mean_distance
from impactlink.contrast.units import display_values, trait_display
from impactlink.errors import ContrastError
from impactlink.link.features import feature_values
from impactlink.link.target import Target
from impactlink.schema import COUNTY, LEVEL, REGION, YEAR

__all__ = ["season_trajectories", "lookalike_pairs", "county_year_impacts",
           "MAX_DISTANCE"]

#: Driest share of county-years in which a pair-year counts as a drought.
DROUGHT_QUANTILE = 0.25

#: Largest RMS index difference [index units] of a look-alike pair (a quarter of one SD on a
#: standardized index).
MAX_DISTANCE = 0.25


def season_trajectories(target: Target, cube, index: str, scale_weeks: int, lag_weeks: int,
                        *, window_weeks: int | None = None) -> tuple[pd.DataFrame, np.ndarray]:
    """The index trajectory that matters for the impact, per county and year.

    Parameters
    ----------
    target : Target
        County-grain target.
    cube : IndexCube
    index, scale_weeks, lag_weeks
        The impact's best candidate.
    window_weeks : int, optional
        Length of the trajectory for annual targets [weeks]; default the larger of the time
        scale and the target's window, at least 4: for a 13-week index at ISO week 34 that
        is weeks 22-34, the weeks the accumulation covers.

    Returns
    -------
    (keys, values)
        ``keys``: ``county_id, year`` (one row per county-year); ``values`` (rows, L): index
        values oldest to newest. Annual targets (``season_week`` rule): the L weeks ending at
        the reference week minus the lag. Weekly targets: the feature in every ISO week of the
        impact season (the weeks of the year in which any impact occurred), in week order.
    """
    frame = target.frame
    if target.rule.reference == "season_week":
        length = int(window_weeks or max(int(scale_weeks), int(target.rule.window_weeks), 4))
        one = replace(target, rule=replace(target.rule, window_weeks=1, window_stat="value"))
        cols = [feature_values(one, cube, index, scale_weeks, int(lag_weeks) + o)
                for o in range(length - 1, -1, -1)]
        keys = pd.DataFrame({COUNTY: frame[COUNTY].astype(str).to_numpy(),
                             YEAR: frame[YEAR].to_numpy()})
        return keys, np.column_stack(cols)
    x = feature_values(target, cube, index, scale_weeks, lag_weeks)
    seasons = np.unique(frame.loc[frame[LEVEL] >= 1, "season"])
    d = pd.DataFrame({COUNTY: frame[COUNTY].astype(str).to_numpy(),
                      YEAR: frame[YEAR].to_numpy(), "season": frame["season"].to_numpy(),
                      "x": x})
    d = d[d["season"].isin(seasons)]
    wide = d.pivot_table(index=[COUNTY, YEAR], columns="season", values="x", aggfunc="mean")
    return wide.index.to_frame(index=False), wide.to_numpy(float)


def county_year_impacts(target: Target, *, level_at_least: int = 1
                        ) -> tuple[pd.DataFrame, str]:
    """Observed impact per county-year in real units, and its unit.

    Yield targets (``departure_pct`` column): the shortfall, percent of the expected yield
    lost (``departure_pct`` with the sign turned; a yield above expectation counts as no
    loss, 0). Other annual targets: the level. Weekly
    targets: the percent of the year's rows with an impact. ``hit`` is 1 when any row of
    the county-year reached ``level_at_least``.
    """
    f = target.frame
    d = pd.DataFrame({COUNTY: f[COUNTY].astype(str).to_numpy(), YEAR: f[YEAR].to_numpy(),
                      "hit": (f[LEVEL].to_numpy(float) >= level_at_least).astype(float)})
    if "departure_pct" in f.columns:
        d["impact"] = np.maximum(-f["departure_pct"].to_numpy(float), 0.0)
        unit = "pct_of_expected_yield_lost"
    elif target.grain == "county_year":
        d["impact"] = f[LEVEL].to_numpy(float)
        unit = "level"
    else:
        d["impact"] = 100.0 * d["hit"]
        unit = "pct_of_weeks_with_impact"
    out = d.groupby([COUNTY, YEAR], sort=True).agg(impact=("impact", "mean"),
                                                   hit=("hit", "max")).reset_index()
    return out, unit


def lookalike_pairs(keys: pd.DataFrame, values: np.ndarray, impacts: pd.DataFrame,
                    traits: pd.DataFrame, counties: pd.DataFrame | None = None, *,
                    max_distance: float = MAX_DISTANCE, n_pairs: int = 10,
                    dry_side: Literal["low", "high"] = "low",
                    drought_quantile: float = DROUGHT_QUANTILE, jobs: int = 1) -> pd.DataFrame:
    """Rank county pairs that looked alike in one drought year but fared differently.

    Parameters
    ----------
    keys : pandas.DataFrame
        ``county_id, year`` of each row of ``values``.
    values : ndarray (rows, L)
        Index trajectory of each county-year (see :func:`season_trajectories`).
    impacts : pandas.DataFrame
        ``county_id, year, impact`` (real units) and ``hit`` (1 if any impact).
    traits : pandas.DataFrame
        ``county_id`` and trait columns in their own units.
    counties : pandas.DataFrame, optional
        ``county_id`` with ``county_name`` and ``region``.
    max_distance : float, default 0.25
        Largest distance [index units] of a pair.
    n_pairs : int, default 10
    dry_side : {"low", "high"}, default "low"
        Which end of the index is dry (low for SPI/SPEI, high for EDDI; the contrast uses
        the sign of the fitted index slope).
    drought_quantile : float, default 0.25
        A pair-year is "the same drought" when the mean of the two counties' values at the
        reference week (the trajectory's last week) lies in this driest share of all
        county-years' reference-week values.
    jobs : int, default 1
        Threads for the row blocks of each year's distance matrix
        (:func:`impactlink.contrast.pairwise.pairwise_mean_distance`); the numbers do not
        depend on ``jobs``.

    Returns
    -------
    pandas.DataFrame
        One row per pair (its most different year), ranked: ``rank, year, county_a,
        county_name_a, region_a, county_b, county_name_b, region_b, distance, impact_a,
        impact_b, impact_gap`` and for each trait ``<column>_a, <column>_b`` in real units
        (shares in percent; see :func:`impactlink.contrast.units.trait_display`). ``a`` is the
        county that fared worse.

    Notes
    -----
    The distance of counties i and j in year t is the root-mean-square difference of their
    trajectories, :math:`d_{ij,t} = (\\frac1L \\sum_w (x_{i,t,w} - x_{j,t,w})^2)^{1/2}`
    [index units], over the same weeks of the same year. A pair-year qualifies when both
    trajectories are complete, both counties were in the same drought (see
    ``drought_quantile``), at least one of the two counties had an impact that year and
    :math:`d \\le` ``max_distance``; pairs are ranked by the absolute impact difference
    (then by distance), each pair once, in its most different year.
    """
    if values.shape[0] != len(keys):
        raise ContrastError(f"trajectories have {values.shape[0]} rows; keys have {len(keys)}.")
    if max_distance <= 0 or int(n_pairs) < 1:
        raise ContrastError(f"max_distance must be > 0 and n_pairs >= 1; got {max_distance!r}, "
                            f"{n_pairs!r}.")
    if dry_side not in ("low", "high") or not 0 < float(drought_quantile) <= 1:
        raise ContrastError(f"dry_side must be 'low' or 'high' and drought_quantile in (0, 1]; "
                            f"got {dry_side!r}, {drought_quantile!r}.")
    k = keys[[COUNTY, YEAR]].astype({COUNTY: str}).reset_index(drop=True)
    ok = np.isfinite(values).all(axis=1)
    sign = 1.0 if dry_side == "low" else -1.0
    ref = sign * values[:, -1]  # low = dry after the sign
    cut = np.quantile(ref[ok], float(drought_quantile)) if ok.any() else -np.inf
    imp = impacts.astype({COUNTY: str}).set_index([COUNTY, YEAR])
    found = []
    # loop over years (tens), each vectorised over all county pairs of the year
    for year, rows in k[ok].groupby(YEAR, sort=True):
        idx = rows.index.to_numpy()
        here = imp.reindex(pd.MultiIndex.from_arrays([rows[COUNTY], rows[YEAR]]))
        val = here["impact"].to_numpy(float)
        hit = here["hit"].fillna(0).to_numpy(float)
        traj = values[idx]
        dist = pairwise_mean_distance(traj, "rms", jobs=jobs)  # (n, n), in row blocks
        i, j = np.triu_indices(len(idx), k=1)
        keep = (dist[i, j] <= max_distance) & np.isfinite(val[i]) & np.isfinite(val[j])
        keep &= (hit[i] + hit[j]) > 0
        keep &= 0.5 * (ref[idx][i] + ref[idx][j]) <= cut
        i, j = i[keep], j[keep]
        swap = val[j] > val[i]
        a, b = np.where(swap, j, i), np.where(swap, i, j)
        cid = rows[COUNTY].to_numpy()
        found.append(pd.DataFrame({YEAR: year, "county_a": cid[a], "county_b": cid[b],
                                   "distance": dist[a, b], "impact_a": val[a],
                                   "impact_b": val[b], "impact_gap": val[a] - val[b]}))
    cols = ["rank", YEAR, "county_a", "county_name_a", "region_a", "county_b", "county_name_b",
            "region_b", "distance", "impact_a", "impact_b", "impact_gap"]
    if not found or sum(len(f) for f in found) == 0:
        return pd.DataFrame(columns=cols)
    pairs = pd.concat(found, ignore_index=True)
    pairs = pairs.sort_values(["impact_gap", "distance", YEAR, "county_a", "county_b"],
                              ascending=[False, True, True, True, True], kind="mergesort")
    lo = np.minimum(pairs["county_a"], pairs["county_b"])
    hi = np.maximum(pairs["county_a"], pairs["county_b"])
    pairs = pairs[~pd.Series(list(zip(lo, hi)), index=pairs.index).duplicated()]
    pairs = pairs.head(int(n_pairs)).reset_index(drop=True)
    pairs.insert(0, "rank", np.arange(1, len(pairs) + 1))
    names = _names(counties)
    for side in ("a", "b"):
        ids = pairs[f"county_{side}"]
        pairs[f"county_name_{side}"] = names["county_name"].reindex(ids).fillna(ids).to_numpy()
        pairs[f"region_{side}"] = names[REGION].reindex(ids).fillna("").to_numpy()
    tr = traits.astype({COUNTY: str}).set_index(COUNTY)
    extra = []
    for t in [c for c in tr.columns if pd.api.types.is_numeric_dtype(tr[c])]:
        col = trait_display(t).column
        for side in ("a", "b"):
            pairs[f"{col}_{side}"] = display_values(t, tr[t].reindex(pairs[f"county_{side}"]))
            extra.append(f"{col}_{side}")
    return pairs[cols + extra]


def _names(counties: pd.DataFrame | None) -> pd.DataFrame:
    if counties is None:
        return pd.DataFrame(columns=["county_name", REGION])
    c = pd.DataFrame({COUNTY: counties[COUNTY].astype(str).to_numpy()})
    c["county_name"] = (counties["county_name"].astype(str).to_numpy()
                        if "county_name" in counties.columns else c[COUNTY])
    c[REGION] = counties[REGION].astype(str).to_numpy() if REGION in counties.columns else ""
    return c.set_index(COUNTY)
