"""The map of the scenario world: state outline, counties, regions, water systems.

Everything is built in a local plane in kilometres (x east, y north, origin at the
south-west corner) and converted to lon/lat (EPSG:4326) with an equirectangular mapping
around the state's middle latitude, which is accurate to well under 1 % over a state-sized
area. Distances used for spatial correlation are taken in the local plane.

The default world has 60 counties on a 640 km x 330 km state. A world of ``n`` counties
keeps the county size (about 3 600 km2): the outline is scaled by ``sqrt(n / 60)`` in both
directions around the same middle latitude, the seed grid grows with it, and regions are
blocks of 4 x 3 grid cells (about 12 counties each).
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
#: County count of the default world (the committed scenario).
DEFAULT_COUNTIES = 60
#: Smallest world (the map needs a few counties on each side of the state).
MIN_COUNTIES = 10
#: Largest world: the number of county-equivalents of the United States (common practice).
MAX_COUNTIES = 3143
#: Region blocks of a scaled world, in seed-grid cells (columns x rows): about 12 counties.
REGION_BLOCK = (4, 3)


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
    scale : float
        Linear size relative to the default world (``sqrt(n_counties / 60)``).
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
    scale: float = 1.0


def km_to_lonlat(x: np.ndarray, y: np.ndarray, scale: float = 1.0
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Local plane (km) -> lon/lat (degrees), equirectangular around the middle latitude.

    ``scale`` is :attr:`Geography.scale`: a scaled world keeps the middle latitude and
    longitude of the default one and moves its south-west corner out.
    """
    lat_mid = LAT0 + 165.0 / KM_PER_DEG_LAT
    km_per_deg_lon = KM_PER_DEG_LAT * np.cos(np.deg2rad(lat_mid))
    lon0, lat0 = LON0, LAT0
    if scale != 1.0:
        lon0 = LON0 - 320.0 * (scale - 1.0) / km_per_deg_lon
        lat0 = LAT0 - 165.0 * (scale - 1.0) / KM_PER_DEG_LAT
    return lon0 + np.asarray(x) / km_per_deg_lon, lat0 + np.asarray(y) / KM_PER_DEG_LAT


def build_geography(rng: np.random.Generator, n_counties: int = DEFAULT_COUNTIES
                    ) -> Geography:
    """Draw the state outline, the county tessellation, regions and water systems.

    Parameters
    ----------
    rng : numpy.random.Generator
        The scenario's single generator.
    n_counties : int, default 60
        Number of counties (1 to :data:`MAX_COUNTIES`). 60 gives the committed world.
    """
    scale = float(np.sqrt(n_counties / DEFAULT_COUNTIES))
    outline = _state_outline(rng)
    if n_counties == DEFAULT_COUNTIES:
        seeds, cols, rows = _county_seeds(outline, rng)
    else:
        outline = shapely.transform(outline, lambda c: c * scale)
        seeds, cols, rows = _scaled_seeds(outline, n_counties, scale, rng)
    polygons = _voronoi_counties(seeds, outline)
    centroids = shapely.get_coordinates(shapely.centroid(np.array(polygons, dtype=object)))
    area = shapely.area(np.array(polygons, dtype=object))
    xmin, _, xmax, _ = outline.bounds
    west_east = (centroids[:, 0] - xmin) / (xmax - xmin)
    _, lat = km_to_lonlat(centroids[:, 0], centroids[:, 1], scale)
    n = len(polygons)
    # Five-character codes: odd county numbers under state code 90 (no real state uses
    # 90-99); every 500 counties move to the next state code (91, 92, ...).
    county_ids = tuple(f"{90 + i // 500}{2 * (i % 500) + 1:03d}" for i in range(n))
    names = tuple(invent_names(n, rng))
    if n_counties == DEFAULT_COUNTIES:
        regions = tuple(_region_of(c, r) for c, r in zip(cols, rows))
    else:
        regions = _block_regions(cols, rows, rng, exclude=frozenset(names))
    n_sys = N_SYSTEMS if n == DEFAULT_COUNTIES else max(2, round(n * N_SYSTEMS / 60))
    systems = _water_systems(polygons, rng, exclude=frozenset(names) | frozenset(regions),
                             n_systems=n_sys)
    return Geography(county_ids, names, regions, tuple(polygons), centroids, area, lat,
                     west_east, systems, scale)


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


def _scaled_seeds(outline: Polygon, n: int, scale: float, rng: np.random.Generator):
    """Jittered seed grid of a scaled world: exactly ``n`` seeds inside the outline.

    The grid starts at the default 10 x 6 layout times ``scale`` and grows until enough
    jittered points fall inside the outline (10 km in from the edge); the surplus points are
    dropped at random. Returns seeds ordered west -> east, then south -> north.
    """
    inner = outline.buffer(-10.0)
    xmin, ymin, xmax, ymax = outline.bounds
    n_cols = max(1, round(N_COLS * scale))
    n_rows = max(1, round(N_ROWS * scale))
    while True:  # a few rounds at most: each adds a column and a row
        dx = (xmax - xmin) / n_cols
        dy = (ymax - ymin) / n_rows
        col_grid, row_grid = np.meshgrid(np.arange(n_cols), np.arange(n_rows), indexing="ij")
        cols, rows = col_grid.ravel(), row_grid.ravel()
        px = xmin + (cols + 0.5 + rng.uniform(-0.3, 0.3, cols.size)) * dx
        py = ymin + (rows + 0.5 + rng.uniform(-0.3, 0.3, rows.size)) * dy
        inside = shapely.contains_xy(inner, px, py)
        if inside.sum() >= n:
            break
        n_cols += 1
        n_rows += 1
    keep = np.flatnonzero(inside)
    keep = np.sort(rng.choice(keep, size=n, replace=False))
    return np.column_stack([px[keep], py[keep]]), cols[keep], rows[keep]


def _block_regions(cols: np.ndarray, rows: np.ndarray, rng: np.random.Generator, *,
                   exclude: frozenset[str]) -> tuple[str, ...]:
    """Regions of a scaled world: blocks of :data:`REGION_BLOCK` seed-grid cells.

    Blocks at the ragged edge of the state with fewer than 4 counties join the nearest
    block (in block units) that has more, so regions hold about 12 counties.
    """
    bc, br = REGION_BLOCK
    key = (cols // bc) * 100_000 + rows // br
    ukeys, block, counts = np.unique(key, return_inverse=True, return_counts=True)
    bx, by = ukeys // 100_000, ukeys % 100_000
    big = np.flatnonzero(counts >= 4)
    if big.size == 0:
        big = np.array([int(np.argmax(counts))])
    d2 = (bx[:, None] - bx[big][None, :]) ** 2 + (by[:, None] - by[big][None, :]) ** 2
    target = big[np.argmin(d2, axis=1)]
    target[big] = big
    _, region_index = np.unique(target[block], return_inverse=True)
    names = invent_names(int(region_index.max()) + 1, rng, exclude=exclude)
    return tuple(np.array(names)[region_index].tolist())


def _voronoi_counties(seeds: np.ndarray, outline: Polygon) -> list[Polygon]:
    """Voronoi cells of the seeds, clipped to the outline, in seed order."""
    xmin, ymin, xmax, ymax = outline.bounds
    env = box(xmin - 100, ymin - 100, xmax + 100, ymax + 100)
    cells = np.array(list(shapely.voronoi_polygons(MultiPoint(seeds), extend_to=env).geoms),
                     dtype=object)
    # Match cells to seeds with a spatial index (GEOS does not promise an order).
    points = shapely.points(seeds)
    seed_i, cell_i = shapely.STRtree(cells).query(points, predicate="within")
    if not np.array_equal(np.sort(seed_i), np.arange(len(seeds))):
        raise RuntimeError("_voronoi_counties: a seed lies in no cell or in two cells")
    match = np.empty(len(seeds), dtype=np.int64)
    match[seed_i] = cell_i
    clipped = shapely.intersection(cells[match], outline)
    multi = np.flatnonzero(shapely.get_type_id(clipped) != 3)  # 3 = Polygon
    # Loop over the rare multipart cells only: keep the largest part.
    for i in multi:
        clipped[i] = max(clipped[i].geoms, key=lambda g: g.area)
    return list(shapely.set_precision(clipped, 0.0))


def _region_of(col: int, row: int) -> str:
    """Five regions: two in the west (north/south), one central, two in the east."""
    if col <= 3:
        return REGION_NAMES[0] if row >= 3 else REGION_NAMES[1]
    if col <= 6:
        return REGION_NAMES[2]
    return REGION_NAMES[3] if row >= 3 else REGION_NAMES[4]


def _water_systems(polygons: list[Polygon], rng: np.random.Generator, *,
                   exclude: frozenset[str], n_systems: int = N_SYSTEMS) -> dict:
    """Public water systems as points inside counties (40 for 60 counties, 2 per 3)."""
    n_c = len(polygons)
    n_double = round(n_systems * 6 / N_SYSTEMS)  # six of 40 counties hold two systems
    first = rng.choice(n_c, size=n_systems - n_double, replace=False)
    second = rng.choice(first, size=n_double, replace=False)
    county_index = np.sort(np.concatenate([first, second]))
    towns = invent_names(n_systems, rng, exclude=exclude)
    names, xs, ys = [], [], []
    # Loop over systems (2 per 3 counties, a few cheap GEOS calls each; not a hot path):
    # rejection-sample a point inside the county, drawing in a fixed order.
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
    pop = np.exp(rng.normal(np.log(12000.0), 1.1, n_systems))
    pop = np.round(np.clip(pop, 800, 450000), -1).astype(np.int64)
    width = max(3, len(str(n_systems)))
    return {
        "system_id": np.array([f"WS9{k + 1:0{width}d}" for k in range(n_systems)]),
        "system_name": np.array(names),
        "x_km": np.array(xs),
        "y_km": np.array(ys),
        "county_index": county_index.astype(np.int64),
        "population_served": pop,
    }
