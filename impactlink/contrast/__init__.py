"""Contrast stage: why counties with similar index values had different impacts.

- :mod:`~impactlink.contrast.compare`: observed vs expected events per county, trait odds
  ratios per SD and matched pairs (the older summary tables).
- :mod:`~impactlink.contrast.traitmodel`: the trait-aware, partially pooled impact model.
- :mod:`~impactlink.contrast.decompose`: exposure / sensitivity / unexplained split of the
  gap in expected impact of two counties (Shapley and Oaxaca-Blinder), bootstrap intervals.
- :mod:`~impactlink.contrast.lookalike`: counties that looked alike in the same weeks of the
  same drought yet fared differently.
- :mod:`~impactlink.contrast.explain`: :func:`contrast_counties`, the stage's entry point.

Statistical association in past records, not cause, and not a verdict on anyone's
management.
"""

from impactlink.contrast.compare import (
    ContrastResult,
    ContrastWarning,
    county_contrast,
    poisson_ratio_interval,
)
from impactlink.contrast.decompose import decompose_pair, decomposition_table
from impactlink.contrast.explain import ContrastDecomposition, contrast_counties, parse_period
from impactlink.contrast.lookalike import lookalike_pairs, season_trajectories
from impactlink.contrast.traitmodel import TraitModel, fit_trait_model
from impactlink.contrast.units import trait_display

__all__ = [
    "ContrastDecomposition",
    "ContrastResult",
    "ContrastWarning",
    "TraitModel",
    "contrast_counties",
    "county_contrast",
    "decompose_pair",
    "decomposition_table",
    "fit_trait_model",
    "lookalike_pairs",
    "parse_period",
    "poisson_ratio_interval",
    "season_trajectories",
    "trait_display",
]
