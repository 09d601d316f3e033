"""The ``indices`` stage: climate series -> standardized drought indices, and the threshold audit.

Public API
----------
compute_indices
    Tidy climate rows (daily, weekly or monthly) -> :class:`IndexCube` of SPI, SPEI, EDDI
    and standardized user indicators at every scale.
to_percentile
    Normal scale -> percentile 0-100.
threshold_audit
    Expected vs observed frequency of a threshold ladder per county, with year-block
    bootstrap intervals and locally calibrated thresholds.

Method choices (also recorded in ``IndexCube.provenance``)
-----------------------------------------------------------
* Grid: ISO 8601 weeks labelled by their Monday; daily rows are summed per week (a week
  with fewer than ``min_valid_days`` valid days is missing; 6 of 7 days are scaled by 7/6);
  weekly rows are used as given; monthly rows keep a monthly grid with scales in months.
  Distributions are fitted per ISO week of year (week 53 pooled with 52) or per month.
* SPI: gamma on positive totals by maximum likelihood (Newton steps from Thom's 1958
  approximation; ``spi_estimator="thom"`` reproduces climate-indices exactly); mixture
  ``H(x) = q + (1 - q) G(x)`` with ``q`` the share of exact zeros; zeros scored at the centre
  of the zero mass ``q / 2`` (Stagge et al. 2015; ``spi_zero_handling="mixture"`` scores them
  at ``q``). Groups with fewer than 3 positive calibration values score positive totals at
  ``q + (1 - q) / 2`` so very dry climates stay finite.
* SPEI: P - PET accumulated; log-logistic by unbiased PWMs (Vicente-Serrano et al. 2010,
  Begueria et al. 2014); GEV by L-moments as an option (Stagge et al. 2015).
  PET: Hargreaves-Samani (FAO-56 eq. 52) or Thornthwaite (1948), or the supplied ``pet_mm``.
* EDDI: accumulated PET ranked by week of year with Tukey plotting positions (Hobbins et al.
  2016), exact inverse normal. Stored with the cube's sign (negative = dry, i.e. high
  demand), the negative of published EDDI; ``eddi_sign="dry_positive"`` keeps the
  published sign.
* Supplied indicators: week-of-year Gringorten plotting positions -> normal scale.
* Every standardized value is clipped to +-3.09 (probabilities 0.001 and 0.999);
  :func:`to_percentile` gives ``100 Phi(z)``.
"""

from .audit import AuditResult, threshold_audit
from .compute import (
    DEFAULT_SCALES_MONTHS,
    DEFAULT_SCALES_WEEKS,
    compute_indices,
    compute_pet,
    standardized_indices,
)
from .cube import IndexCube
from .errors import IndexCalibrationWarning, IndexFitWarning, IndicesError, IndicesWarning
from .standardize import to_percentile

__all__ = [
    "IndexCube",
    "compute_indices",
    "compute_pet",
    "standardized_indices",
    "to_percentile",
    "threshold_audit",
    "AuditResult",
    "IndicesError",
    "IndicesWarning",
    "IndexCalibrationWarning",
    "IndexFitWarning",
    "DEFAULT_SCALES_WEEKS",
    "DEFAULT_SCALES_MONTHS",
]
