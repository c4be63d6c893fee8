"""Rain-grid weights and areal rain: exact against hand values, pyproj and shapely.

The weights come from :mod:`gisrun.grid.rain_weights`; each check here is made by another
route: hand-computed areas, pyproj's cylindrical equal-area projection and geodesic areas,
and shapely intersections in an equal-area projection.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pytest
import shapely
import xarray as xr
from affine import Affine
from pyproj import CRS, Geod, Transformer
from shapely.geometry import box

from gisrun.errors import GisrunError
from gisrun.grid.rain_weights import authalic_q, rain_grid_weights, row_cell_areas_m2
from gisrun.io.rain_grid import RainGridSettings, open_rain_grid
from gisrun.storm import weighted_mean
from gisrun.storm.gridded import grid_areal_depth

UTM = "EPSG:32617"
WGS84 = CRS.from_epsg(4326)


@dataclass(frozen=True)
class ArrayGrid:
    """A rain grid held in memory: depth per step in m, ``(steps, height, width)``."""

    crs: CRS
    transform: Any
    values: np.ndarray
    where: str = "test grid"
    step_s: float = 300.0

    @property
    def width(self) -> int:
        return self.values.shape[2]

    @property
    def height(self) -> int:
        return self.values.shape[1]

    @property
    def steps(self) -> int:
        return self.values.shape[0]

    #: Stored as depths in m.
    to_depth_m = 1.0

    def read_stored(self, first: int, stop: int) -> np.ndarray:
        return self.values[first:stop].astype(np.float64)

    def step_label(self, step: int) -> str:
        return f"step {step + 1}"


def _projected_grid(values: np.ndarray) -> ArrayGrid:
    # 100 m cells, top-left corner at (0, 300)
    return ArrayGrid(CRS(UTM), Affine(100.0, 0, 0.0, 0, -100.0, 300.0), values)


def test_projected_weights_by_hand():
    # A 100 x 150 m rectangle from x 50-150, y 150-300: quarter... by hand, cells of 100 m:
    # row 0 (y 200-300): col 0 gets 50 x 100, col 1 gets 50 x 100; row 1 (y 100-200):
    # col 0 gets 50 x 50, col 1 gets 50 x 50. Total 15,000 m2.
    grid = _projected_grid(np.zeros((1, 3, 3)))
    geoms = gpd.GeoSeries([box(50, 150, 150, 300)], crs=UTM)
    w = rain_grid_weights(geoms, ["S1"], grid)
    table = w.table().set_index("source_id")["weight"].to_dict()
    assert table == pytest.approx({"r0_c0": 5000 / 15000, "r0_c1": 5000 / 15000,
                                   "r1_c0": 2500 / 15000, "r1_c1": 2500 / 15000}, rel=1e-12)


def test_areal_depth_is_the_weighted_mean_and_exact_for_a_uniform_grid():
    values = np.zeros((2, 3, 3))
    values[0] = [[1, 2, 3], [4, 5, 6], [7, 8, 9]]
    values[1] = 0.0007  # uniform: every subcatchment gets exactly this
    grid = _projected_grid(values)
    geoms = gpd.GeoSeries([box(50, 150, 150, 300), box(0, 0, 300, 300),
                           box(10, 20, 290, 111)], crs=UTM)
    w = rain_grid_weights(geoms, ["a", "b", "c"], grid)
    depth = grid_areal_depth(w, grid, block_bytes=8 * 9)  # one step per block
    # by hand: (5000*1 + 5000*2 + 2500*4 + 2500*5) / 15000
    assert depth[0, 0] == pytest.approx(37500 / 15000, rel=1e-12)
    assert depth[0, 1] == pytest.approx(5.0, rel=1e-12)  # the plain mean of 1..9
    assert np.all(depth[1] == 0.0007)
    # block by block, the same numbers as the areal-rain plumbing's weighted mean
    assert np.array_equal(depth, weighted_mean(values.reshape(2, -1)[:, w.cells], w.matrix))


def test_a_subcatchment_beyond_the_grid_is_an_error_naming_it():
    grid = _projected_grid(np.ones((1, 3, 3)))
    geoms = gpd.GeoSeries([box(0, 0, 100, 100), box(250, 250, 350, 300)], crs=UTM)
    with pytest.raises(GisrunError, match=r"does not cover subcatchment 'out' \(50\.0%") as err:
        rain_grid_weights(geoms, ["in", "out"], grid)
    assert "\n" not in str(err.value)


def test_nodata_in_a_used_cell_is_an_error_naming_the_subcatchment_and_time():
    values = np.ones((3, 3, 3))
    values[2, 0, 2] = np.nan  # cell r0_c2 at the third step
    values[0, 2, 2] = np.nan  # a cell no subcatchment uses: no matter
    grid = _projected_grid(values)
    geoms = gpd.GeoSeries([box(0, 100, 100, 300), box(150, 250, 300, 300)], crs=UTM)
    w = rain_grid_weights(geoms, ["west", "north_east"], grid)
    with pytest.raises(GisrunError, match=r"nodata\) at step 3 in cell r0_c2 used by "
                       r"subcatchment 'north_east'"):
        grid_areal_depth(w, grid)


def test_authalic_q_matches_pyproj_cylindrical_equal_area():
    # Snyder (1987), ch. 10 (eq. 10-15, number from memory): the ellipsoidal cylindrical
    # equal-area northing is a q / 2 (k0 = 1); pyproj's "cea" computes it independently.
    lat = np.array([-89.0, -45.0, 0.0, 12.5, 45.0, 60.0, 89.9])
    cea = Transformer.from_crs(WGS84, CRS("+proj=cea +ellps=WGS84 +lat_ts=0"), always_xy=True)
    _, y = cea.transform(np.zeros_like(lat), lat)
    a = WGS84.get_geod().a
    np.testing.assert_allclose(a * authalic_q(lat, WGS84) / 2, y, rtol=1e-12, atol=1e-6)
    sphere = CRS("+proj=longlat +R=6371000 +no_defs")
    np.testing.assert_allclose(authalic_q(lat, sphere), 2 * np.sin(np.radians(lat)), rtol=1e-15)


def test_geographic_cell_areas_match_geodesic_areas_along_parallels():
    # A 0.5 x 0.25 degree grid at 40-41 N; pyproj Geod's area of each cell with its north and
    # south edges densified along the parallels (10,000 points) is the independent value.
    grid = ArrayGrid(WGS84, Affine(0.5, 0, -80.0, 0, -0.25, 41.0), np.zeros((1, 4, 2)))
    geod = Geod(ellps="WGS84")
    lon = np.linspace(-80.0, -79.5, 5001)
    expected = []
    for north in 41.0 - 0.25 * np.arange(4):
        south = north - 0.25
        area, _ = geod.polygon_area_perimeter(np.r_[lon, lon[::-1]],
                                              np.r_[np.full(lon.size, south),
                                                    np.full(lon.size, north)])
        expected.append(abs(area))
    np.testing.assert_allclose(row_cell_areas_m2(grid), expected, rtol=1e-8)


def _subcatchments_utm() -> gpd.GeoSeries:
    # Invented polygons in UTM 17N over about 79.3-79.9 W, 40.2-40.7 N, none aligned to cells.
    shapes = [shapely.Polygon([(560_000, 4_460_000), (585_000, 4_455_000), (590_000, 4_490_000),
                               (570_000, 4_497_000)]),
              box(600_000, 4_470_000, 607_000, 4_474_500),
              shapely.Polygon([(575_500, 4_500_000), (596_000, 4_501_000),
                               (588_000, 4_515_000)]).buffer(2500, quad_segs=4)]
    return gpd.GeoSeries(shapes, crs=UTM)


def _lonlat_rain() -> ArrayGrid:
    rng = np.random.default_rng(5)
    values = rng.gamma(2.0, 0.002, size=(2, 12, 14))  # depth per step, m, strongly varying
    # 0.07 x 0.06 degree cells, rows south-up (as a NetCDF with ascending latitude gives)
    return ArrayGrid(WGS84, Affine(0.07, 0, -80.35, 0, 0.06, 40.2), values)


def brute_force_means(geoms: gpd.GeoSeries, grid: ArrayGrid) -> np.ndarray:
    """Area-weighted means by shapely intersections of every cell in an equal-area projection.

    Cells are longitude-latitude rectangles with their north and south edges densified along
    the parallels; cells and polygons go to a Lambert azimuthal equal-area projection centred
    on the area (pyproj), where planar area is ground area.
    """
    laea = CRS("+proj=laea +lat_0=40.4 +lon_0=-79.6 +ellps=WGS84")
    to_laea = Transformer.from_crs(WGS84, laea, always_xy=True)
    polys = gpd.GeoSeries(shapely.segmentize(np.asarray(geoms), 20.0), crs=geoms.crs).to_crs(laea)
    t, out = grid.transform, np.zeros((grid.steps, len(geoms)))
    for i, poly in enumerate(polys):
        total, acc = 0.0, np.zeros(grid.steps)
        for r in range(grid.height):
            for c in range(grid.width):
                cell = shapely.segmentize(box(t.c + c * t.a, t.f + r * t.e, t.c + (c + 1) * t.a,
                                              t.f + (r + 1) * t.e), 0.0005)
                xy = np.array(cell.exterior.coords)
                part = shapely.Polygon(np.column_stack(to_laea.transform(xy[:, 0], xy[:, 1])))
                area = part.intersection(poly).area
                total += area
                acc += area * grid.values[:, r, c]
        out[:, i] = acc / total
    return out


@pytest.fixture(scope="module")
def lonlat_case() -> tuple[gpd.GeoSeries, ArrayGrid, np.ndarray]:
    geoms, grid = _subcatchments_utm(), _lonlat_rain()
    return geoms, grid, brute_force_means(geoms, grid)


def write_cf_netcdf(path, grid: ArrayGrid) -> None:
    """The grid as a CF NetCDF written with xarray: lat/lon cell centres, CF time, mm."""
    t = grid.transform
    lon = t.c + t.a * (np.arange(grid.width) + 0.5)
    lat = t.f + t.e * (np.arange(grid.height) + 0.5)  # ascending: rows run south-up
    ds = xr.Dataset(
        {"rain": (("time", "lat", "lon"), grid.values * 1000.0, {"units": "mm"})},
        coords={"lat": ("lat", lat, {"units": "degrees_north", "standard_name": "latitude"}),
                "lon": ("lon", lon, {"units": "degrees_east", "standard_name": "longitude"})})
    ds["time"] = ("time", [30.0, 60.0], {"units": "minutes since 2026-07-14 15:00:00"})
    ds.to_netcdf(path)


def test_lonlat_netcdf_means_match_brute_force_intersections(lonlat_case, tmp_path):
    # Issue 19 acceptance: a NetCDF written here with xarray (CF time, lat/lon grid), read by
    # gisrun, gives per-subcatchment areal means within 1e-6 of the brute force.
    geoms, grid, expected = lonlat_case
    write_cf_netcdf(tmp_path / "rain.nc", grid)
    stack = open_rain_grid(RainGridSettings(tmp_path / "rain.nc"))
    assert stack.crs.equals(WGS84) and stack.step_s == 1800.0
    np.testing.assert_allclose(stack.transform.to_gdal(), grid.transform.to_gdal(), atol=1e-12)
    w = rain_grid_weights(geoms, ["A", "B", "C"], stack)
    got = grid_areal_depth(w, stack)
    np.testing.assert_allclose(got, expected, rtol=1e-6)


def test_weighting_cells_by_degree_fractions_would_fail_the_same_check(lonlat_case):
    # What the check guards against: plain fractions of a cell in degrees, no true cell area.
    geoms, grid, expected = lonlat_case
    lonlat = gpd.GeoSeries(shapely.segmentize(np.asarray(geoms), 20.0), crs=UTM).to_crs(WGS84)
    t = grid.transform
    naive = np.zeros_like(expected)
    for i, poly in enumerate(lonlat):
        cells = [(r, c, box(t.c + c * t.a, t.f + r * t.e, t.c + (c + 1) * t.a,
                            t.f + (r + 1) * t.e).intersection(poly).area)
                 for r in range(grid.height) for c in range(grid.width)]
        total = sum(a for *_, a in cells)
        naive[:, i] = sum(a * grid.values[:, r, c] for r, c, a in cells) / total
    assert np.max(np.abs(naive / expected - 1)) > 1e-5


def _across_the_antimeridian() -> gpd.GeoSeries:
    # Invented subcatchments in UTM 60S around 179.88 E - 179.9 W, 16.9-17.1 S (Fiji): one
    # across the 180th meridian, one wholly east of it (west longitudes), one wholly west.
    # About 20 km across, so that gisrun's densification (64 pieces a side) follows the image
    # of their straight UTM edges as closely as the brute force's 50 m pieces (1e-6).
    to_utm = Transformer.from_crs(WGS84, "EPSG:32760", always_xy=True)

    def quad(lons, lats):
        return shapely.Polygon(np.column_stack(to_utm.transform(lons, lats)))

    return gpd.GeoSeries([quad([179.9, -179.93, -179.95, 179.92], [-17.1, -17.07, -16.9, -16.93]),
                          quad([-179.8, -179.72, -179.74], [-17.0, -17.04, -16.93]),
                          quad([179.7, 179.78, 179.74], [-17.0, -17.04, -16.93])],
                         crs="EPSG:32760")


def _seam_weights_by_brute_force(geoms: gpd.GeoSeries, west: float, cell: float, width: int,
                                 north: float) -> list[dict[str, float]]:
    """Each subcatchment's share in each cell, by shapely intersections in an equal-area
    projection centred on the 180th meridian (pyproj), cells named as the grid stores them."""
    laea = CRS("+proj=laea +lat_0=-17 +lon_0=180 +ellps=WGS84")
    to_laea = Transformer.from_crs(WGS84, laea, always_xy=True)
    polys = gpd.GeoSeries(shapely.segmentize(np.asarray(geoms), 50.0), crs=geoms.crs).to_crs(laea)
    out = []
    for poly in polys:
        shares = {}
        for r in range(int(round((north + 17.5) / cell))):
            for c in range(width):
                lon0 = west + c * cell
                if min(abs((lon0 - 180.0 + 180.0) % 360.0 - 180.0),
                       abs((lon0 + cell - 180.0 + 180.0) % 360.0 - 180.0)) > 0.5:
                    continue  # far from the polygons
                rect = shapely.segmentize(box(lon0, north - (r + 1) * cell, lon0 + cell,
                                              north - r * cell), 0.001)
                xy = np.array(rect.exterior.coords)
                part = shapely.Polygon(np.column_stack(to_laea.transform(xy[:, 0], xy[:, 1])))
                area = part.intersection(poly).area
                if area > 0:
                    shares[f"r{r}_c{c}"] = area
        total = sum(shares.values())
        out.append({k: v / total for k, v in shares.items() if v / total > 1e-9})
    return out


@pytest.mark.parametrize("west, width", [(-180.0, 7200), (0.0, 7200), (170.0, 400)])
def test_a_subcatchment_across_the_180th_meridian_takes_cells_at_both_edges(west, width):
    # A grid round the globe written from -180 or from 0, and a regional one from 170 E to
    # 170 W: the same shares of the same ground cells, within 1e-6 of the brute force.
    geoms = _across_the_antimeridian()
    grid = ArrayGrid(WGS84, Affine(0.05, 0, west, 0, -0.05, -16.5), np.zeros((1, 20, width)))
    got = rain_grid_weights(geoms, ["X", "E", "W"], grid).table()
    expected = _seam_weights_by_brute_force(geoms, west, 0.05, width, -16.5)
    for sub, want in zip("XEW", expected, strict=True):
        have = got[got["subcatchment_id"] == sub].set_index("source_id")["weight"]
        have = have[have > 1e-9]  # cells a polygon only grazes: slivers of a square metre
        assert set(have.index) == set(want), sub
        np.testing.assert_allclose([have[k] for k in want], list(want.values()), rtol=1e-6)
    across = got[got["subcatchment_id"] == "X"]["cell_column"]
    if width == 7200:  # the crossing one sits at both edges of a grid round the globe
        assert across.min() == 0 if west == -180.0 else across.min() > 0
        assert across.max() == width - 1 if west == -180.0 else True


def test_a_regional_grid_on_one_side_of_the_180th_meridian_does_not_cover_across_it():
    geoms = _across_the_antimeridian()[:1]
    grid = ArrayGrid(WGS84, Affine(0.05, 0, -180.0, 0, -0.05, -16.5), np.zeros((1, 20, 200)))
    with pytest.raises(GisrunError, match=r"does not cover subcatchment 'X' \(\d+\.\d% of 'X' "
                                          r"lies beyond the grid"):
        rain_grid_weights(geoms, ["X"], grid)
