"""Tiny invented input folders for the inputs-stage tests (not the science: input handling)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

COUNTY_IDS = ["01001", "01003", "02005"]


def counties_frame():
    """Three 1x1 degree boxes with leading-zero ids (invented)."""
    import geopandas as gpd
    from shapely.geometry import box

    return gpd.GeoDataFrame(
        {
            "county_id": COUNTY_IDS,
            "county_name": ["Alder", "Birch", "Cedar"],
            "region": ["north", "north", "south"],
        },
        geometry=[box(0, 0, 1, 1), box(1, 0, 2, 1), box(0, 1, 1, 2)],
        crs="EPSG:4326",
    )


def climate_frame(years: int = 3, start: str = "2001-01-01") -> pd.DataFrame:
    """Monthly rows for every county over ``years`` years (invented numbers)."""
    dates = pd.date_range(start, periods=12 * years, freq="MS")
    n = len(dates)
    return pd.DataFrame(
        {
            "county_id": np.repeat(COUNTY_IDS, n),
            "date": np.tile(dates.strftime("%Y-%m-%d"), len(COUNTY_IDS)),
            "precip_mm": np.tile(np.linspace(10.0, 80.0, n), len(COUNTY_IDS)),
            "tmin_c": 2.0,
            "tmax_c": 14.0,
        }
    )


def write_csv(folder: Path, name: str, frame: pd.DataFrame) -> Path:
    path = folder / f"{name}.csv"
    frame.to_csv(path, index=False)
    return path


def write_text(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text.strip() + "\n", encoding="utf-8")
    return path


def make_project(folder: Path, *, min_years: int = 2, impacts: dict | None = None, tables=None,
                 max_rejected_share: float = 1.0):
    """A project over ``folder``. The row-rule tests lose a large share of their tiny tables on
    purpose, so the table-loss stop is off by default here (1 = never stop); the stop's own
    tests pass the share they test (tests/corpus/test_tables_loss.py)."""
    from impactlink.project import project_from_dict

    raw = {
        "project": {"name": "test", "data_dir": ".", "max_rejected_share": max_rejected_share},
        "calibration": {"start_year": 2001, "end_year": 2003, "min_years": min_years},
    }
    if impacts:
        raw["impacts"] = impacts
    if tables:
        raw["tables"] = tables
    return project_from_dict(raw, base=folder)


@pytest.fixture
def base_folder(tmp_path: Path) -> Path:
    """A folder with a valid counties.geojson and climate.csv."""
    counties_frame().to_file(tmp_path / "counties.geojson", driver="GeoJSON")
    write_csv(tmp_path, "climate", climate_frame())
    return tmp_path
