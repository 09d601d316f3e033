"""Linking stage: impact records -> targets on their own grid, and index values aligned to them."""

from impactlink.link.target import FeatureRule, Target

__all__ = ["Target", "FeatureRule"]
