"""Small pieces the stage functions share: best and trigger candidates, model options from
``[models]``, indicator names in their normal form, county latitudes, frame concatenation."""

from __future__ import annotations

from typing import Any

import pandas as pd

from impactlink.errors import ContrastError
from impactlink.project import Project
from impactlink.schema import COUNTY

from .state import Candidate, InputsResult, LinkStageResult, RankResult


def _source_of(project: Project, impact: str) -> str | None:
    return next((s.source for s in project.impacts if s.name == impact), None)


def _best_candidate(table: pd.DataFrame | None, target: Any) -> Candidate | None:
    """(index, scale_weeks, lag_weeks) of :func:`impactlink.skill.best_candidate`, or None."""
    from impactlink.skill import best_candidate

    if table is None or table.empty:
        return None
    best = best_candidate(table, getattr(target, "name", None))
    return None if best is None else (best.index, int(best.scale), int(best.lag))


def _trigger_candidate(lk: LinkStageResult, rk: RankResult, target: Any) -> Candidate | None:
    """Candidate for a state target's triggers: its impact's onset target's, else its own.

    Siblings are matched on the targets' own ``impact`` and ``role`` fields (never on the
    name); several onset targets (one per horizon) are taken in name order.
    """
    onsets = sorted((t for t in lk.targets if t.impact == target.impact and t.role == "onset"),
                    key=lambda t: t.name)
    for t in [*onsets, target]:
        if t.name in rk.best:
            return rk.best[t.name][1]
    return None


def _meta(target: Any, cand: Candidate) -> dict[str, Any]:
    idx, scale, lag = cand
    return {"impact": target.impact, "target": target.name, "index": idx,
            "scale_weeks": scale, "lag_weeks": lag}


def _model_options(project: Project, inputs: InputsResult, target: Any) -> dict[str, Any]:
    """Final-fit options from ``[models]``: pooling, seasonal terms, county traits.

    County pooling and traits need a county grain; region-month targets fall back to one
    model for all units.

    Raises
    ------
    ContrastError
        If ``[models] traits`` names a column the traits table lacks.
    """
    county_grain = target.grain != "region_month"
    opts: dict[str, Any] = {
        "pooling": project.models.pooling if county_grain else "all",
        "seasonal": project.models.seasonal,
    }
    traits = inputs.bundle.tables.get("traits")
    if project.models.traits and county_grain and traits is not None:
        missing = set(project.models.traits) - set(traits.columns)
        if missing:
            raise ContrastError(
                f"[models] traits names {sorted(missing)}, which the traits table lacks; "
                f"its columns are {sorted(c for c in traits.columns if c != COUNTY)}"
            )
        opts["traits"] = traits[[COUNTY, *project.models.traits]]
    return opts


def _indicator_keys(indicators: pd.DataFrame | None) -> pd.DataFrame | None:
    """The indicators table with each name in its normal form (NFKC, spaces, case folded:
    :func:`impactlink.inputs.keys.normalise_key`), so "Soil Moisture " and "soil moisture"
    are one indicator."""
    if indicators is None or "indicator" not in indicators.columns:
        return indicators
    from impactlink.link._keys import forms

    return indicators.assign(indicator=forms(indicators["indicator"]).to_numpy())


def _latitudes(counties: Any) -> pd.Series:
    c = counties.to_crs("EPSG:4326") if counties.crs is not None else counties
    # centroids in lon/lat are adequate for day length (errors far below 0.1 degree of latitude)
    cent = c.geometry.representative_point()
    return pd.Series(cent.y.to_numpy(), index=c[COUNTY].astype(str).to_numpy(), name="lat_deg")


def _concat(frames: list[pd.DataFrame]) -> pd.DataFrame:
    frames = [f for f in frames if f is not None and len(f)]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
