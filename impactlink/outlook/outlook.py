"""Outlook: from the latest week's index values, the chance of each impact now and ahead.

A model with lag L maps the index value at week t - L to the impact at week t. So the index
value of the latest observed week W predicts the impact at week W + L: a lag-0 model gives
the chance *now*, a lag-4 model the chance four weeks ahead. Running every chosen model on
the latest values therefore gives a small ladder of horizons per county, each with an
interval. For onset targets (a new episode starting within ``horizon_weeks`` weeks after the
forecast week) counties already in an episode are not at risk and get no number.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from impactlink.errors import OutlookError
from impactlink.indices.timegrid import week_monday
from impactlink.models.fit import ImpactModel, _check_ci
from impactlink.schema import COUNTY

__all__ = ["impact_outlook", "plot_outlook_map", "OUTLOOK_COLUMNS"]

OUTLOOK_COLUMNS = (
    COUNTY, "impact", "target", "index", "scale_weeks", "lag_weeks", "horizon_weeks",
    "as_of_week", "valid_week", "level_k", "level_label", "prob", "prob_lo", "prob_hi",
    "model", "note",
)


def impact_outlook(
    models: Mapping,
    cube,
    *,
    counties: pd.DataFrame | None = None,
    state: pd.DataFrame | None = None,
    as_of_week=None,
    ci: float = 0.90,
) -> pd.DataFrame:
    """Chance of each impact level per county, from the latest index values.

    Parameters
    ----------
    models : mapping
        Any key (e.g. ``(target_name, index, scale_weeks, lag_weeks)``) -> fitted
        :class:`~impactlink.models.ImpactModel`. Each model's ``meta`` must name its
        feature: ``index``, ``scale_weeks``, ``lag_weeks`` (one feature), or ``features`` =
        ``{feature_name: (index, scale_weeks, lag_weeks)}`` for several.
    cube : IndexCube
        Index values up to the latest week.
    counties : pandas.DataFrame, optional
        ``county_id`` and ``region`` of the counties to report (default: every county of
        the cube, with no region). Needed for region or county pooling and region targets.
    state : pandas.DataFrame, optional
        The state known at the forecast week, one row per ``county_id``: a ``level`` column
        (current impact level) and/or covariate columns by name (``persistence_<L>``, time
        since the last episode, ...). A ``persistence_<L>`` covariate without its own column
        is read from ``level`` (the state now is the state known L weeks before W + L).
    as_of_week : date-like, optional
        Forecast week W (its Monday). Default: the last week in which the model's index has
        any value.
    ci : float
        Coverage of the pointwise interval.

    Returns
    -------
    pandas.DataFrame
        Columns ``OUTLOOK_COLUMNS``: one row per county, model and impact level k (1..K) with
        P(level >= k) at ``valid_week`` = ``as_of_week`` + ``lag_weeks`` weeks (for an onset
        target: P(a new episode starts within ``horizon_weeks`` weeks after ``valid_week``).
        ``prob`` is NaN, with a ``note``, where the model was not fitted, a value is missing,
        or the county is not at risk.

    Raises
    ------
    ValueError
        A model lacks the feature metadata, ``ci`` is not in (0, 1), a region target or a
        pooled model comes without ``counties``.

    Notes
    -----
    The lag convention is the one the models were fitted with (the index at t - L is
    aligned to the impact at t, by :func:`impactlink.link.feature_values`); the same
    function aligns the latest values here, through a one-row-per-unit target frame for the
    valid week, so windows, season weeks and region weights follow the target's rule. For
    annual and monthly targets the value is reported only when the reference week of the
    valid period lies on or before ``as_of_week``. Intervals are the delta-method intervals
    of :meth:`ImpactModel.predict_interval`; they describe the uncertainty of the fitted
    curve, not of index values yet to come.
    """
    _check_ci(ci)
    if not isinstance(models, Mapping):
        raise TypeError(f"models must be a mapping key -> ImpactModel; got {type(models).__name__}")
    units = _county_table(cube, counties)
    parts = []
    for key, model in models.items():  # one vectorised prediction per chosen model
        if not isinstance(model, ImpactModel):
            raise TypeError(f"models[{key!r}] is a {type(model).__name__}; expected ImpactModel")
        parts.append(_one_model(key, model, cube, units, counties is not None, state,
                                as_of_week, ci))
    if not parts:
        return pd.DataFrame(columns=list(OUTLOOK_COLUMNS))
    return pd.concat(parts, ignore_index=True)[list(OUTLOOK_COLUMNS)]


def plot_outlook_map(outlook: pd.DataFrame, counties, *, level_k: int = 1,
                     title: str | None = None):
    """Map of P(level >= k) per county, one panel per lag (weeks ahead).

    Parameters
    ----------
    outlook : pandas.DataFrame
        Rows of :func:`impact_outlook` for one target and one candidate index per lag
        (filter first).
    counties : geopandas.GeoDataFrame
        ``county_id`` and geometry.
    level_k : int
        Impact level to map.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    need = {COUNTY, "lag_weeks", "level_k", "prob"}
    lacking = sorted(need - set(outlook.columns))
    if lacking:
        raise OutlookError(f"outlook lacks column(s) {lacking}; pass the output of impact_outlook")
    if COUNTY not in getattr(counties, "columns", []):
        raise OutlookError("counties must be a GeoDataFrame with a 'county_id' column")
    sel = outlook[outlook["level_k"] == level_k]
    dup = sel.duplicated([COUNTY, "lag_weeks"])
    if dup.any():
        raise OutlookError(
            "outlook has several rows per county and lag for level_k="
            f"{level_k} (several targets or candidates); filter it to one target and one "
            "candidate per lag before mapping"
        )
    from matplotlib.colors import LinearSegmentedColormap
    from matplotlib.figure import Figure

    cmap = LinearSegmentedColormap.from_list("impactlink_chance",
                                             ["#f4f1ea", "#8fc1b5", "#2a9d8f", "#6d2e46"])
    lags = sorted(sel["lag_weeks"].unique())
    ncol = max(1, len(lags))
    fig = Figure(figsize=(4.0 * ncol, 4.0), layout="constrained")
    axes = fig.subplots(1, ncol, squeeze=False).ravel()
    geo = counties[[COUNTY, "geometry"]].copy()
    geo[COUNTY] = geo[COUNTY].astype(str)
    for ax, lag in zip(axes, lags):
        s = sel[sel["lag_weeks"] == lag][[COUNTY, "prob"]].copy()
        s[COUNTY] = s[COUNTY].astype(str)
        g = geo.merge(s, on=COUNTY, how="left")
        g.plot(ax=ax, color="#d9d9d9", edgecolor="white", linewidth=0.3)
        have = g[g["prob"].notna()]
        if len(have):
            have.plot(ax=ax, column="prob", cmap=cmap, vmin=0, vmax=1, edgecolor="white",
                      linewidth=0.3)
        ax.set_title("now" if lag == 0 else f"{int(lag)} weeks ahead", fontsize=9)
        ax.set_axis_off()
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import Normalize

    sm = ScalarMappable(norm=Normalize(0, 1), cmap=cmap)
    fig.colorbar(sm, ax=list(axes), shrink=0.7, label="probability (grey: no estimate)")
    if title:
        fig.suptitle(title)
    return fig


# ------------------------------------------------------------------ private steps
def _county_table(cube, counties: pd.DataFrame | None) -> pd.DataFrame:
    if counties is None:
        return pd.DataFrame({COUNTY: list(cube.county_ids), "region": pd.NA})
    if COUNTY not in counties.columns:
        raise OutlookError(f"counties has columns {list(counties.columns)}; expected 'county_id' "
                         "(and 'region')")
    out = pd.DataFrame({COUNTY: counties[COUNTY].astype(str).to_numpy()})
    out["region"] = (counties["region"].astype(str).to_numpy() if "region" in counties.columns
                     else pd.NA)
    return out.drop_duplicates(COUNTY).reset_index(drop=True)


def _feature_specs(key, model: ImpactModel) -> dict[str, tuple[str, int, int]]:
    meta = model.meta
    if "features" in meta:
        return {str(k): (str(v[0]), int(v[1]), int(v[2])) for k, v in meta["features"].items()}
    missing = [k for k in ("index", "scale_weeks", "lag_weeks") if k not in meta]
    if missing:
        raise OutlookError(
            f"models[{key!r}].meta lacks {missing}; fit it with meta={{'index': ..., "
            "'scale_weeks': ..., 'lag_weeks': ...}} (or meta['features'] for several)"
        )
    name = model.design.features[0] if model.design is not None else "x"
    return {name: (str(meta["index"]), int(meta["scale_weeks"]), int(meta["lag_weeks"]))}


def _latest_week(cube, specs) -> pd.Timestamp:
    last = -1
    for index, scale, _ in specs.values():
        arr = cube.get(index, scale)
        rows = np.flatnonzero(np.isfinite(arr).any(axis=1))
        if rows.size:
            last = max(last, int(rows[-1]))
    if last < 0:
        return pd.NaT
    return cube.weeks[last]


def _one_model(key, model, cube, units, have_counties, state, as_of_week, ci) -> pd.DataFrame:
    from impactlink.link.features import feature_values, reference_weeks
    from impactlink.link.target import FeatureRule, Target

    specs = _feature_specs(key, model)
    lag = min(s[2] for s in specs.values())
    first = next(iter(specs.values()))
    if as_of_week is None:
        as_of = _latest_week(cube, specs)
    else:
        as_of = week_monday([as_of_week])[0]
    valid = as_of + pd.Timedelta(weeks=lag) if pd.notna(as_of) else pd.NaT
    K = len(model.levels) - 1
    n = len(units)
    note = np.full(n, "", dtype=object)
    if model.members and not have_counties:
        raise OutlookError(f"models[{key!r}] uses pooling={model.pooling!r}; pass counties= with "
                         "'county_id' and 'region'")

    # one forecast row per unit of the target grain, for the valid week
    if model.grain == "region_month":
        if not have_counties:
            raise OutlookError(f"models[{key!r}] is a region target; pass counties= with "
                             "'county_id' and 'region'")
        unit_ids = units["region"].astype(str).to_numpy()
    else:
        unit_ids = units[COUNTY].astype(str).to_numpy()
    frame = _forecast_frame(model, units, unit_ids, valid)
    probs = np.full((n, K), np.nan)
    lo = np.full((n, K), np.nan)
    hi = np.full((n, K), np.nan)
    if not model.ok:
        note[:] = f"model not fitted: {model.reason}"
    elif pd.isna(valid):
        note[:] = "no index values in the cube"
    else:
        tgt = Target(name=model.target, impact=model.impact, kind=model.kind, grain=model.grain,
                     role=model.role, frame=frame, levels=model.levels,
                     rule=model.rule if model.rule is not None else FeatureRule(),
                     horizon_weeks=model.horizon_weeks)
        x = {}
        ref = reference_weeks(tgt)
        for name, (index, scale, flag) in specs.items():
            x[name] = feature_values(tgt, cube, index, scale, flag)
            late = np.asarray(ref - pd.Timedelta(weeks=flag) > as_of)
            x[name][late] = np.nan
            note[late & (note == "")] = "index value for this period not yet observed"
        covariate_notes = _add_state(frame, model, state, unit_ids)
        for c, msg in covariate_notes.items():
            note[frame[c].isna().to_numpy() & (note == "")] = msg
        at_risk = np.ones(n, bool)
        if model.role == "onset" and state is not None and "level" in state.columns:
            current = _state_column(state, "level", units[COUNTY])
            at_risk = ~(current >= 1)
            note[~at_risk] = "already in an episode; onset not applicable"
        probs = model.predict(x, frame=frame)
        lo, hi = model.predict_interval(x, frame=frame, ci=ci)
        for arr in (probs, lo, hi):
            arr[~at_risk] = np.nan
        missing = ~np.isfinite(probs).all(axis=1) & (note == "")
        note[missing] = "a predictor value is missing"
    out = pd.DataFrame(
        {
            COUNTY: np.repeat(units[COUNTY].to_numpy(), K),
            "impact": model.impact,
            "target": model.target,
            "index": first[0] if len(specs) == 1 else "+".join(s[0] for s in specs.values()),
            "scale_weeks": first[1],
            "lag_weeks": lag,
            "horizon_weeks": int(model.horizon_weeks),
            "as_of_week": as_of,
            "valid_week": valid,
            "level_k": np.tile(np.arange(1, K + 1), n),
            "level_label": np.tile(np.asarray(model.levels[1:], dtype=object), n),
            "prob": probs.ravel(),
            "prob_lo": lo.ravel(),
            "prob_hi": hi.ravel(),
            # one scalar per cell: the model's key joined, e.g. "maize:spei:13:0"
            "model": ":".join(str(k) for k in key) if isinstance(key, tuple) else str(key),
            "note": np.repeat(note, K),
        }
    )
    return out


def _forecast_frame(model, units, unit_ids, valid) -> pd.DataFrame:
    if pd.isna(valid):
        valid = pd.Timestamp("1970-01-05")
    if model.grain == "county_year":
        time = pd.Timestamp(year=valid.isocalendar()[0], month=1, day=1)
        season = 0
    elif model.grain == "region_month":
        time = pd.Timestamp(year=valid.year, month=valid.month, day=1)
        season = valid.month
    else:
        time = valid
        season = min(int(valid.isocalendar()[1]), 52)  # week 53 pooled with 52
    n = len(units)
    return pd.DataFrame(
        {
            "unit_id": unit_ids,
            COUNTY: units[COUNTY].astype(str).to_numpy(),
            "region": units["region"].to_numpy(),
            "time": np.repeat(np.datetime64(time, "ns"), n),
            "year": int(time.year),
            "season": season,
            "level": 0,
        }
    )


def _add_state(frame: pd.DataFrame, model, state, unit_ids) -> dict[str, str]:
    """Put covariate columns into ``frame`` from ``state``; return notes for missing ones."""
    notes = {}
    covs = model.design.covariates if model.design is not None else ()
    for c in covs:
        if state is not None and c in state.columns:
            frame[c] = _state_column(state, c, frame[COUNTY])
        elif state is not None and c.startswith("persistence_") and "level" in state.columns:
            frame[c] = _state_column(state, "level", frame[COUNTY])
        else:
            frame[c] = np.nan
            notes[c] = f"state column {c!r} not supplied"
    return notes


def _state_column(state: pd.DataFrame, column: str, county_ids: pd.Series) -> np.ndarray:
    if COUNTY not in state.columns:
        raise OutlookError(f"state has columns {list(state.columns)}; expected 'county_id'")
    s = state.assign(county_id=state[COUNTY].astype(str)).drop_duplicates(
        COUNTY, keep="last").set_index(COUNTY)[column]
    return pd.to_numeric(county_ids.astype(str).map(s), errors="coerce").to_numpy(dtype=float)
