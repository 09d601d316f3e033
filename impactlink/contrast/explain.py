"""Why two counties fared differently: the top-level contrast the pipeline and CLI call."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from impactlink.contrast.decompose import (
    REGION_PARTNER,
    Side,
    county_side,
    decomposition_table,
    region_side,
)
from impactlink.contrast.lookalike import (
    MAX_DISTANCE,
    county_year_impacts,
    lookalike_pairs,
    season_trajectories,
)
from impactlink.contrast.traitmodel import TraitModel, fit_trait_model
from impactlink.contrast.units import trait_display
from impactlink.errors import ContrastError
from impactlink.link.features import feature_values
from impactlink.link.target import Target
from impactlink.schema import COUNTY, YEAR

__all__ = ["ContrastDecomposition", "contrast_counties", "parse_period", "summary_row"]


@dataclass(frozen=True)
class ContrastDecomposition:
    """One explained contrast and the look-alike pairs it was chosen from.

    Attributes
    ----------
    parts : pandas.DataFrame
        Rows of ``contrast.csv``: the pair (ids and names), period, ``scale, part, trait,
        term, estimate, lo, hi`` (see :func:`~impactlink.contrast.decompose.decomposition_table`).
    lookalikes : pandas.DataFrame
        Ranked look-alike pairs (see :func:`~impactlink.contrast.lookalike.lookalike_pairs`).
    summary : pandas.DataFrame
        One row with every number the contrast paragraph quotes
        (:func:`impactlink.report.words_contrast.contrast_paragraph`).
    trajectories : pandas.DataFrame
        ``county_id, year, week_offset, value``: the two counties' index trajectories in
        the period (week_offset 0 = reference week), for the side-by-side figure.
    coefficients : pandas.DataFrame
        Fixed part of the trait-aware model (``term, estimate``, log-odds per SD of a trait).
    traits_side : pandas.DataFrame
        ``trait, label, unit, value_a, value_b`` (real units) and ``sensitivity_pts`` (the
        trait's share of the sensitivity part [probability points]).
    provenance : dict
    """

    parts: pd.DataFrame
    lookalikes: pd.DataFrame
    summary: pd.DataFrame
    trajectories: pd.DataFrame
    coefficients: pd.DataFrame
    traits_side: pd.DataFrame
    provenance: dict = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        """Rows of ``contrast.csv``."""
        return self.parts.copy()


def contrast_counties(
    target: Target,
    cube,
    best: tuple[str, int, int],
    traits: pd.DataFrame,
    counties: pd.DataFrame | None = None,
    *,
    pair: tuple[str, str] | None = None,
    period: tuple[int, int] | None = None,
    n_boot: int = 200,
    ci: float = 0.90,
    seed: int = 0,
    max_distance: float = MAX_DISTANCE,
    n_pairs: int = 10,
    level_at_least: int = 1,
    jobs: int = 1,
) -> ContrastDecomposition:
    """Explain why two counties (or a county and its region) had different impacts.

    Parameters
    ----------
    target : Target
        County-grain target (``county_year`` or ``county_week``).
    cube : IndexCube
    best : (index, scale_weeks, lag_weeks)
        The impact's best candidate feature.
    traits : pandas.DataFrame
        ``county_id`` and numeric traits in their own units.
    counties : pandas.DataFrame, optional
        ``county_id``, ``county_name``, ``region`` (names shown beside ids).
    pair : (str, str), optional
        County ids (or names) a and b; b may be ``"region"`` (the other counties of a's
        region). Default: the most striking look-alike pair (rank 1) in its year.
    period : (int, int), optional
        First and last year (inclusive). Default: the look-alike year when ``pair`` is None,
        else every year.
    n_boot : int, default 200
        Bootstrap replicates of the intervals (0 = none).
    ci : float, default 0.90
    seed : int, default 0
    max_distance, n_pairs
        Options of the look-alike finder.
    level_at_least : int, default 1
        The modelled event is level >= this (ordinal targets).
    jobs : int, default 1
        Threads for the look-alike distances and the bootstrap refits
        (:func:`impactlink.execution.thread_map`); the numbers do not depend on ``jobs``.

    Returns
    -------
    ContrastDecomposition

    Raises
    ------
    ContrastError
        Unknown county, empty period, no look-alike pair to default to, or a model that cannot
        be fitted.

    Notes
    -----
    Model: :func:`impactlink.contrast.traitmodel.fit_trait_model`; decomposition:
    :func:`impactlink.contrast.decompose.decompose_pair`; look-alikes:
    :func:`impactlink.contrast.lookalike.lookalike_pairs`. All of it is statistical
    association in past records, not a verdict on anyone's management.
    """
    if not 0.5 <= float(ci) < 1.0:
        raise ContrastError(f"ci must be a confidence level in [0.5, 1); got {ci!r}.")
    if int(n_boot) < 0:
        raise ContrastError(f"n_boot must be >= 0; got {n_boot!r}.")
    index, scale, lag = best
    x = feature_values(target, cube, index, scale, lag)
    model = fit_trait_model(target, x, traits, counties, level_at_least=level_at_least)
    keys, traj = season_trajectories(target, cube, index, scale, lag)
    impacts, unit = county_year_impacts(target, level_at_least=model.provenance[
        "level_at_least"])
    looks = lookalike_pairs(keys, traj, impacts, traits, counties, max_distance=max_distance,
                            n_pairs=n_pairs, dry_side="low" if model.b1 < 0 else "high",
                            jobs=jobs)
    if pair is None:
        if looks.empty:
            raise ContrastError(
                f"target {target.name!r}: no look-alike pair (distance <= {max_distance} in a "
                "drought year with an impact); name two counties with pair=(a, b).")
        top = looks.iloc[0]
        pair = (str(top["county_a"]), str(top["county_b"]))
        if period is None:
            period = (int(top[YEAR]), int(top[YEAR]))
    if period is not None:
        period = (int(period[0]), int(period[1]))
        if period[1] < period[0]:
            raise ContrastError(f"period {period} ends before it starts; give (first, last).")
    names = _name_lookup(counties)
    a_id = _resolve(pair[0], names, model)
    a = county_side(model, a_id, period, names.get(a_id, a_id))
    if str(pair[1]).lower() == REGION_PARTNER:
        b = region_side(model, a_id, period)
    else:
        b_id = _resolve(pair[1], names, model)
        if b_id == a_id:
            raise ContrastError(f"pair names the same county twice ({a_id}); name two counties.")
        b = county_side(model, b_id, period, names.get(b_id, b_id))
    table, point = decomposition_table(model, a, b, period=period, n_boot=n_boot, ci=ci,
                                       seed=seed, jobs=jobs)
    meta = {"target": target.name, "impact": target.impact, "index": index,
            "scale_weeks": int(scale), "lag_weeks": int(lag), "county_a": a.county_id,
            "county_name_a": a.label, "county_b": b.county_id, "county_name_b": b.label,
            "period_start": _first(a, period), "period_end": _last(a, period)}
    parts = table.copy()
    for i, (k, v) in enumerate(meta.items()):
        parts.insert(i, k, v)
    summary = summary_row(model, target, a, b, table, impacts, unit, meta)
    trajectories = _trajectory_frame(keys, traj, (a, b), period)
    prov = dict(model.provenance)
    prov.update({"n_boot": int(n_boot), "ci": float(ci), "seed": int(seed),
                 "max_distance": float(max_distance), "pair": [a.county_id, b.county_id],
                 "period": list(period) if period else None, "total": point["total"],
                 "n_boot_failed": int(point["n_boot_failed"])})
    return ContrastDecomposition(parts=parts, lookalikes=looks, summary=summary,
                                 trajectories=trajectories,
                                 coefficients=model.coefficients(),
                                 traits_side=_traits_side(model, a, b, table), provenance=prov)


def parse_period(text: str) -> tuple[int, int]:
    """``"2011-2013"`` -> (2011, 2013); ``"2012"`` -> (2012, 2012) (the CLI's ``--period``).

    Raises
    ------
    ContrastError
        If the text is not a year or two years joined by a hyphen, first <= last.

    Examples
    --------
    >>> parse_period("2011-2013"), parse_period("2012")
    ((2011, 2013), (2012, 2012))
    """
    bits = str(text).strip().split("-")
    if len(bits) not in (1, 2) or not all(b.strip().isdigit() for b in bits):
        raise ContrastError(f"--period {text!r} is not a year or a range like 2011-2013.")
    first, last = int(bits[0]), int(bits[-1])
    if last < first:
        raise ContrastError(f"--period {text!r} ends before it starts; write first-last.")
    return first, last


def summary_row(model: TraitModel, target: Target, a: Side, b: Side, table: pd.DataFrame,
                impacts: pd.DataFrame, unit: str, meta: dict) -> pd.DataFrame:
    """The numbers of one contrast paragraph, one row (probability parts in points, 0-100).

    Columns: ``meta`` keys, ``impact_unit``, ``observed_a, observed_b`` (mean observed
    impact over the period in real units), ``expected_a, expected_b`` (modelled chance of an
    impact [%]), ``event_label``, ``gap_pts, exposure_pts, sensitivity_pts,
    unexplained_pts`` and their ``_lo``/``_hi``, ``index_mean_a, index_mean_b`` [index
    units], ``top_trait`` (the trait with the largest absolute sensitivity part),
    ``top_trait_pts``, ``top_trait_label``, ``top_trait_unit``, ``top_trait_a,
    top_trait_b`` (real units).
    """
    prob = table[table["scale"] == "probability"].set_index(["part", "trait"])
    row = dict(meta)
    row["impact_unit"] = unit
    for side, s in (("a", a), ("b", b)):
        obs = impacts[impacts[COUNTY].isin(s.members)]
        if meta["period_start"] is not None:
            obs = obs[(obs[YEAR] >= meta["period_start"]) & (obs[YEAR] <= meta["period_end"])]
        row[f"observed_{side}"] = float(obs["impact"].mean()) if len(obs) else np.nan
        row[f"expected_{side}"] = 100.0 * float(prob.loc[(f"p_{side}", ""), "estimate"])
        row[f"index_mean_{side}"] = float(np.mean(s.x))
    k = int(model.provenance.get("level_at_least", 1))
    row["event_label"] = target.levels[k] if len(target.levels) > k else "impact"
    for part, name in (("total", "gap"), ("exposure", "exposure"),
                       ("sensitivity", "sensitivity"), ("unexplained", "unexplained")):
        rec = prob.loc[(part, "")]
        row[f"{name}_pts"] = 100.0 * float(rec["estimate"])
        row[f"{name}_pts_lo"] = 100.0 * float(rec["lo"])
        row[f"{name}_pts_hi"] = 100.0 * float(rec["hi"])
    per_trait = {t: float(prob.loc[("sensitivity", t), "estimate"]) for t in model.traits}
    top = max(per_trait, key=lambda t: abs(per_trait[t]))
    disp = trait_display(top)
    row.update({"top_trait": top, "top_trait_pts": 100.0 * per_trait[top],
                "top_trait_label": disp.label, "top_trait_unit": disp.unit,
                "top_trait_a": float(a.trait_raw[model.traits.index(top)]) * disp.factor,
                "top_trait_b": float(b.trait_raw[model.traits.index(top)]) * disp.factor})
    return pd.DataFrame([row])


def _traits_side(model: TraitModel, a: Side, b: Side, table: pd.DataFrame) -> pd.DataFrame:
    prob = table[(table["scale"] == "probability") & (table["part"] == "sensitivity")]
    part = prob.set_index("trait")["estimate"]
    recs = []
    for k, t in enumerate(model.traits):
        d = trait_display(t)
        recs.append({"trait": t, "label": d.label, "unit": d.unit,
                     "value_a": float(a.trait_raw[k]) * d.factor,
                     "value_b": float(b.trait_raw[k]) * d.factor,
                     "sensitivity_pts": 100.0 * float(part.get(t, np.nan))})
    return pd.DataFrame(recs)


def _trajectory_frame(keys, traj, sides, period) -> pd.DataFrame:
    parts = []
    L = traj.shape[1]
    for s in sides:
        m = keys[COUNTY].isin(s.members).to_numpy().copy()
        if period is not None:
            y = keys[YEAR].to_numpy()
            m &= (y >= period[0]) & (y <= period[1])
        sub = keys[m]
        vals = traj[m]
        # a region side is the mean trajectory of its counties per year
        mean = pd.DataFrame(vals).groupby(sub[YEAR].to_numpy()).mean()
        for year, v in mean.iterrows():
            parts.append(pd.DataFrame({COUNTY: s.county_id, YEAR: int(year),
                                       "week_offset": np.arange(-(L - 1), 1),
                                       "value": v.to_numpy(float)}))
    if not parts:
        return pd.DataFrame(columns=[COUNTY, YEAR, "week_offset", "value"])
    return pd.concat(parts, ignore_index=True)


def _name_lookup(counties: pd.DataFrame | None) -> dict[str, str]:
    if counties is None or "county_name" not in counties.columns:
        return {}
    return dict(zip(counties[COUNTY].astype(str), counties["county_name"].astype(str)))


def _resolve(name: str, names: dict[str, str], model: TraitModel) -> str:
    known = set(model.county_traits[COUNTY])
    if str(name) in known:
        return str(name)
    by_name = {v.lower(): k for k, v in names.items()}
    if str(name).lower() in by_name and by_name[str(name).lower()] in known:
        return by_name[str(name).lower()]
    raise ContrastError(
        f"county {name!r} is neither a modelled county_id nor a county_name in the counties "
        f"table (e.g. {sorted(known)[:3]}); check the spelling.")


def _first(a: Side, period) -> int:
    return int(period[0]) if period else int(np.min(a.years))


def _last(a: Side, period) -> int:
    return int(period[1]) if period else int(np.max(a.years))
