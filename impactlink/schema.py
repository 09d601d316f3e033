"""Column names and table specifications: the input and output contract in one place.

Every stage refers to key columns through the constants here, so a name is written once.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

# ---------------------------------------------------------------- key columns
COUNTY = "county_id"
REGION = "region"
WEEK = "week"  # Monday of an ISO 8601 week (datetime64)
YEAR = "year"
MONTH = "month"  # first day of a month (datetime64)
DATE = "date"
INDEX = "index"
SCALE = "scale_weeks"
LAG = "lag_weeks"
VALUE = "value"
LEVEL = "level"

ColumnKind = Literal["id", "str", "date", "int", "float", "nonneg_float", "level", "geometry"]


@dataclass(frozen=True)
class TableSpec:
    """What one input table must look like.

    Attributes
    ----------
    name : str
        Contract name; also the file stem looked for in a data folder.
    required : dict
        Column -> kind for columns that must be present.
    optional : dict
        Column -> kind for columns that may be present.
    key : tuple
        Columns that identify a row; a repeated key is a duplicate and is rejected.
    either : tuple of tuples
        Groups of columns of which at least one complete group must be present
        (e.g. notices need ``county_id`` or ``lon`` + ``lat``).
    """

    name: str
    required: dict[str, ColumnKind]
    optional: dict[str, ColumnKind] = field(default_factory=dict)
    key: tuple[str, ...] = ()
    either: tuple[tuple[str, ...], ...] = ()
    geometry: bool = False


TABLES: dict[str, TableSpec] = {
    "counties": TableSpec(
        "counties",
        required={COUNTY: "id", "geometry": "geometry"},
        optional={"county_name": "str", REGION: "str"},
        key=(COUNTY,),
        geometry=True,
    ),
    "climate": TableSpec(
        "climate",
        required={COUNTY: "id", DATE: "date", "precip_mm": "nonneg_float"},
        optional={
            "tmin_c": "float",
            "tmax_c": "float",
            "tmean_c": "float",
            "pet_mm": "nonneg_float",
        },
        key=(COUNTY, DATE),
    ),
    "indicators": TableSpec(
        "indicators",
        required={COUNTY: "id", DATE: "date", "indicator": "str", VALUE: "float"},
        key=(COUNTY, DATE, "indicator"),
    ),
    "yields": TableSpec(
        "yields",
        required={COUNTY: "id", YEAR: "int", "crop": "str", "yield": "nonneg_float"},
        optional={"unit": "str", "practice": "str"},
        key=(COUNTY, YEAR, "crop", "practice"),
    ),
    "prices": TableSpec(
        "prices",
        required={REGION: "str", DATE: "date", "commodity": "str", "price": "nonneg_float"},
        optional={"unit": "str"},
        key=(REGION, DATE, "commodity"),
    ),
    "price_index": TableSpec(
        "price_index",
        required={DATE: "date", "price_index": "nonneg_float"},
        key=(DATE,),
    ),
    "notices": TableSpec(
        "notices",
        required={"notice_id": "str", "issuer": "str", "start_date": "date", LEVEL: "level"},
        optional={
            COUNTY: "id",
            "lon": "float",
            "lat": "float",
            "end_date": "date",
            "population_served": "nonneg_float",
            "cause": "str",
        },
        key=("notice_id",),
        either=((COUNTY,), ("lon", "lat")),
    ),
    "notice_snapshots": TableSpec(
        "notice_snapshots",
        required={DATE: "date", "issuer": "str", "stage": "level"},
        optional={COUNTY: "id", "lon": "float", "lat": "float"},
        key=(DATE, "issuer"),
    ),
    "water_systems": TableSpec(
        "water_systems",
        required={"system_id": "str", "lon": "float", "lat": "float"},
        optional={"system_name": "str", COUNTY: "id", "population_served": "nonneg_float"},
        key=("system_id",),
    ),
    "field_reports": TableSpec(
        "field_reports",
        required={COUNTY: "id", DATE: "date", "sector": "str"},
        optional={"severity": "int"},
    ),
    "traits": TableSpec("traits", required={COUNTY: "id"}, key=(COUNTY,)),
    "coverage": TableSpec(
        "coverage",
        required={"source": "str", "start_date": "date", "end_date": "date"},
        optional={COUNTY: "id", REGION: "str"},
        either=((COUNTY,), (REGION,)),
    ),
}

#: Tables a project cannot run without.
REQUIRED_TABLES = ("counties", "climate")

#: File extensions looked for, in order of preference.
TABLE_EXTENSIONS = (".parquet", ".csv", ".gpkg", ".geojson", ".json", ".shp")

#: Values that look like missing-value sentinels; a row holding one is rejected.
SENTINELS = (-999.0, -9999.0, -99.0, -99999.0, -9.99e2)

#: Equal-area projection used for areas and overlaps (CONUS Albers, EPSG:5070, an open
#: standard); the project file can choose another.
EQUAL_AREA_CRS = "EPSG:5070"
