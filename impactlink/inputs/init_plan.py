"""What ``impactlink init`` writes: only settings the data in the folder support.

:func:`plan_project` finds the tables (contract files by name, downloaded files by header,
:mod:`impactlink.inputs.recognise`), reads just enough of them (headers, the climate years,
the Quick Stats crops) and returns the keyword arguments of
:func:`impactlink.project_template.render_project_file`:

- ``[formats]`` / ``[units]`` for publisher files (units from headers such as ``precip_in``,
  ``tavg_f``: :func:`~impactlink.inputs.formats.zones.units_from_header`; never from values);
- ``pet_method`` from the columns present: ``pet_mm`` -> "supplied"; ``tmin`` and ``tmax`` ->
  "hargreaves" (Hargreaves and Samani 1985); mean temperature only -> "thornthwaite"
  (Thornthwaite 1948);
- the calibration period: 1991-2020 (30-year normals, WMO-No. 1203, 2017) when the climate
  record covers it, else the whole record;
- audit periods: the early and late halves of the years the climate and the impacts share,
  never past the last year of the record;
- one impact per crop and practice of a Quick Stats export, with ``trend = "auto"`` (the
  trend chosen by leave-one-year-out error in the linking stage).

A file that cannot be read is left to ``impactlink check`` to explain: the plan then keeps
the documented defaults for what it could not see.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

from impactlink.errors import ProjectError
from impactlink.inputs.discover import discover_tables
from impactlink.inputs.formats.zones import climate_columns, units_from_header
from impactlink.inputs.recognise import Recognised, csv_header, recognise_files
from impactlink.link.yields import DEFAULT_SEASON_WEEKS

__all__ = ["plan_project", "pet_method_for", "periods_for"]

#: Calibration period written when the record covers it (WMO 30-year normals, 1991-2020).
NORMALS = (1991, 2020)


def plan_project(folder: str | Path) -> dict[str, Any]:
    """Keyword arguments for :func:`~impactlink.project_template.render_project_file` from a folder.

    Returns
    -------
    dict
        ``tables`` (contract table -> file name), and when the data support them
        ``formats``, ``units``, ``settings`` (``calibration``, ``indices``, ``audit``
        overrides) and ``impacts``.

    Raises
    ------
    ProjectError
        A per-zone file is present but no zone-to-county table is.
    """
    folder = Path(folder)
    tables = dict(discover_tables(folder))
    recognised = {r.table: r for r in recognise_files(folder) if r.table not in tables}
    formats: dict[str, str] = {}
    for table, rec in recognised.items():
        if table != "zones":
            tables[table] = rec.path
            formats[table] = rec.format
    zoned = [t for t in ("climate", "indicators") if formats.get(t) == "zones"]
    if zoned:
        if "zones" not in recognised:
            raise ProjectError(
                f"{folder}: {tables[zoned[0]].name} gives one series per zone (column "
                f"{recognised[zoned[0]].zone_column!r}) but no zone-to-county table was found; "
                "add a CSV with a county column and a zone column (e.g. nClimDiv's "
                "county-to-division file) and run init again")
        formats["zones"] = recognised["zones"].path.name
        formats["zone_column"] = str(recognised[zoned[0]].zone_column)
    plan: dict[str, Any] = {"tables": {k: Path(v).name for k, v in tables.items()}}
    if formats:
        plan["formats"] = formats
    settings: dict[str, dict[str, Any]] = {}
    climate_cols = _columns(tables.get("climate"))
    if formats.get("climate") == "zones":
        units = units_from_header(climate_cols)
        if units:
            plan["units"] = units
    pet = pet_method_for(climate_cols)
    if pet:
        settings["indices"] = {"pet_method": pet}
    impacts, impact_years = _impacts(recognised.get("yields"))
    if impacts:
        plan["impacts"] = impacts
    years = _climate_years(tables.get("climate"), recognised.get("climate"))
    if years is not None:
        calibration, early, late = periods_for(years, impact_years)
        settings["calibration"] = {"start_year": calibration[0], "end_year": calibration[1]}
        if early and late:
            settings["audit"] = {"early": early, "late": late}
    if settings:
        plan["settings"] = settings
    return plan


def pet_method_for(columns: list[str]) -> str | None:
    """PET method the climate columns support (None when the columns are not known).

    Examples
    --------
    >>> pet_method_for(["climdiv_id", "year", "month", "precip_in", "tavg_f"])
    'thornthwaite'
    >>> pet_method_for(["county_id", "date", "precip_mm", "tmin_c", "tmax_c"])
    'hargreaves'
    """
    have = {contract for contract, _ in climate_columns(columns).values()}
    have |= {c.lower() for c in columns}
    if "pet_mm" in have:
        return "supplied"
    if {"tmin_c", "tmax_c"} <= have:
        return "hargreaves"
    if "tmean_c" in have:
        return "thornthwaite"
    return None


def periods_for(climate_years: tuple[int, int], impact_years: tuple[int, int] | None = None
                ) -> tuple[tuple[int, int], tuple[int, int] | None, tuple[int, int] | None]:
    """Calibration period and the audit's early and late halves inside the record.

    Parameters
    ----------
    climate_years : (first, last)
        Years of the climate record.
    impact_years : (first, last), optional
        Years of the impact record; the audit halves cover the years both share.

    Returns
    -------
    calibration, early, late
        ``early``/``late`` are None when the shared record is shorter than 2 years.

    Examples
    --------
    >>> periods_for((1895, 2022), (1926, 2023))
    ((1991, 2020), (1926, 1973), (1974, 2022))
    >>> periods_for((2001, 2024))
    ((2001, 2024), (2001, 2012), (2013, 2024))
    """
    first, last = int(climate_years[0]), int(climate_years[1])
    covered = first <= NORMALS[0] and last >= NORMALS[1]
    calibration = NORMALS if covered else (first, last)
    lo, hi = first, last
    if impact_years is not None:
        lo, hi = max(lo, int(impact_years[0])), min(hi, int(impact_years[1]))
    if hi - lo + 1 < 2:
        return calibration, None, None
    mid = lo + (hi - lo + 1) // 2 - 1
    return calibration, (lo, mid), (mid + 1, hi)


# ----------------------------------------------------------------------------- reading
def _columns(path: Path | None) -> list[str]:
    if path is None:
        return []
    if path.suffix.lower() in (".parquet", ".pq"):
        try:
            import pyarrow.parquet as pq

            return list(pq.read_schema(path).names)
        except Exception:  # unreadable: `impactlink check` will say why
            return []
    return csv_header(path)


def _climate_years(path: Path | None, rec: Recognised | None) -> tuple[int, int] | None:
    """First and last year of the climate file (None when it cannot be read)."""
    if path is None:
        return None
    try:
        if path.suffix.lower() in (".parquet", ".pq"):
            dates = pd.to_datetime(pd.read_parquet(path, columns=["date"])["date"])
            years = dates.dt.year
        else:
            cols = {c.lower(): c for c in csv_header(path)}
            col = cols.get("year") or cols.get("date")
            if col is None:
                return None
            text = pd.read_csv(path, usecols=[col], dtype=str)[col].str.strip()
            years = (pd.to_numeric(text, errors="coerce") if col == cols.get("year")
                     else pd.to_datetime(text, errors="coerce", format="ISO8601").dt.year)
        years = years.dropna()
    except Exception:  # unreadable or odd: keep the defaults, `check` explains the file
        return None
    if years.empty:
        return None
    return int(years.min()), int(years.max())


def _impacts(rec: Recognised | None) -> tuple[dict[str, dict[str, Any]], tuple[int, int] | None]:
    """One impact per crop and practice of a Quick Stats export, and its years."""
    if rec is None:
        return {}, None
    from impactlink.errors import InputError
    from impactlink.inputs.formats.crop_survey import read_quickstats

    try:
        frame = read_quickstats(rec.path).frame
    except InputError:
        return {}, None
    impacts: dict[str, dict[str, Any]] = {}
    for (crop, practice), _ in frame.groupby(["crop", "practice"], sort=True):
        name = "_".join(str(crop).split())
        if practice != "all":
            name += "_" + str(practice).replace("-", "_")
        impacts[name] = {"source": "yields", "crop": str(crop), "practice": str(practice),
                         "trend": "auto",
                         # the end of the index window is searched over the growing season
                         "season_weeks": list(DEFAULT_SEASON_WEEKS)}
    return impacts, (int(frame["year"].min()), int(frame["year"].max()))
