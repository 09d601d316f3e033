"""Readers for the files users download from publishers, into the input contract.

Each reader recognises its format from the header or content (never the file name), keeps
every raw row accounted for (used, or rejected with a reason) and returns a
:class:`FormatResult` (or a GeoDataFrame for boundaries):

- :mod:`~impactlink.inputs.formats.crop_survey`: NASS Quick Stats CSV exports -> yields;
- :mod:`~impactlink.inputs.formats.zones`: climate or indicators given per zone (nClimDiv climate
  division, basin, grid cell) + a zone-to-county table -> climate / indicators per county;
- :mod:`~impactlink.inputs.formats.topojson`: county boundaries as TopoJSON -> counties.
"""

from impactlink.inputs.formats._ledger import HEADER_ROWS, REJECTED_COLUMNS, FormatResult
from impactlink.inputs.formats.crop_survey import (
    MARKER_REASONS,
    QUICKSTATS_COLUMNS,
    parse_data_item,
    read_quickstats,
    sniff_quickstats,
)

__all__ = [
    "FormatResult",
    "HEADER_ROWS",
    "REJECTED_COLUMNS",
    "MARKER_REASONS",
    "QUICKSTATS_COLUMNS",
    "parse_data_item",
    "read_quickstats",
    "sniff_quickstats",
]
