"""Assemble the scenario world and write every file of the input contract."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
import pyarrow as pa
import shapely

from impactlink.errors import ProjectError

from ._geography import (
    DEFAULT_COUNTIES,
    MAX_COUNTIES,
    MIN_COUNTIES,
    Geography,
    build_geography,
    km_to_lonlat,
)
from ._hydrology import Hydrology, Traits, draw_traits, simulate_hydrology, weekly_sum
from ._impacts import Impacts, simulate_impacts
from ._weather import Weather, simulate_weather
from ._writers import (
    fmt_date,
    fmt_float,
    repeat_strings,
    write_csv,
    write_geojson,
    write_parquet,
)

DEFAULT_SEED = 20261202

#: Every file :func:`generate` writes, in the order it writes them.
SCENARIO_FILES = (
    "counties.geojson",
    "climate.parquet",
    "indicators.parquet",
    "traits.csv",
    "water_systems.csv",
    "yields.csv",
    "prices.csv",
    "price_index.csv",
    "notices.csv",
    "notice_snapshots.csv",
    "field_reports.csv",
    "coverage.csv",
)


def generate(out_dir: str | Path, *, seed: int = DEFAULT_SEED,
             counties: int = DEFAULT_COUNTIES,
             progress: Callable[[str], None] | None = None) -> dict[str, Path]:
    """Generate the fictional scenario world and write all its files.

    Parameters
    ----------
    out_dir : str or Path
        Folder to write into; created if missing. Existing scenario files are overwritten.
    seed : int, default 20261202
        Seed of the single :func:`numpy.random.default_rng` threaded through every step.
        The same seed gives the same bytes (with the same numpy/pyarrow/shapely versions).
    counties : int, default 60
        Number of counties, 10 to 3143 (the national count). 60 gives the committed world
        in ``scenario_data/``; other sizes scale the state so that counties keep their
        size (about 3 600 km2), with regions of about 12 counties and two water systems
        per three counties. Every file keeps the daily cadence of the contract at any size.
    progress : callable, optional
        Called with a short message (str) before each step, e.g. ``print``.

    Returns
    -------
    dict
        File name (e.g. ``"climate.parquet"``) -> path written.

    Raises
    ------
    ProjectError
        If ``seed`` is not a non-negative integer or ``counties`` is not an integer in
        10-3143, or if ``out_dir`` exists and is not a folder.

    Notes
    -----
    The generation rules and the planted drivers of every impact are written out in
    ``scenario_data/README.md``. The data are invented for demonstration only.

    Examples
    --------
    >>> import tempfile
    >>> from impactlink.scenario import generate
    >>> paths = generate(tempfile.mkdtemp())  # doctest: +SKIP
    >>> sorted(paths)[:2]  # doctest: +SKIP
    ['climate.parquet', 'counties.geojson']
    """
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ProjectError(f"generate: seed must be a non-negative integer; got {seed!r}. "
                         "Pass e.g. seed=20261202.")
    if (isinstance(counties, bool) or not isinstance(counties, (int, np.integer))
            or not MIN_COUNTIES <= counties <= MAX_COUNTIES):
        raise ProjectError(f"generate: counties must be an integer from {MIN_COUNTIES} to "
                           f"{MAX_COUNTIES}; "
                           f"got {counties!r}. Pass e.g. counties=60.")
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise ProjectError(f"generate: out_dir {str(out)!r} exists and is not a folder; "
                                 "pass a folder path")
    out.mkdir(parents=True, exist_ok=True)
    say = progress or (lambda msg: None)
    rng = np.random.default_rng(int(seed))

    say("drawing the map (counties, regions, water systems)")
    geo = build_geography(rng, int(counties))
    say("simulating daily weather 1981-2025")
    wx = simulate_weather(geo, rng)
    say("county traits, soil-water bucket and streamflow")
    traits = draw_traits(geo, rng)
    hyd = simulate_hydrology(geo, wx, traits)
    say("simulating impacts")
    imp = simulate_impacts(geo, traits, hyd, rng)
    say(f"writing files to {out}")
    return _write_all(out, geo, wx, traits, hyd, imp)


def _write_all(out: Path, geo: Geography, wx: Weather, traits: Traits, hyd: Hydrology,
               imp: Impacts) -> dict[str, Path]:
    paths: dict[str, Path] = {}
    ids = np.array(geo.county_ids)
    nd, nc = wx.precip_mm.shape

    paths["counties.geojson"] = write_geojson(out / "counties.geojson", _features(geo))

    climate_schema = pa.schema([("county_id", pa.string()), ("date", pa.date32()),
                                ("precip_mm", pa.float64()), ("tmin_c", pa.float64()),
                                ("tmax_c", pa.float64())])
    dates = wx.dates.values.astype("datetime64[D]")
    paths["climate.parquet"] = write_parquet(out / "climate.parquet", {
        "county_id": repeat_strings(ids, np.repeat(np.arange(nc), nd)),
        "date": np.tile(dates, nc),
        "precip_mm": wx.precip_mm.T.ravel(),
        "tmin_c": wx.tmin_c.T.ravel(),
        "tmax_c": wx.tmax_c.T.ravel(),
    }, climate_schema)

    i0 = (7 - wx.dates[0].weekday()) % 7
    nw = len(hyd.weeks)
    soil = np.round(weekly_sum(hyd.soil_moisture_mm, i0, nw) / 7.0, 1)
    flow = np.round(weekly_sum(hyd.streamflow_m3s, i0, nw) / 7.0, 3)
    wk = hyd.weeks.values.astype("datetime64[D]")
    ind_schema = pa.schema([("county_id", pa.string()), ("date", pa.date32()),
                            ("indicator", pa.string()), ("value", pa.float64())])
    paths["indicators.parquet"] = write_parquet(out / "indicators.parquet", {
        "county_id": repeat_strings(ids, np.tile(np.repeat(np.arange(nc), nw), 2)),
        "date": np.tile(wk, 2 * nc),
        "indicator": repeat_strings(np.array(["soil_moisture", "streamflow"]),
                                    np.repeat(np.arange(2), nw * nc)),
        "value": np.concatenate([soil.T.ravel(), flow.T.ravel()]),
    }, ind_schema)

    paths["traits.csv"] = write_csv(out / "traits.csv", {
        "county_id": ids,
        "irrigated_share": fmt_float(traits.irrigated_share, 3),
        "soil_whc_mm": fmt_float(traits.soil_whc_mm, 1),
        "groundwater_reliance": fmt_float(traits.groundwater_reliance, 3),
        "cattle_per_km2": fmt_float(traits.cattle_per_km2, 1),
    })

    sysd = geo.systems
    lon, lat = km_to_lonlat(sysd["x_km"], sysd["y_km"], geo.scale)
    paths["water_systems.csv"] = write_csv(out / "water_systems.csv", {
        "system_id": sysd["system_id"],
        "system_name": sysd["system_name"],
        "lon": fmt_float(lon, 5),
        "lat": fmt_float(lat, 5),
        "county_id": ids[sysd["county_index"]],
        "population_served": sysd["population_served"].astype(str),
    })

    y = imp.yields
    paths["yields.csv"] = write_csv(out / "yields.csv", {
        "county_id": y["county_id"], "year": y["year"].astype(str), "crop": y["crop"],
        "practice": y["practice"], "yield": fmt_float(y["yield"], 2), "unit": y["unit"],
    })
    p = imp.prices
    paths["prices.csv"] = write_csv(out / "prices.csv", {
        "region": p["region"], "date": fmt_date(p["date"]), "commodity": p["commodity"],
        "price": fmt_float(p["price"], 2), "unit": p["unit"],
    })
    pi = imp.price_index
    paths["price_index.csv"] = write_csv(out / "price_index.csv", {
        "date": fmt_date(pi["date"]), "price_index": fmt_float(pi["price_index"], 2),
    })
    n = imp.notices
    paths["notices.csv"] = write_csv(out / "notices.csv", {
        "notice_id": n["notice_id"], "issuer": n["issuer"],
        "start_date": fmt_date(n["start_date"]), "end_date": fmt_date(n["end_date"]),
        "level": n["level"].astype(str), "lon": fmt_float(n["lon"], 5),
        "lat": fmt_float(n["lat"], 5),
        "population_served": n["population_served"].astype(str), "cause": n["cause"],
    })
    s = imp.notice_snapshots
    paths["notice_snapshots.csv"] = write_csv(out / "notice_snapshots.csv", {
        "date": fmt_date(s["date"]), "issuer": s["issuer"], "stage": s["stage"].astype(str),
    })
    f = imp.field_reports
    paths["field_reports.csv"] = write_csv(out / "field_reports.csv", {
        "county_id": f["county_id"], "date": fmt_date(f["date"]), "sector": f["sector"],
        "severity": f["severity"].astype(str),
    })
    c = imp.coverage
    paths["coverage.csv"] = write_csv(out / "coverage.csv", {
        "source": c["source"], "county_id": c["county_id"], "region": c["region"],
        "start_date": c["start_date"], "end_date": c["end_date"],
    })
    return {name: paths[name] for name in SCENARIO_FILES}


def _features(geo: Geography) -> list[dict]:
    """GeoJSON features with counter-clockwise exterior rings, coordinates to 5 decimals."""
    feats = []
    for cid, name, region, poly in zip(geo.county_ids, geo.county_names, geo.regions,
                                       geo.polygons_km):
        poly = shapely.orient_polygons(poly)  # RFC 7946: exterior counter-clockwise
        rings = [poly.exterior, *poly.interiors]
        coords = []
        for ring in rings:
            xy = np.asarray(ring.coords)
            lon, lat = km_to_lonlat(xy[:, 0], xy[:, 1], geo.scale)
            pts = np.round(np.column_stack([lon, lat]), 5)
            keep = np.ones(len(pts), bool)
            keep[1:] = np.any(pts[1:] != pts[:-1], axis=1)  # drop repeats made by rounding
            coords.append([[float(a), float(b)] for a, b in pts[keep]])
        feats.append({
            "type": "Feature",
            "properties": {"county_id": cid, "county_name": name, "region": region},
            "geometry": {"type": "Polygon", "coordinates": coords},
        })
    return feats
