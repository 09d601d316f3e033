"""Linking stage: impact records -> targets on their own grid, and index values aligned to them.

Public entry points: :func:`build_targets` (one impact -> :class:`LinkResult`),
:func:`feature_values` (one candidate index/scale/lag aligned to a target),
:func:`area_weights`, :func:`panel_frame` and :func:`circularity_flags`.
"""

from impactlink.link._common import (
    CircularityWarning,
    LinkError,
    LinkResult,
    LinkWarning,
    OpenNoticeWarning,
    ReportingEffortWarning,
)
from impactlink.link.build import PANEL_COLUMNS, build_targets, circularity_flags, panel_frame
from impactlink.link.features import feature_matrix, feature_values
from impactlink.link.notices import notice_levels, risk_set
from impactlink.link.prices import deflate
from impactlink.link.spatial import area_weights, points_to_counties
from impactlink.link.target import FeatureRule, Target
from impactlink.link.yields import loo_trend, shortfall_level

__all__ = [
    "Target",
    "FeatureRule",
    "LinkResult",
    "LinkError",
    "LinkWarning",
    "OpenNoticeWarning",
    "ReportingEffortWarning",
    "CircularityWarning",
    "build_targets",
    "feature_values",
    "feature_matrix",
    "area_weights",
    "points_to_counties",
    "panel_frame",
    "circularity_flags",
    "PANEL_COLUMNS",
    "notice_levels",
    "risk_set",
    "deflate",
    "loo_trend",
    "shortfall_level",
]
