"""Contrast stage: why counties with similar index values had different impacts.

Observed vs expected events per county given the index, a binomial model of index + county
traits (odds ratio per SD, cluster-robust intervals, out-of-sample Brier change) and matched
pairs of counties with similar exposure but different impact rates. Statistical association in
past records, not cause.
"""

from impactlink.contrast.compare import (
    ContrastResult,
    ContrastWarning,
    county_contrast,
    poisson_ratio_interval,
)

__all__ = ["ContrastResult", "ContrastWarning", "county_contrast", "poisson_ratio_interval"]
