"""Write the invented Kestlow Vale demo data set into this folder.

Kestlow Vale is an invented hillside town in an invented valley; nothing here is real data.
The script is the record of how every file was made: run it again to get the same files
(byte for byte where the libraries allow; the GeoPackage timestamp is pinned).

    python demo_catchment/make_demo.py

It writes, next to itself:

- ``subcatchments.gpkg`` (layer ``subcatchments``): Voronoi cells clipped to the basin outline,
  fields ``catchment_code``, ``name``, ``loss_method`` (null for most).
- ``soil_groups.tif``: 10 m hydrologic soil group codes (uint8, 255 = nodata).
- ``land_cover.tif``: 5 m cover codes on the same extent (2 x 2 cover cells = 1 soil cell).
- ``storms/observed_event.csv``: an observed-style 5-minute hyetograph.
- ``storms/radar_event.nc``: an invented radar-style rain grid (CF NetCDF, 0.005 degree
  longitude-latitude cells, 5-minute rain rates): the observed event with a storm cell
  crossing the valley.
- ``storms/gauges.gpkg``, ``storms/gauge_records.csv``: three invented rain gauges and their
  5-minute records of another event (the ``gauged_event`` storm).
- ``gisrun.toml``: the project file that ties them together.
- ``impervious_percent.tif`` and ``disconnected_roofs.toml``: an impervious-percent grid and a
  second project file where most house roofs spill onto lawns (``make_impervious.py``).
- ``soil_map.gpkg`` (layer ``soil_map``): the soil raster as polygons (each connected patch of
  one code, traced along the cell edges), field ``soil_group``; unsurveyed patches have none.
- ``gisrun_soil_polygons.toml``: the same project with the soil map as polygons.
- ``soil_map_units.tif``, ``soil_map_units.csv``, ``gisrun_map_units.toml``: the soil map as
  map-unit keys with an attribute table, and the project file that reads them
  (``map_units.py``).
- ``areal_reduction.toml`` and ``storms/invented_area_factors.csv``: design storms reduced for
  area (ARR 2019's short-duration relation, a fixed factor, and a factor table invented for the
  demo; ``areal_storms.py``).

The data exist to show the program working; they are never a test reference.
"""

from __future__ import annotations

import os
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import rasterio
import shapely
import xarray as xr
from areal_storms import write_areal_reduction  # noqa: E402  (beside this script)
from make_impervious import impervious_percent, write_impervious, write_scenario  # noqa: E402
from map_units import write_map_units  # noqa: E402  (beside this script)
from numpy.typing import NDArray
from rasterio.features import rasterize, shapes
from rasterio.transform import from_origin
from scipy.ndimage import gaussian_filter

HERE = Path(__file__).resolve().parent
RNG_STATE = 20240611  # fixed state of the random-number generator: same files every run
TOWN = "Kestlow Vale"
CODE_PREFIX = "KV"
CRS = "EPSG:32617"  # WGS 84 / UTM zone 17N; the coordinates below are invented
HEAD_E_M, AXIS_N_M = 537_000.0, 4_381_200.0  # valley head (west end) on the valley axis
VALLEY_LENGTH_M = 3_400.0
MAX_HALF_WIDTH_M = 1_000.0
SOIL_CELL_M, COVER_CELL_M = 10.0, 5.0
MARGIN_M = 60.0  # the rasters reach this far past the basin on the west, north and south
EAST_CUT_M = 20.0  # ... and stop this far short of the outlet on the east (a small sliver)
N_CELLS_TARGET = 90
GPKG_DATE = "2024-06-11T00:00:00.000Z"  # pinned so the GeoPackage is reproducible

SOIL_CODES = {1: "A", 2: "B", 3: "C", 4: "D", 5: "B/D", 6: "C/D", 9: "water"}
SOIL_NODATA = 255
COVER_CODES = {
    1: "impervious",
    2: "residential_quarter_acre",
    3: "residential_half_acre",
    4: "commercial",
    5: "open_space_good",
    6: "woods_good",
    7: "pasture_good",
    8: "row_crops_good",
}
COVER_NODATA = 0
DESIGN_STORMS_MM = {"2yr": 50, "10yr": 90, "100yr": 140}  # invented depths for the invented town

SOIL_COLOURS = {1: (230, 200, 120), 2: (170, 200, 110), 3: (110, 160, 170), 4: (90, 90, 160),
                5: (150, 130, 190), 6: (120, 100, 150), 9: (60, 120, 230)}
COVER_COLOURS = {1: (90, 90, 90), 2: (230, 170, 150), 3: (240, 210, 170), 4: (200, 80, 80),
                 5: (160, 220, 130), 6: (40, 120, 50), 7: (200, 220, 110), 8: (220, 190, 60)}


# --- valley geometry (local frame: u along the valley from the head, v across, north +) ---

def _valley_shape(rng: np.random.Generator) -> dict[str, NDArray[np.float64]]:
    """Phases of the wobbles that make the outline and the stream look natural."""
    return {"phase": rng.uniform(0.0, 2.0 * np.pi, size=5)}


def centreline_v_m(u_m: NDArray[np.float64], shape: dict) -> NDArray[np.float64]:
    """Across-valley offset of the stream from the valley axis, m."""
    t = np.clip(u_m / VALLEY_LENGTH_M, 0.0, 1.0)
    return 90.0 * np.sin(2.0 * np.pi * 1.2 * t + shape["phase"][0]) * (1.0 - 0.5 * t)


def half_width_m(u_m: NDArray[np.float64], shape: dict, *, north: bool) -> NDArray[np.float64]:
    """Distance from the stream to the basin divide on one side, m."""
    t = np.clip(u_m / VALLEY_LENGTH_M, 0.0, 1.0)
    s = 0.98 * t**0.8
    base = MAX_HALF_WIDTH_M * np.sin(np.pi * s) ** 0.9
    p1, p2 = (shape["phase"][1], shape["phase"][2]) if north else (shape["phase"][3],
                                                                   shape["phase"][4])
    wobble = 1.0 + 0.06 * np.sin(6.0 * np.pi * t + p1) + 0.04 * np.sin(14.0 * np.pi * t + p2)
    return base * wobble * (0.92 if north else 1.0)


def basin_outline(shape: dict) -> shapely.Polygon:
    """Basin outline in local coordinates: a teardrop valley, rounded head, cut at the outlet."""
    u = np.linspace(0.0, VALLEY_LENGTH_M, 341)
    vc = centreline_v_m(u, shape)
    north = np.column_stack([u, vc + half_width_m(u, shape, north=True)])
    south = np.column_stack([u, vc - half_width_m(u, shape, north=False)])
    ring = np.vstack([north, south[::-1]])
    outline = shapely.Polygon(ring).buffer(-40.0).buffer(40.0)
    return shapely.set_precision(outline, 0.01)


def relative_height(u_m: NDArray[np.float64], v_m: NDArray[np.float64], shape: dict
                    ) -> NDArray[np.float64]:
    """0 on the stream, 1 on the divide (above 1 outside the basin): a stand-in for elevation."""
    vc = centreline_v_m(u_m, shape)
    north = v_m >= vc
    width = np.where(north, half_width_m(u_m, shape, north=True),
                     half_width_m(u_m, shape, north=False))
    return np.abs(v_m - vc) / np.maximum(width, 60.0)


# --- grids and smooth noise ---

def grid_frame(outline_local: shapely.Polygon, cell_m: float) -> tuple[float, float, int, int]:
    """West, north, columns and rows of a raster that covers the basin as described above."""
    minu, minv, maxu, maxv = outline_local.bounds
    west = np.floor((HEAD_E_M + minu - MARGIN_M) / SOIL_CELL_M) * SOIL_CELL_M
    east = np.floor((HEAD_E_M + maxu - EAST_CUT_M) / SOIL_CELL_M) * SOIL_CELL_M
    south = np.floor((AXIS_N_M + minv - MARGIN_M) / SOIL_CELL_M) * SOIL_CELL_M
    north = np.ceil((AXIS_N_M + maxv + MARGIN_M) / SOIL_CELL_M) * SOIL_CELL_M
    return west, north, int(round((east - west) / cell_m)), int(round((north - south) / cell_m))


def cell_centres_local(frame: tuple[float, float, int, int], cell_m: float
                       ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Local (u, v) of every cell centre, arrays of shape (rows, cols)."""
    west, north, cols, rows = frame
    x = west + (np.arange(cols) + 0.5) * cell_m - HEAD_E_M
    y = north - (np.arange(rows) + 0.5) * cell_m - AXIS_N_M
    return np.meshgrid(x, y)


def smooth_noise(rng: np.random.Generator, shape: tuple[int, int], sigma_cells: float
                 ) -> NDArray[np.float64]:
    """Gaussian-filtered white noise rescaled to mean 0, standard deviation 1."""
    field = gaussian_filter(rng.standard_normal(shape), sigma_cells, mode="reflect")
    return (field - field.mean()) / field.std()


def in_ellipse(u: NDArray, v: NDArray, centre: tuple[float, float], radii: tuple[float, float]
               ) -> NDArray[np.bool_]:
    """True where (u, v) lies inside an axis-aligned ellipse."""
    return ((u - centre[0]) / radii[0]) ** 2 + ((v - centre[1]) / radii[1]) ** 2 <= 1.0


def pond_centre(shape: dict) -> tuple[float, float]:
    """Local centre of the mill pond, just south of the stream in the town."""
    u = 0.62 * VALLEY_LENGTH_M
    return u, float(centreline_v_m(np.array(u), shape)) - 55.0


def quarry_mask(u: NDArray, v: NDArray, shape: dict) -> NDArray[np.bool_]:
    """The old gravel workings: a strip on the south slope never soil-surveyed (nodata)."""
    u0 = 0.30 * VALLEY_LENGTH_M
    v0 = float(centreline_v_m(np.array(u0), shape)) - 0.62 * float(
        half_width_m(np.array(u0), shape, north=False))
    return (np.abs(u - u0) <= 100.0) & (np.abs(v - v0) <= 15.0)


# --- soil ---

def make_soil(rng: np.random.Generator, shape: dict, frame: tuple) -> NDArray[np.uint8]:
    """Soil groups: wet alluvium on the valley floor, B and C on the slopes, A near the divides."""
    u, v = cell_centres_local(frame, SOIL_CELL_M)
    h = relative_height(u, v, shape) + 0.10 * smooth_noise(rng, u.shape, 8.0)
    n = smooth_noise(rng, u.shape, 6.0)
    soil = np.full(u.shape, 2, dtype=np.uint8)
    floor, slope, upper = h < 0.16, (h >= 0.16) & (h < 0.62), h >= 0.62
    soil[floor] = np.select([n[floor] < -0.4, n[floor] < 0.5], [4, 6], 5)
    soil[slope] = np.select([n[slope] < -0.9, n[slope] < 0.35], [4, 2], 3)
    soil[upper] = np.where(n[upper] < 0.0, 1, 2)
    soil[in_ellipse(u, v, pond_centre(shape), (70.0, 38.0))] = 9
    soil[quarry_mask(u, v, shape)] = SOIL_NODATA
    return soil


# --- land cover ---

def _roads(shape: dict, frame: tuple) -> NDArray[np.bool_]:
    """Impervious road network: the valley road plus streets climbing both slopes in town."""
    u_along = np.linspace(0.08 * VALLEY_LENGTH_M, VALLEY_LENGTH_M + 100.0, 200)
    valley_road = shapely.LineString(np.column_stack(
        [u_along, centreline_v_m(u_along, shape) + 70.0]))
    lines = [valley_road.buffer(6.0)]
    for t in np.arange(0.46, 0.97, 0.075):
        u0 = t * VALLEY_LENGTH_M
        vc = float(centreline_v_m(np.array(u0), shape))
        reach_n = 0.55 * float(half_width_m(np.array(u0), shape, north=True))
        reach_s = 0.55 * float(half_width_m(np.array(u0), shape, north=False))
        lines.append(shapely.LineString([(u0, vc + 70.0), (u0 + 40.0, vc + reach_n)]).buffer(4.0))
        if t > 0.5:
            lines.append(shapely.LineString([(u0, vc + 70.0), (u0 - 30.0, vc - reach_s)])
                         .buffer(4.0))
    west, north, cols, rows = frame
    transform = from_origin(west - HEAD_E_M, north - AXIS_N_M, COVER_CELL_M, COVER_CELL_M)
    return rasterize([(g, 1) for g in lines], out_shape=(rows, cols), transform=transform,
                     fill=0, dtype="uint8").astype(bool)


def make_cover(rng: np.random.Generator, shape: dict, frame: tuple) -> NDArray[np.uint8]:
    """Cover classes: town core on the valley floor, housing up the slopes, woods above.

    Farms fill the head of the valley and a green corridor follows the stream.
    """
    u, v = cell_centres_local(frame, COVER_CELL_M)
    t = u / VALLEY_LENGTH_M + 0.04 * smooth_noise(rng, u.shape, 24.0)
    h = relative_height(u, v, shape) + 0.08 * smooth_noise(rng, u.shape, 14.0)
    n = smooth_noise(rng, u.shape, 10.0)
    town_ramp = np.clip((t - 0.36) / 0.14, 0.0, 1.0)  # housing thins out towards the farms
    dev_limit = town_ramp * (0.35 + 0.28 * np.exp(-(((t - 0.72) / 0.22) ** 2)))
    cover = np.full(u.shape, 6, dtype=np.uint8)  # woods by default
    farms = (t < 0.42) & (h < 0.75)
    cover[farms] = np.where(n[farms] > 0.25, 8, 7)
    cover[(h >= 0.75) & (n > 1.2)] = 5  # hill meadows
    cover[(h < dev_limit)] = 3
    cover[(h < 0.55 * dev_limit)] = 2
    core = (t > 0.55) & (t < 0.92) & (h < 0.14)
    cover[core] = np.where(n[core] > 0.3, 4, 1)
    distance_to_stream = np.abs(v - centreline_v_m(u, shape))
    cover[(distance_to_stream < 22.0) & (t > 0.2)] = 5
    school = (np.abs(u - 0.80 * VALLEY_LENGTH_M) < 70.0) & (h > 0.3) & (h < 0.38) & (v > 0)
    cover[school] = 5
    cover[in_ellipse(u, v, pond_centre(shape), (82.0, 50.0))] = 5
    cover[quarry_mask(u, v, shape)] = 5
    cover[_roads(shape, frame)] = 1
    return cover


# --- subcatchments ---

def make_subcatchments(rng: np.random.Generator, outline_local: shapely.Polygon, shape: dict
                       ) -> gpd.GeoDataFrame:
    """Voronoi cells from jittered points inside the basin, clipped to the outline."""
    spacing = np.sqrt(outline_local.area / N_CELLS_TARGET)
    minu, minv, maxu, maxv = outline_local.bounds
    gu, gv = np.meshgrid(np.arange(minu, maxu, spacing), np.arange(minv, maxv, spacing))
    pts = np.column_stack([gu.ravel(), gv.ravel()]) + spacing * (0.5 + rng.uniform(
        -0.35, 0.35, size=(gu.size, 2)))
    inner = outline_local.buffer(-0.25 * spacing)
    pts = pts[shapely.contains_xy(inner, pts[:, 0], pts[:, 1])]
    cells = shapely.voronoi_polygons(shapely.MultiPoint(pts), extend_to=outline_local.buffer(500))
    geoms = shapely.intersection(np.asarray(cells.geoms), outline_local)
    geoms = shapely.set_precision(geoms, 0.01)
    if not all(g.geom_type == "Polygon" for g in geoms):
        raise RuntimeError("a subcatchment came out in pieces; change RNG_STATE or the outline")
    centres = shapely.get_coordinates(shapely.point_on_surface(geoms))
    order = np.lexsort((centres[:, 1], centres[:, 0]))
    geoms, centres = geoms[order], centres[order]
    world = shapely.transform(geoms, lambda xy: xy + np.array([HEAD_E_M, AXIS_N_M]))
    return gpd.GeoDataFrame(
        {
            "catchment_code": [f"{CODE_PREFIX}-{i + 1:03d}" for i in range(len(world))],
            "name": _names(centres, shape),
            "loss_method": _method_choices(centres, shape),
        },
        geometry=world,
        crs=CRS,
    )


def _zone(u: float, v: float, shape: dict) -> str:
    """Plain-language neighbourhood of a local point."""
    t = u / VALLEY_LENGTH_M
    h = float(relative_height(np.array(u), np.array(v), shape))
    side = "north" if v >= float(centreline_v_m(np.array(u), shape)) else "south"
    if t < 0.42:
        return "Head farms" if h < 0.75 else f"Head woods {side}"
    if t > 0.93:
        return "Outlet reach"
    if h < 0.2 and t > 0.55:
        return "Town centre"
    return f"{'Lower' if h < 0.45 else 'Upper'} {side} slope"


def _names(centres: NDArray[np.float64], shape: dict) -> list[str]:
    """Zone name plus a running number inside each zone."""
    counts: dict[str, int] = {}
    names = []
    for u, v in centres:
        zone = _zone(u, v, shape)
        counts[zone] = counts.get(zone, 0) + 1
        names.append(f"{zone} {counts[zone]}")
    return names


def _method_choices(centres: NDArray[np.float64], shape: dict) -> list[str | None]:
    """Per-subcatchment method choice: a few cells get a method of their own.

    Curve number on the four most upstream (farm) cells, Horton on the four cells nearest the
    pond; the rest are null and use the project default.
    """
    methods: list[str | None] = [None] * len(centres)
    for i in np.argsort(centres[:, 0])[:4]:
        methods[i] = "curve_number"
    pond = np.array(pond_centre(shape))
    for i in np.argsort(np.hypot(*(centres - pond).T))[:4]:
        methods[i] = "horton"
    return methods


# --- storms ---

OBSERVED_MM_PER_H = [  # 5-minute intensities: a main burst, a dry gap, a second burst, a tail
    1.2, 2.0, 1.6, 3.4, 6.0, 9.5, 14.0, 22.0, 38.0, 52.0, 41.0, 27.0,
    16.0, 9.0, 4.2, 1.5, 0.0, 0.0, 0.0, 0.6, 2.4, 7.5, 18.0, 26.0,
    19.0, 11.0, 6.0, 3.5, 2.0, 1.2, 0.8, 0.0, 0.5, 0.9, 0.4, 0.2,
]


def observed_event_csv(rng: np.random.Generator) -> str:
    """CSV text; each row's time marks the END of its 5-minute interval."""
    base = np.array(OBSERVED_MM_PER_H)
    jittered = np.round(base * rng.uniform(0.9, 1.1, size=base.size), 1)
    rows = [f"{5 * (i + 1)},{x:.1f}" for i, x in enumerate(jittered)]
    return "time_min,intensity_mm_per_h\n" + "\n".join(rows) + "\n"


# --- rain grid ---

RAIN_GRID_DEG = 0.005  # cell size of the invented rain grid, degrees of longitude and latitude
RAIN_GRID_STATE = RNG_STATE + 19  # its own generator: the other files stay as they were
RAIN_GRID_START = "2026-07-14 15:00:00"  # invented


def rain_grid_dataset(subs: gpd.GeoDataFrame) -> xr.Dataset:
    """An invented radar-style rain grid (CF NetCDF, longitude-latitude, 5-minute steps).

    The observed event's intensities, with a storm cell crossing the valley from west to east:
    up to 1.6 times the event under the cell, 0.5 times far from it, and +-10 % noise per cell.
    Each time marks the end of its step (CF time bounds say so).
    """
    rng = np.random.default_rng(RAIN_GRID_STATE)
    d = RAIN_GRID_DEG
    west, south, east, north = subs.to_crs("EPSG:4326").total_bounds
    x0, y0 = np.floor(west / d) * d - 2 * d, np.floor(south / d) * d - 2 * d
    lon = np.round(x0 + d * (np.arange(int(np.ceil((east - x0) / d)) + 2) + 0.5), 6)
    lat = np.round(y0 + d * (np.arange(int(np.ceil((north - y0) / d)) + 2) + 0.5), 6)
    glon, glat = np.meshgrid(lon, lat)
    base = np.array(OBSERVED_MM_PER_H)
    track = np.linspace(west - 0.01, east + 0.01, base.size)
    frames = []
    for k, level in enumerate(base):
        dist2 = ((glon - track[k]) / 0.012) ** 2 + ((glat - (south + north) / 2) / 0.008) ** 2
        field = level * (0.5 + 1.1 * np.exp(-dist2 / 2)) * rng.uniform(0.9, 1.1, glon.shape)
        frames.append(np.round(field, 1))
    minutes = 5.0 * np.arange(1, base.size + 1)
    ds = xr.Dataset(
        {"rain_rate": (("time", "lat", "lon"), np.array(frames, dtype=np.float32),
                       {"units": "mm h-1", "long_name": f"rain rate, invented for {TOWN}"}),
         "time_bnds": (("time", "nv"), np.column_stack([minutes - 5.0, minutes]))},
        coords={"time": ("time", minutes, {"units": f"minutes since {RAIN_GRID_START}",
                                           "standard_name": "time", "bounds": "time_bnds"}),
                "lat": ("lat", lat, {"units": "degrees_north", "standard_name": "latitude"}),
                "lon": ("lon", lon, {"units": "degrees_east", "standard_name": "longitude"})},
        attrs={"Conventions": "CF-1.8",
               "title": f"invented demo rain grid for {TOWN}; not real data"})
    return ds


def write_rain_grid(path: Path, ds: xr.Dataset) -> None:
    """The rain grid as NetCDF-4 (deflated), written to a temporary and moved into place."""
    partial = path.with_name(f".{path.name}.partial")
    ds.to_netcdf(partial, encoding={"rain_rate": {"zlib": True, "complevel": 4}})
    partial.replace(path)
#: Three invented rain gauges of the town (id, x, y in the demo CRS) for the gauged event.
GAUGES = (("mill", 537600.0, 4381300.0), ("school", 539000.0, 4381900.0),
          ("farm", 540050.0, 4380450.0))
#: How each gauge saw the observed burst: a factor on the depths and a lag in 5-minute steps.
GAUGE_SHAPES = {"mill": (0.8, 0), "school": (1.0, 1), "farm": (1.3, 2)}


def gauge_layer() -> gpd.GeoDataFrame:
    """The three invented gauges as points."""
    return gpd.GeoDataFrame({"gauge_id": [g for g, _, _ in GAUGES]}, crs=CRS,
                            geometry=[shapely.Point(x, y) for _, x, y in GAUGES])


def gauge_records_csv() -> str:
    """One CSV, a column per gauge: 5-minute depths (mm), each row's time the END of its step.

    Each gauge sees the observed burst scaled and a few steps late (invented, no randomness).
    """
    base = np.array(OBSERVED_MM_PER_H) * 5.0 / 60.0  # mm in each 5-minute step
    n = base.size + 3
    columns = {}
    for gauge, (factor, lag) in GAUGE_SHAPES.items():
        depth = np.zeros(n)
        depth[lag:lag + base.size] = base * factor
        columns[gauge] = np.round(depth, 2)
    rows = [f"2026-05-14T14:{5 * (k + 1):02d}" if 5 * (k + 1) < 60 else
            f"2026-05-14T{14 + 5 * (k + 1) // 60}:{5 * (k + 1) % 60:02d}" for k in range(n)]
    lines = ["time," + ",".join(columns)]
    lines += [f"{t}," + ",".join(f"{columns[g][k]:.2f}" for g in columns)
              for k, t in enumerate(rows)]
    return "# invented records of three rain gauges of the invented town Kestlow Vale\n" + \
        "\n".join(lines) + "\n"


# --- writing ---

def write_raster(path: Path, data: NDArray[np.uint8], frame: tuple, cell_m: float, *,
                 nodata: int, codes: dict[int, str], colours: dict) -> None:
    """Tiled, DEFLATE-compressed uint8 GeoTIFF with a colour table and code-label tags."""
    west, north, cols, rows = frame
    profile = dict(driver="GTiff", width=cols, height=rows, count=1, dtype="uint8", crs=CRS,
                   transform=from_origin(west, north, cell_m, cell_m), nodata=nodata,
                   tiled=True, blockxsize=256, blockysize=256, compress="deflate", zlevel=9)
    path.unlink(missing_ok=True)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(data, 1)
        dst.write_colormap(1, {c: (*rgb, 255) for c, rgb in colours.items()})
        dst.update_tags(DATA="invented demo data for Kestlow Vale; not a real place",
                        **{f"CODE_{c}": label for c, label in codes.items()})


def write_soil_polygons(path: Path, soil: NDArray[np.uint8], frame: tuple) -> None:
    """The soil raster traced into polygons: one per connected patch of a code.

    Edges follow the cell edges exactly, so an overlay of these polygons gives the raster's
    unit areas; unsurveyed (nodata) patches are kept with an empty class.
    """
    west, north, _, _ = frame
    traced = list(shapes(soil, transform=from_origin(west, north, SOIL_CELL_M, SOIL_CELL_M)))
    groups = [None if int(v) == SOIL_NODATA else SOIL_CODES[int(v)] for _, v in traced]
    layer = gpd.GeoDataFrame({"soil_group": groups},
                             geometry=[shapely.geometry.shape(g) for g, _ in traced], crs=CRS)
    path.unlink(missing_ok=True)
    layer.to_file(path, layer="soil_map", driver="GPKG", engine="pyogrio")


def polygon_project_text(raster_project: str) -> str:
    """The demo project with the soil map as polygons instead of the soil raster."""
    start = raster_project.index("# [soil]:")
    end = raster_project.index("# [cover]:")
    text = raster_project[:start] + SOIL_POLYGON_SECTION + raster_project[end:]
    text = text.replace('name = "Kestlow Vale demo"', 'name = "Kestlow Vale demo, soil polygons"')
    return text.replace("output/demo_runoff.gpkg", "output/demo_soil_polygons.gpkg")


SOIL_POLYGON_SECTION = """\
# [soil]: here a polygon layer of soil classes (the soil raster traced along its cell edges).
# class_field names the field holding each polygon's hydrologic soil group; polygons with no
# value are unsurveyed (nodata), and ground in no polygon counts as outside the soil map.
# A [soil.codes] table would turn whole-number codes in that field into classes.
[soil]
path = "soil_map.gpkg"
layer = "soil_map"
class_field = "soil_group"
classification = "hydrologic_soil_group"
dual_group_condition = "undrained"
initial_saturation = 0.3

"""


def write_project_file(path: Path) -> None:
    """The demo project file, following the gisrun project file format."""
    soil = "\n".join(f'"{c}" = "{label}"' for c, label in SOIL_CODES.items())
    cover = "\n".join(f'"{c}" = "{label}"' for c, label in COVER_CODES.items())
    storms = "\n\n".join(
        f'[[storms]]\nname = "nrcs_ii_24h_{rp}_{mm}mm"\nkind = "nrcs_24h"\n'
        f'distribution = "II"\ndepth = {mm}' for rp, mm in DESIGN_STORMS_MM.items())
    text = PROJECT_TEMPLATE.format(town=TOWN, crs=CRS, soil_codes=soil, cover_codes=cover,
                                   design_storms=storms)
    path.write_text(text, encoding="utf-8", newline="\n")


PROJECT_TEMPLATE = """\
# gisrun project file for the Kestlow Vale demo (written by make_demo.py; edit freely).
# Kestlow Vale is an invented town: every file in this folder is invented demo data.
# Results are planning-level estimates only. Defer to local codes, agency methods and a
# licensed engineer before sizing a drain or judging flood risk.
# Paths are relative to this file's folder.

# [project]: a name for the run, the unit system for everything you type and read
# ("si": depths mm, rates mm/h, areas m2, volumes m3), where results go, and the time step.
[project]
name = "{town} demo"
units = "si"
output = "output/demo_runoff.gpkg"
time_step_min = 5

# [subcatchments]: the polygons to report on. id_field names the attribute holding each
# subcatchment's unique code; method_field (optional) names an attribute that may choose a
# different loss method for single subcatchments (empty = use [method] below).
[subcatchments]
path = "subcatchments.gpkg"
layer = "subcatchments"
id_field = "catchment_code"
method_field = "loss_method"
# crs = "{crs}"   # only needed when the file carries no CRS; this one does

# [soil]: a categorical raster of soil classes. Each raster code (as a string) maps to a
# hydrologic soil group; dual groups (B/D, C/D) are read as drained or undrained.
# initial_saturation (0-1) is the effective saturation at the start of the storm (Green-Ampt).
# "water" marks a code that does not infiltrate (the mill pond).
[soil]
path = "soil_groups.tif"
classification = "hydrologic_soil_group"
dual_group_condition = "undrained"
initial_saturation = 0.3

[soil.codes]
{soil_codes}

# [cover]: a categorical land-cover raster (here at 5 m, finer than the 10 m soil raster).
# Each code maps to a cover class name from gisrun's shipped cover table.
[cover]
path = "land_cover.tif"

[cover.codes]
{cover_codes}

# [nodata]: what to do where a subcatchment has no soil or cover data (the unsurveyed gravel
# workings, and a thin strip at the outlet that the rasters do not reach).
# "dominant" fills it from the subcatchment's most common class; any subcatchment with more
# than max_fraction of its area missing stops the run.
[nodata]
rule = "dominant"
max_fraction = 0.25

# [method]: the default loss method, and whether each soil x cover unit is simulated on its
# own and summed ("units") or parameters are area-weighted first ("composite").
[method]
name = "green_ampt"
combine = "units"

# [parameters]: optional CSV of your own parameter values that replace the published ones.
# [parameters]
# overrides = "my_parameters.csv"

# [[storms]]: one block per storm; every storm is run. Design depths below are invented
# for the invented town (a 2-, 10- and 100-year 24-hour depth); use your agency's values.
{design_storms}

# A rain grid: an invented radar-style NetCDF (CF conventions, longitude-latitude cells of
# 0.005 degrees, 5-minute rain rates in mm/h, times read from the file). Each subcatchment
# gets the exact area-weighted mean of the cells over it (layer rain_weights).
[[storms]]
name = "radar_event"
kind = "rain_grid"
path = "storms/radar_event.nc"
variable = "rain_rate"
# An observed event seen by three rain gauges: each subcatchment gets its own areal rain
# (Thiessen polygons, exact polygon intersection); weighting = "inverse_distance" (with
# power = 2) weighs each polygon's centroid instead; fill_gaps = true fills a gap in one gauge's
# record from the others.
[[storms]]
name = "gauged_event"
kind = "gauges"
gauges = "storms/gauges.gpkg"
id_field = "gauge_id"
records = "storms/gauge_records.csv"
weighting = "thiessen"

# An observed-style event: 5-minute intensities, each row's time marks the end of its interval.
[[storms]]
name = "observed_event"
kind = "file"
path = "storms/observed_event.csv"

# Other kinds, for reference:
# [[storms]]
# name = "block_2h"
# kind = "alternating_block"      # or "chicago"; i = a / (t_min + b)^c in mm/h
# idf = {{ a = 1200.0, b = 10.0, c = 0.8 }}
# duration_min = 120
# step_min = 5
# peak_position = 0.5
"""


def main() -> None:
    """Generate every demo file next to this script and print a short summary."""
    rng = np.random.default_rng(RNG_STATE)
    shape = _valley_shape(rng)
    outline = basin_outline(shape)
    subs = make_subcatchments(rng, outline, shape)
    frame_soil = grid_frame(outline, SOIL_CELL_M)
    frame_cover = grid_frame(outline, COVER_CELL_M)
    soil = make_soil(rng, shape, frame_soil)
    cover = make_cover(rng, shape, frame_cover)
    (HERE / "storms").mkdir(exist_ok=True)
    (HERE / "storms" / "observed_event.csv").write_text(observed_event_csv(rng), newline="\n")
    write_rain_grid(HERE / "storms" / "radar_event.nc", rain_grid_dataset(subs))
    (HERE / "storms" / "gauge_records.csv").write_text(gauge_records_csv(), newline="\n")
    (HERE / "storms" / "gauges.gpkg").unlink(missing_ok=True)
    gauge_layer().to_file(HERE / "storms" / "gauges.gpkg", layer="gauges", driver="GPKG",
                          engine="pyogrio")
    write_raster(HERE / "soil_groups.tif", soil, frame_soil, SOIL_CELL_M, nodata=SOIL_NODATA,
                 codes=SOIL_CODES, colours=SOIL_COLOURS)
    write_raster(HERE / "land_cover.tif", cover, frame_cover, COVER_CELL_M, nodata=COVER_NODATA,
                 codes=COVER_CODES, colours=COVER_COLOURS)
    gpkg = HERE / "subcatchments.gpkg"
    gpkg.unlink(missing_ok=True)
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": GPKG_DATE})
    subs.to_file(gpkg, layer="subcatchments", driver="GPKG", engine="pyogrio")
    write_project_file(HERE / "gisrun.toml")
    write_impervious(HERE / "impervious_percent.tif", impervious_percent(cover, COVER_NODATA),
                     frame_cover, COVER_CELL_M, CRS)
    write_scenario(HERE / "gisrun.toml", HERE / "disconnected_roofs.toml")
    write_soil_polygons(HERE / "soil_map.gpkg", soil, frame_soil)
    (HERE / "gisrun_soil_polygons.toml").write_text(
        polygon_project_text((HERE / "gisrun.toml").read_text(encoding="utf-8")),
        encoding="utf-8", newline="\n")
    write_map_units(HERE, SOIL_CODES)
    write_areal_reduction(HERE / "gisrun.toml", HERE / "areal_reduction.toml",
                          HERE / "storms" / "invented_area_factors.csv")
    print(f"{TOWN}: {len(subs)} subcatchments, {subs.area.sum() / 1e6:.2f} km2; "
          f"soil {soil.shape[1]}x{soil.shape[0]} @ {SOIL_CELL_M:g} m, "
          f"cover {cover.shape[1]}x{cover.shape[0]} @ {COVER_CELL_M:g} m; written to {HERE}")


if __name__ == "__main__":
    os.environ.setdefault("OGR_CURRENT_DATE", GPKG_DATE)
    main()
