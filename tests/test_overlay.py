"""Exact overlay: unit areas against shapely cell intersections, pyproj Geod and hand sums."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from numpy.testing import assert_allclose
from pyproj import Geod
from shapely.geometry import Polygon, box

from gisrun.crs import checked_crs, polygon_area_m2
from gisrun.errors import CRSError, InputError, RasterError
from gisrun.grid.coverage import cell_coverage
from gisrun.grid.overlay import compute_unit_areas
from gisrun.io.raster import read_class_raster

UTM = "EPSG:32617"
#: A transverse Mercator with scale 1 on its central meridian, so that near its origin (where
#: the by-hand fixtures lie) planar areas are ground areas to 1e-9 (TM scale k0 (1 + x^2 / 2R^2),
#: Snyder 1987, Map Projections: A Working Manual, eq. 8-11, from memory). The same fixtures at
#: x = 0 in UTM lie 500 km off its central meridian, where areas are 0.5 % too large.
LOCAL = "+proj=tmerc +lat_0=0 +lon_0=-81 +k=1 +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs"
X0, Y0 = 600_000.0, 3_900_000.0  # a site in UTM zone 17N, about 35.2 N 79.9 W
RNG = np.random.default_rng(20240611)
SOIL = {1: "A", 2: "B", 3: "C", 4: "D"}


def reference_areas(poly, codes, x0, y_top, cell):
    """Class -> area: shapely intersection of the polygon with every cell square."""
    rows, cols = np.indices(codes.shape)
    squares = shapely.box(x0 + cols * cell, y_top - (rows + 1) * cell,
                          x0 + (cols + 1) * cell, y_top - rows * cell).ravel()
    areas = shapely.area(shapely.intersection(squares, poly))
    out: dict[int, float] = {}
    for code, a in zip(codes.ravel(), areas, strict=True):
        out[int(code)] = out.get(int(code), 0.0) + a
    return out


@pytest.fixture
def half_and_half_soil(geotiff):
    """The shared fixture's raster (conftest), in :data:`LOCAL`: planar areas are ground areas."""
    codes = np.ones((10, 10), dtype=np.uint8)
    codes[:, 5:] = 2
    return geotiff(codes, "half_and_half.tif", crs=LOCAL)


def frame(geoms, crs=UTM, ids=None):
    ids = ids or [f"S{i}" for i in range(len(geoms))]
    return gpd.GeoDataFrame({"subcatchment_id": ids}, geometry=list(geoms), crs=crs)


def by_class(units, sid):
    sub = units[units.subcatchment_id == sid]
    return dict(zip(sub.soil_class, sub.area_m2, strict=True))


def patchy_codes(shape, n_codes=4):
    """Coherent class patches: nearest of a few random seeds (a Voronoi pattern)."""
    seeds = RNG.uniform(0, max(shape), (12, 2))
    r, c = np.indices(shape)
    d = (r[..., None] - seeds[:, 0]) ** 2 + (c[..., None] - seeds[:, 1]) ** 2
    return (np.argmin(d, axis=-1) % n_codes + 1).astype(np.uint8)


# --- the CRS funnel and the area rule -------------------------------------------------------

def test_checked_crs_needs_a_crs():
    with pytest.raises(CRSError, match="soil.tif: has no CRS"):
        checked_crs(None, "soil.tif")
    assert checked_crs(None, "soil.tif", stated="EPSG:32617").to_epsg() == 32617
    with pytest.raises(CRSError, match="not understood"):
        checked_crs("EPSG:99999999", "soil.tif")


def test_projected_area_uses_the_axis_unit():
    # 1000 x 1000 US survey feet; 1 ftUS = 1200/3937 m (US Survey Foot definition)
    gs = gpd.GeoSeries([box(0, 0, 1000, 1000)], crs="EPSG:2264")
    assert polygon_area_m2(gs)[0] == pytest.approx((1000 * 1200 / 3937) ** 2, rel=1e-12)


def test_geographic_area_is_geodesic():
    lonlat = box(-80.0, 35.0, -79.99, 35.01)
    ref, _ = Geod(ellps="WGS84").polygon_area_perimeter(*lonlat.exterior.xy)  # pyproj Geod
    got = polygon_area_m2(gpd.GeoSeries([lonlat], crs="EPSG:4326"))[0]
    assert got == pytest.approx(abs(ref), rel=1e-9)
    # by hand: 0.01 deg lat ~ 1109 m, 0.01 deg lon ~ 1113 m x cos(35 deg) ~ 912 m (common practice)
    assert got == pytest.approx(1109 * 912, rel=0.01)


def test_cell_coverage_matches_shapely_cell_intersections():
    # random polygons with holes, a wide box whose horizontal edges cut rows, a tiny one
    hull = shapely.MultiPoint(RNG.uniform(0, 12, (30, 2))).convex_hull
    holed = hull.difference(shapely.Point(6, 6).buffer(1.7))
    geoms = np.array([holed, box(0.3, 2.25, 9.6, 4.8), box(3.1, 3.2, 3.4, 3.3)], dtype=object)
    cov = cell_coverage(geoms)
    for i, g in enumerate(geoms):
        got: dict[tuple[int, int], float] = {}
        for r, c, f in zip(cov.row[cov.poly == i], cov.col[cov.poly == i],
                           cov.fraction[cov.poly == i], strict=True):
            got[(r, c)] = got.get((r, c), 0.0) + f
        m = cov.run_poly == i
        for r, a, b, w in zip(cov.run_row[m], cov.run_start[m], cov.run_stop[m],
                              cov.run_weight[m], strict=True):
            for c in range(a, b):
                got[(r, c)] = got.get((r, c), 0.0) + w
        for r in range(-1, 14):
            for c in range(-1, 14):  # reference: shapely exact intersection with the cell square
                ref = shapely.box(c, r, c + 1, r + 1).intersection(g).area
                assert got.get((r, c), 0.0) == pytest.approx(ref, abs=1e-9)


# --- exact class areas ----------------------------------------------------------------------

def test_half_and_half_by_hand(half_and_half_soil):
    # 10 m cells, code 1 in columns 0-4: x 0-25 over the full height -> 25 m x 100 m of class A
    soil = read_class_raster(half_and_half_soil)
    units, cov, _ = compute_unit_areas(frame([box(0, 0, 25, 100)], crs=LOCAL), soil,
                                       soil_codes={1: "A", 2: "B"})
    assert by_class(units, "S0") == pytest.approx({"A": 2500.0})
    assert units.cover_class.tolist() == ["unspecified"]
    assert cov.nodata_fraction.tolist() == [0.0]


def test_class_areas_equal_shapely_intersections(geotiff):
    codes = patchy_codes((30, 40))
    soil = read_class_raster(geotiff(codes, origin=(X0, Y0), cell=10.0))
    star = Polygon([(X0 + 23.7, Y0 - 11.1), (X0 + 211.3, Y0 - 37.9), (X0 + 120.4, Y0 - 95.2),
                    (X0 + 333.3, Y0 - 280.6), (X0 + 41.9, Y0 - 201.7)])
    holed = shapely.Point(X0 + 250.0, Y0 - 120.0).buffer(70.3).difference(
        shapely.Point(X0 + 262.0, Y0 - 111.0).buffer(25.1))
    tiny = box(X0 + 101.2, Y0 - 52.6, X0 + 103.7, Y0 - 50.1)  # inside one cell
    geoms = [star, holed, tiny]
    units, cov, _ = compute_unit_areas(frame(geoms), soil, soil_codes=SOIL)
    for i, g in enumerate(geoms):
        ref = {SOIL[k]: v for k, v in reference_areas(g, codes, X0, Y0, 10.0).items() if v > 0}
        assert by_class(units, f"S{i}") == pytest.approx(ref, rel=1e-9)
    assert_allclose(cov.area_m2, [g.area for g in geoms], rtol=1e-12)


def test_polygon_smaller_than_a_cell_gets_true_area_and_class(geotiff):
    codes = np.array([[1, 2], [3, 4]], dtype=np.uint8)
    soil = read_class_raster(geotiff(codes, origin=(X0, Y0), cell=30.0))
    inside = box(X0 + 40, Y0 - 50, X0 + 43, Y0 - 48)  # 6 m2 in the south-east cell (code 4)
    across = box(X0 + 28, Y0 - 10, X0 + 31, Y0 - 8)  # 2 m2 in code 1, 4 m2 in code 2
    units, _, _ = compute_unit_areas(frame([inside, across]), soil, soil_codes=SOIL)
    assert by_class(units, "S0") == pytest.approx({"D": 6.0})
    assert by_class(units, "S1") == pytest.approx({"A": 4.0, "B": 2.0})


def test_overlapping_subcatchments_each_get_their_full_area(half_and_half_soil):
    soil = read_class_raster(half_and_half_soil)
    gdf = frame([box(0, 0, 60, 50), box(30, 0, 90, 50)], crs=LOCAL)
    units, _, _ = compute_unit_areas(gdf, soil, soil_codes={1: "A", 2: "B"})
    assert by_class(units, "S0") == pytest.approx({"A": 2500.0, "B": 500.0})
    assert by_class(units, "S1") == pytest.approx({"A": 1000.0, "B": 2000.0})


def test_chunking_and_row_bands_do_not_change_results(geotiff):
    codes = patchy_codes((60, 60))
    soil = read_class_raster(geotiff(codes, origin=(X0, Y0), cell=5.0))
    pts = RNG.uniform([X0, Y0 - 300], [X0 + 300, Y0], (40, 2))
    extent = box(X0, Y0 - 300, X0 + 300, Y0)
    cells = shapely.voronoi_polygons(shapely.MultiPoint(pts), extend_to=extent)
    geoms = [g.intersection(box(X0 - 7, Y0 - 307, X0 + 307, Y0 + 3)) for g in cells.geoms]
    gdf = frame(geoms)
    big, _, _ = compute_unit_areas(gdf, soil, soil_codes=SOIL, max_nodata_fraction=1.0)
    small, _, _ = compute_unit_areas(gdf, soil, soil_codes=SOIL, max_nodata_fraction=1.0,
                                     chunk_cells=150)
    assert_allclose(small.area_m2, big.area_m2, rtol=1e-9)
    for i, g in enumerate(geoms[:8]):
        ref = {SOIL[k]: v for k, v in reference_areas(g, codes, X0, Y0, 5.0).items() if v > 1e-9}
        assert by_class(big, f"S{i}") == pytest.approx(ref, rel=1e-9)


# --- outside the raster and nodata ----------------------------------------------------------

def test_partly_and_wholly_outside(half_and_half_soil):
    soil = read_class_raster(half_and_half_soil)  # covers x 0-100, y 0-100
    gdf = frame([box(90, 90, 120, 110)], crs=LOCAL)
    units, cov, _ = compute_unit_areas(gdf, soil, soil_codes={1: "A", 2: "B"},
                                       nodata_rule="omit", max_nodata_fraction=1.0)
    # 30 x 20 = 600 m2, of which 10 x 10 = 100 m2 on the raster (class B): by hand
    assert by_class(units, "S0") == pytest.approx({"B": 100.0})
    assert cov.outside_area_m2.tolist() == pytest.approx([500.0])
    assert cov.nodata_fraction.tolist() == pytest.approx([500 / 600])
    # wholly outside: nothing to model it with, under every rule (it would get no rain)
    outside = frame([box(90, 90, 120, 110), box(200, 0, 210, 10)], crs=LOCAL)
    with pytest.raises(RasterError, match=r"S1 lie wholly outside"):
        compute_unit_areas(outside, soil, soil_codes={1: "A", 2: "B"}, nodata_rule="omit",
                           max_nodata_fraction=1.0)


@pytest.fixture
def soil_with_gaps(geotiff):
    # 10 x 10 cells of 10 m; left half A (1), right half B (2); column 9 is nodata (255)
    # and rows 0-1 of column 8 hold code 9, which the table does not map
    codes = np.ones((10, 10), np.uint8)
    codes[:, 5:] = 2
    codes[:, 9] = 255
    codes[:2, 8] = 9
    return read_class_raster(geotiff(codes, nodata=255, crs=LOCAL))


def test_nodata_omit_shrinks_the_units(soil_with_gaps):
    gdf = frame([box(0, 0, 100, 100)], crs=LOCAL)
    units, cov, notes = compute_unit_areas(gdf, soil_with_gaps, soil_codes={1: "A", 2: "B"},
                                           nodata_rule="omit", max_nodata_fraction=0.2)
    # nodata: column 9 (1000 m2) + code 9 cells (200 m2), counted by hand
    assert cov.nodata_area_m2.tolist() == pytest.approx([1200.0])
    assert by_class(units, "S0") == pytest.approx({"A": 5000.0, "B": 3800.0})
    assert cov.covered_area_m2.tolist() == pytest.approx([8800.0])
    assert any("left out" in n for n in notes)


def test_nodata_dominant_fills_the_largest_unit(soil_with_gaps):
    units, _, notes = compute_unit_areas(frame([box(0, 0, 100, 100)], crs=LOCAL), soil_with_gaps,
                                         soil_codes={1: "A", 2: "B"}, nodata_rule="dominant",
                                         max_nodata_fraction=0.2)
    assert by_class(units, "S0") == pytest.approx({"A": 6200.0, "B": 3800.0})
    assert any("dominant" in n for n in notes)


@pytest.mark.parametrize("rule", ["error", "dominant", "omit"])
def test_any_rule_stops_above_the_maximum(soil_with_gaps, rule):
    gdf = frame([box(0, 0, 50, 100), box(50, 0, 100, 100)], ids=["west", "east"], crs=LOCAL)
    with pytest.raises(RasterError,
                       match=r"soil\.tif: .*above 10\.0% in subcatchments east \(24\.0%\)"):
        compute_unit_areas(gdf, soil_with_gaps, soil_codes={1: "A", 2: "B"}, nodata_rule=rule,
                           max_nodata_fraction=0.1)


def test_error_rule_passes_within_the_maximum(soil_with_gaps):
    gdf = frame([box(0, 0, 50, 100)], ids=["west"], crs=LOCAL)
    units, cov, _ = compute_unit_areas(gdf, soil_with_gaps, soil_codes={1: "A", 2: "B"},
                                       nodata_rule="error", max_nodata_fraction=0.0)
    assert by_class(units, "west") == pytest.approx({"A": 5000.0})


def test_bad_options(half_and_half_soil):
    soil = read_class_raster(half_and_half_soil)
    with pytest.raises(InputError, match="nodata rule 'fill'"):
        compute_unit_areas(frame([box(0, 0, 1, 1)], crs=LOCAL), soil, soil_codes={1: "A"},
                           nodata_rule="fill")
    with pytest.raises(InputError, match="outside 0-1"):
        compute_unit_areas(frame([box(0, 0, 1, 1)], crs=LOCAL), soil, soil_codes={1: "A"},
                           max_nodata_fraction=1.5)


# --- CRSs -----------------------------------------------------------------------------------

@pytest.fixture
def utm_case(geotiff):
    codes = patchy_codes((40, 40))
    soil = read_class_raster(geotiff(codes, origin=(X0, Y0), cell=10.0))
    geoms = [Polygon([(X0 + 31.3, Y0 - 20.2), (X0 + 290.8, Y0 - 45.5), (X0 + 351.2, Y0 - 330.1),
                      (X0 + 60.7, Y0 - 371.4)]),
             shapely.Point(X0 + 200.0, Y0 - 200.0).buffer(90.0)]
    return soil, codes, geoms


def shares(units, sid):
    d = by_class(units, sid)
    total = sum(d.values())
    return {k: v / total for k, v in d.items()}


@pytest.mark.parametrize("other", ["EPSG:2264", "EPSG:4326"])  # NC state plane (ftUS); WGS 84
def test_same_polygons_in_another_crs_agree(utm_case, other):
    soil, _, geoms = utm_case
    in_utm = frame(geoms)
    base, base_cov, _ = compute_unit_areas(in_utm, soil, soil_codes=SOIL)
    moved = in_utm.to_crs(other)
    units, cov, notes = compute_unit_areas(moved, soil, soil_codes=SOIL)
    assert any("transformed" in n for n in notes)
    # each subcatchment keeps its own-CRS area ...
    assert_allclose(cov.area_m2, polygon_area_m2(moved.geometry), rtol=1e-12)
    assert_allclose(units.groupby("subcatchment_id").area_m2.sum(), cov.area_m2, rtol=1e-9)
    # ... which is the UTM area within 0.1% (map scale differences are below that here)
    assert_allclose(cov.area_m2, base_cov.area_m2, rtol=1e-3)
    for sid in ("S0", "S1"):
        got, ref = shares(units, sid), shares(base, sid)
        assert got.keys() == ref.keys()
        for k in ref:
            assert got[k] == pytest.approx(ref[k], abs=1e-3)


def test_geographic_polygons_get_geodesic_areas(utm_case):
    soil, _, geoms = utm_case
    lonlat = frame(geoms).to_crs("EPSG:4326")
    geod = Geod(ellps="WGS84")  # independent reference: pyproj Geod on the vertices
    ref = [abs(geod.polygon_area_perimeter(*g.exterior.xy)[0]) for g in lonlat.geometry]
    _, cov, _ = compute_unit_areas(lonlat, soil, soil_codes=SOIL)
    assert_allclose(cov.area_m2, ref, rtol=1e-3)


def test_geographic_raster_weights_rows_by_their_area(geotiff):
    # a lon/lat grid of 0.001 deg: code 1 west of -79.995, code 2 east of it
    codes = np.ones((20, 20), np.uint8)
    codes[:, 5:] = 2
    soil = read_class_raster(geotiff(codes, origin=(-80.0, 36.0), cell=0.001, crs="EPSG:4326"))
    poly = box(-79.9985, 35.9853, -79.9871, 35.9907)
    units, cov, _ = compute_unit_areas(frame([poly], crs="EPSG:4326"), soil, soil_codes=SOIL)
    geod = Geod(ellps="WGS84")  # reference: geodesic areas of the two halves (pyproj Geod)
    west = abs(geod.geometry_area_perimeter(box(-79.9985, 35.9853, -79.995, 35.9907))[0])
    east = abs(geod.geometry_area_perimeter(box(-79.995, 35.9853, -79.9871, 35.9907))[0])
    assert by_class(units, "S0") == pytest.approx({"A": west, "B": east}, rel=1e-4)


# --- two rasters ----------------------------------------------------------------------------

COVER = {1: "paved", 2: "lawn", 3: "woods"}


def combined_reference(poly, soil_codes, fine_cover, x0, y_top, fine_cell):
    """(soil, cover) -> area on the fine grid, from shapely cell intersections."""
    rows, cols = np.indices(fine_cover.shape)
    squares = shapely.box(x0 + cols * fine_cell, y_top - (rows + 1) * fine_cell,
                          x0 + (cols + 1) * fine_cell, y_top - rows * fine_cell).ravel()
    areas = shapely.area(shapely.intersection(squares, poly))
    df = pd.DataFrame({"s": soil_codes.ravel(), "c": fine_cover.ravel(), "a": areas})
    sums = df.groupby(["s", "c"]).a.sum()
    return {(SOIL[s], COVER[c]): a for (s, c), a in sums.items() if a > 1e-9}


def patchy_pair(geotiff, cover_shape, cover_origin, cover_cell):
    """Patchy soil codes on 20 x 20 cells of 10 m from (X0, Y0), and a patchy 3-class cover."""
    soil_codes = patchy_codes((20, 20))
    cover_codes = patchy_codes(cover_shape, n_codes=3)
    soil = read_class_raster(geotiff(soil_codes, "soil.tif", origin=(X0, Y0), cell=10.0))
    cover = read_class_raster(geotiff(cover_codes, "cover.tif", origin=cover_origin,
                                      cell=cover_cell))
    return soil_codes, cover_codes, soil, cover


def unit_dict(units, sid):
    sub = units[units.subcatchment_id == sid]
    return dict(zip(zip(sub.soil_class, sub.cover_class, strict=True), sub.area_m2, strict=True))


@pytest.mark.parametrize("cover_cell", [5.0, 10.0, 20.0])
def test_soil_and_cover_on_nested_grids_are_exact(geotiff, cover_cell):
    n = int(200 / cover_cell)
    soil_codes, cover_codes, soil, cover = patchy_pair(geotiff, (n, n), (X0, Y0), cover_cell)
    poly = Polygon([(X0 + 13.3, Y0 - 7.1), (X0 + 187.6, Y0 - 33.3), (X0 + 120.2, Y0 - 191.9),
                    (X0 + 9.9, Y0 - 150.5)])
    units, _, notes = compute_unit_areas(frame([poly]), soil, cover, soil_codes=SOIL,
                                         cover_codes=COVER)
    fine = min(cover_cell, 10.0)
    k_s, k_c = int(10.0 / fine), int(cover_cell / fine)
    soil_fine = np.kron(soil_codes, np.ones((k_s, k_s), np.uint8))
    cover_fine = np.kron(cover_codes, np.ones((k_c, k_c), np.uint8))
    ref = combined_reference(poly, soil_fine, cover_fine, X0, Y0, fine)
    assert unit_dict(units, "S0") == pytest.approx(ref, rel=1e-9)
    assert not any("not aligned" in n for n in notes)


def test_same_cell_size_shifted_grid_samples_the_cover_at_cell_centres(geotiff):
    # cover cells as large as the soil's but shifted 6 m west and north: the centre of soil
    # cell (r, c) lies in cover cell (r + 1, c + 1), so the areas are those of the soil grid
    # with the cover codes moved by one cell (reference: shapely cell intersections)
    soil_codes, cover_codes, soil, cover = patchy_pair(geotiff, (22, 22), (X0 - 6.0, Y0 + 6.0),
                                                       10.0)
    poly = Polygon([(X0 + 3.3, Y0 - 7.1), (X0 + 197.6, Y0 - 23.3), (X0 + 150.2, Y0 - 196.9),
                    (X0 + 9.9, Y0 - 120.5)])
    units, _, notes = compute_unit_areas(frame([poly]), soil, cover, soil_codes=SOIL,
                                         cover_codes=COVER)
    ref = combined_reference(poly, soil_codes, cover_codes[1:21, 1:21], X0, Y0, 10.0)
    assert unit_dict(units, "S0") == pytest.approx(ref, rel=1e-9)
    assert any("not aligned" in n for n in notes)


def test_half_cell_shifted_grid_gives_the_same_areas_whatever_is_read_with_it(geotiff):
    # 0.3 m cells with the cover offset by half a cell: every soil-cell centre lies on a cover
    # cell edge, where floating-point rounding decides the cover cell. Whatever it decides,
    # it must decide it the same way whether a polygon is overlaid alone or in a chunk with
    # its neighbours (a window-dependent shortcut once made the answer depend on the chunk).
    x0, y0, a = 133_058.0, 4_100_000.0, 0.3
    soil = read_class_raster(geotiff(np.ones((4, 400), np.uint8), "soil.tif", origin=(x0, y0),
                                     cell=a))
    cover_codes = np.random.default_rng(5).integers(1, 4, (5, 402)).astype(np.uint8)
    cover = read_class_raster(geotiff(cover_codes, "cover.tif", origin=(x0 - a / 2, y0 + a / 2),
                                      cell=a))
    polys = [box(x0 + a * (19 * k + 1) + 0.01, y0 - a * 3 + 0.01, x0 + a * (19 * k + 14) - 0.01,
                 y0 - 0.01) for k in range(20)]
    together, _, _ = compute_unit_areas(frame(polys), soil, cover, soil_codes=SOIL,
                                        cover_codes=COVER)
    for k, poly in enumerate(polys):
        alone, _, _ = compute_unit_areas(frame([poly], ids=[f"S{k}"]), soil, cover,
                                         soil_codes=SOIL, cover_codes=COVER)
        assert unit_dict(alone, f"S{k}") == pytest.approx(unit_dict(together, f"S{k}"),
                                                          rel=1e-12)
        ground = polygon_area_m2(frame([poly]).geometry)[0]  # 367 km off the meridian: geodesic
        assert sum(unit_dict(alone, f"S{k}").values()) == pytest.approx(ground, rel=1e-9)


def test_unaligned_grids_stay_within_the_stated_bound(geotiff):
    soil_codes, cover_codes, soil, cover = patchy_pair(geotiff, (12, 12), (X0 - 7.0, Y0 + 3.0),
                                                       17.0)
    poly = box(X0 + 12.5, Y0 - 180.5, X0 + 170.5, Y0 - 15.5)
    units, cov, notes = compute_unit_areas(frame([poly]), soil, cover, soil_codes=SOIL,
                                           cover_codes=COVER)
    assert any("not aligned" in n for n in notes)
    assert cov.area_m2[0] == pytest.approx(poly.area, rel=1e-12)  # total stays exact
    # exact reference: intersect the polygon with every soil cell x cover cell pair (shapely)
    rows, cols = np.indices(cover_codes.shape)
    ccells = shapely.box(X0 - 7 + cols * 17, Y0 + 3 - (rows + 1) * 17, X0 - 7 + (cols + 1) * 17,
                         Y0 + 3 - rows * 17).ravel()
    ref: dict[tuple[str, str], float] = {}
    for (r, c), s in np.ndenumerate(soil_codes):
        scell = box(X0 + c * 10, Y0 - (r + 1) * 10, X0 + (c + 1) * 10, Y0 - r * 10)
        scell = scell.intersection(poly)
        for cc, a in zip(cover_codes.ravel(), shapely.area(shapely.intersection(ccells, scell)),
                         strict=True):
            ref[(SOIL[s], COVER[cc])] = ref.get((SOIL[s], COVER[cc]), 0.0) + a
    got = unit_dict(units, "S0")
    moved = sum(abs(got.get(k, 0.0) - v) for k, v in ref.items()) / 2
    assert moved <= (10 / 17 + 10 / 17) * poly.area  # the bound the overlay states
    assert moved <= 0.10 * poly.area  # and in practice far below it


def test_rasters_in_different_crss_are_refused(geotiff):
    soil = read_class_raster(geotiff(np.ones((2, 2), np.uint8), "soil.tif", origin=(X0, Y0)))
    cover = read_class_raster(geotiff(np.ones((2, 2), np.uint8), "cover.tif", origin=(X0, Y0),
                                      crs="EPSG:26917"))
    with pytest.raises(CRSError, match=r"cover\.tif: CRS differs from the soil raster"):
        compute_unit_areas(frame([box(X0, Y0 - 5, X0 + 5, Y0)]), soil, cover, soil_codes=SOIL,
                           cover_codes=COVER)


def test_dominant_rule_stops_on_a_subcatchment_with_nothing_to_fill_from(half_and_half_soil):
    # issue 15 item 5: S1 lies wholly outside the raster; with max_fraction = 1 the rule
    # "dominant" had no unit to give its area to, and it reported 0 mm of rain
    soil = read_class_raster(half_and_half_soil)
    gdf = frame([box(0, 0, 50, 100), box(200, 0, 210, 10)], crs=LOCAL)
    with pytest.raises(RasterError, match=r"half_and_half\.tif: subcatchment\(s\) S1 lie wholly "
                                          r"outside .*'dominant'.*; extend the rasters"):
        compute_unit_areas(gdf, soil, soil_codes={1: "A", 2: "B"}, nodata_rule="dominant",
                           max_nodata_fraction=1.0)
    # "omit" and "error" would leave it with no unit at all, and so no rain: never zero rain
    for rule in ("omit", "error"):
        with pytest.raises(RasterError, match=rf"S1 lie wholly outside .*'{rule}'"):
            compute_unit_areas(gdf, soil, soil_codes={1: "A", 2: "B"}, nodata_rule=rule,
                               max_nodata_fraction=1.0)
    # partly outside is fine under "omit": the outside part is left out, as it says
    part = frame([box(0, 0, 50, 100), box(90, 0, 210, 10)], crs=LOCAL)
    _, cov, _ = compute_unit_areas(part, soil, soil_codes={1: "A", 2: "B"}, nodata_rule="omit",
                                   max_nodata_fraction=1.0)
    assert cov["nodata_fraction"].iloc[0] == pytest.approx(0.0)
    assert 0.0 < cov["nodata_fraction"].iloc[1] < 1.0
