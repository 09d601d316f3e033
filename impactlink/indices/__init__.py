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
from .errors import IndexCalibrationWarning, IndexFitWarning, IndexInputError, IndexInputWarning
from .standardize import to_percentile

__all__ = [
    "IndexCube",
    "compute_indices",
    "compute_pet",
    "standardized_indices",
    "to_percentile",
    "threshold_audit",
    "AuditResult",
    "IndexInputError",
    "IndexInputWarning",
    "IndexCalibrationWarning",
    "IndexFitWarning",
    "DEFAULT_SCALES_WEEKS",
    "DEFAULT_SCALES_MONTHS",
]
