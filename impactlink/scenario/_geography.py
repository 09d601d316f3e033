"""The map of the scenario world: state outline, counties, regions, water systems.

Everything is built in a local plane in kilometres (x east, y north, origin at the
south-west corner) and converted to lon/lat (EPSG:4326) with an equirectangular mapping
around the state's middle latitude, which is accurate to well under 1 % over a state-sized
area. Distances used for spatial correlation are taken in the local plane.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import MultiPoint, Point, Polygon, box
from shapely.ops import nearest_points

from ._names import REGION_NAMES, invent_names, utility_name

#: South-west corner of the local plane (degrees).
LON0 = -101.30
LAT0 = 39.40
#: Kilometres per degree latitude (mean, common practice).
KM_PER_DEG_LAT = 110.57
#: Grid of county seeds: columns (west -> east) x rows (south -> north).
N_COLS = 10
N_ROWS = 6
N_SYSTEMS = 40


@dataclass(frozen=True)
class Geography:
    """Counties and water systems of the scenario world.

    Attributes
    ----------
    county_ids, county_names, regions : tuple of str
        One entry per county, ordered west -> east, then south -> north.
    polygons_km : tuple of shapely Polygon
        County polygons in the local km plane.
    centroids_km : ndarray, shape (n_counties, 2)
    area_km2 : ndarray, shape (n_counties,)
    lat_deg : ndarray, shape (n_counties,)
        Latitude of each county centroid (for radiation in PET).
    west_east : ndarray, shape (n_counties,)
        0 at the western edge, 1 at the eastern edge: drives the climate gradient.
    systems : dict of arrays
        ``system_id``, ``system_name``, ``x_km``, ``y_km``, ``county_index``,
        ``population_served``.
    """

    county_ids: tuple[str, ...]
    county_names: tuple[str, ...]
    regions: tuple[str, ...]
    polygons_km: tuple[Polygon, ...]
    centroids_km: np.ndarray
    area_km2: np.ndarray
    lat_deg: np.ndarray
    west_east: np.ndarray
    systems: dict


def km_to_lonlat(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Local plane (km) -> lon/lat (degrees), equirectangular around the middle latitude."""
    lat_mid = LAT0 + 165.0 / KM_PER_DEG_LAT
    km_per_deg_lon = KM_PER_DEG_LAT * np.cos(np.deg2rad(lat_mid))
    return LON0 + np.asarray(x) / km_per_deg_lon, LAT0 + np.asarray(y) / KM_PER_DEG_LAT


def build_geography(rng: np.random.Generator) -> Geography:
    """Draw the state outline, the county tessellation, regions and water systems."""
    outline = _state_outline(rng)
    seeds, cols, rows = _county_seeds(outline, rng)
    polygons = _voronoi_counties(seeds, outline)
    centroids = np.array([[p.centroid.x, p.centroid.y] for p in polygons])
    area = np.array([p.area for p in polygons])
    xmin, _, xmax, _ = outline.bounds
    west_east = (centroids[:, 0] - xmin) / (xmax - xmin)
    _, lat = km_to_lonlat(centroids[:, 0], centroids[:, 1])
    n = len(polygons)
    county_ids = tuple(f"90{2 * i + 1:03d}" for i in range(n))  # odd codes, state code 90
    names = tuple(invent_names(n, rng))
    regions = tuple(_region_of(c, r) for c, r in zip(cols, rows))
    systems = _water_systems(polygons, rng, exclude=frozenset(names))
    return Geography(county_ids, names, regions, tuple(polygons), centroids, area, lat,
                     west_east, systems)


def _state_outline(rng: np.random.Generator) -> Polygon:
    """An irregular state outline: surveyed straight west/north edges, a stepped south edge,
    a meandering river on the east and a river-cut north-east corner."""
    ys = np.linspace(0.0, 285.0, 60)
    phase = rng.uniform(0, 2 * np.pi, size=2)
    river_x = 640.0 + 12.0 * np.sin(ys / 33.0 + phase[0]) + 5.0 * np.sin(ys / 9.0 + phase[1])
    river_x += np.cumsum(rng.normal(0.0, 1.2, size=ys.size))  # small meanders
    t = np.linspace(0.0, 1.0, 25)[1:]
    corner_x = river_x[-1] + (585.0 - river_x[-1]) * t + 4.0 * np.sin(t * 9.0)
    corner_y = 285.0 + (330.0 - 285.0) * t + 3.0 * np.sin(t * 13.0)
    pts = [(0.0, 0.0), (230.0, 0.0), (230.0, -14.0)]
    pts += [(float(x), float(y) if y > 0 else -14.0) for x, y in zip(river_x, ys)]
    pts += list(zip(corner_x.tolist(), corner_y.tolist()))
    pts += [(585.0, 330.0), (0.0, 330.0)]
    poly = Polygon(pts)
    if not poly.is_valid:
        poly = shapely.make_valid(poly)
    return poly


def _county_seeds(outline: Polygon, rng: np.random.Generator):
    """Jittered grid of seed points, pulled inside the outline where the jitter left it."""
    xs = np.linspace(30.0, 592.0, N_COLS)
    ys = np.linspace(22.0, 305.0, N_ROWS)
    dx, dy = xs[1] - xs[0], ys[1] - ys[0]
    col_grid, row_grid = np.meshgrid(np.arange(N_COLS), np.arange(N_ROWS), indexing="ij")
    cols, rows = col_grid.ravel(), row_grid.ravel()  # west -> east, then south -> north
    px = xs[cols] + rng.uniform(-0.3, 0.3, cols.size) * dx
    py = ys[rows] + rng.uniform(-0.3, 0.3, rows.size) * dy
    inner = outline.buffer(-10.0)
    seeds = []
    # Loop over 60 seed points (not a hot path): pull stray seeds inside the outline.
    for x, y in zip(px, py):
        p = Point(x, y)
        if not inner.contains(p):
            p = nearest_points(inner, p)[0]
        seeds.append((p.x, p.y))
    return np.array(seeds), cols, rows


def _voronoi_counties(seeds: np.ndarray, outline: Polygon) -> list[Polygon]:
    """Voronoi cells of the seeds, clipped to the outline, in seed order."""
    xmin, ymin, xmax, ymax = outline.bounds
    env = box(xmin - 100, ymin - 100, xmax + 100, ymax + 100)
    cells = shapely.voronoi_polygons(MultiPoint(seeds), extend_to=env)
    cells = list(cells.geoms)
    out = []
    # Match cells to seeds (60 x 60 containment tests; GEOS does not promise an order).
    for x, y in seeds:
        p = Point(x, y)
        cell = next(c for c in cells if c.contains(p))
        clipped = cell.intersection(outline)
        if clipped.geom_type != "Polygon":  # keep the largest part of a rare multipart cell
            clipped = max(clipped.geoms, key=lambda g: g.area)
        out.append(shapely.set_precision(clipped, 0.0))
    return out


def _region_of(col: int, row: int) -> str:
    """Five regions: two in the west (north/south), one central, two in the east."""
    if col <= 3:
        return REGION_NAMES[0] if row >= 3 else REGION_NAMES[1]
    if col <= 6:
        return REGION_NAMES[2]
    return REGION_NAMES[3] if row >= 3 else REGION_NAMES[4]


def _water_systems(polygons: list[Polygon], rng: np.random.Generator, *,
                   exclude: frozenset[str]) -> dict:
    """About 40 public water systems as points inside counties."""
    n_c = len(polygons)
    first = rng.choice(n_c, size=N_SYSTEMS - 6, replace=False)
    second = rng.choice(first, size=6, replace=False)  # six counties hold two systems
    county_index = np.sort(np.concatenate([first, second]))
    towns = invent_names(N_SYSTEMS, rng, exclude=exclude)
    names, xs, ys = [], [], []
    # Loop over 40 systems (not a hot path): rejection-sample a point inside the county.
    for k, ci in enumerate(county_index):
        poly = polygons[ci].buffer(-4.0)
        x0, y0, x1, y1 = poly.bounds
        while True:
            x, y = rng.uniform(x0, x1), rng.uniform(y0, y1)
            if poly.contains(Point(x, y)):
                break
        xs.append(x)
        ys.append(y)
        names.append(utility_name(towns[k], rng))
    pop = np.exp(rng.normal(np.log(12000.0), 1.1, N_SYSTEMS))
    pop = np.round(np.clip(pop, 800, 450000), -1).astype(np.int64)
    return {
        "system_id": np.array([f"WS{9000 + k + 1}" for k in range(N_SYSTEMS)]),
        "system_name": np.array(names),
        "x_km": np.array(xs),
        "y_km": np.array(ys),
        "county_index": county_index.astype(np.int64),
        "population_served": pop,
    }
