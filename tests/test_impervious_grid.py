"""Impervious shares from an impervious-share grid: exact against shapely cell intersections."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from numpy.testing import assert_allclose
from shapely.geometry import Polygon, box

from gisrun.errors import CRSError, RasterError
from gisrun.grid.impervious import impervious_shares
from gisrun.grid.overlay import compute_unit_areas
from gisrun.io.raster import read_class_raster, read_value_raster
from gisrun.parameters import assign_parameters

#: A transverse Mercator of scale 1 at its origin, so planar areas are ground areas (as in
#: tests/test_overlay.py).
LOCAL = "+proj=tmerc +lat_0=0 +lon_0=-81 +k=1 +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs"
SOIL = {1: "A", 2: "B"}
COVER = {1: "open_space_good", 2: "commercial"}


def frame(geoms, ids=None):
    ids = ids or [f"S{i}" for i in range(len(geoms))]
    return gpd.GeoDataFrame({"subcatchment_id": ids}, geometry=list(geoms), crs=LOCAL)


def shares_of(subs, soil_path, imp_path, *, cover_path=None, scale="percent", max_nodata=0.25,
              cover_codes=None):
    soil = read_class_raster(soil_path, codes=SOIL)
    cover = read_class_raster(cover_path, codes=cover_codes or COVER) if cover_path else None
    imp = read_value_raster(imp_path)
    codes = (cover_codes or COVER) if cover_path else None
    units, _, _ = compute_unit_areas(subs, soil, cover, soil_codes=SOIL, cover_codes=codes,
                                     nodata_rule="dominant", max_nodata_fraction=max_nodata)
    return impervious_shares(subs, soil, cover, imp, units, soil_codes=SOIL, cover_codes=codes,
                             scale=scale, max_nodata_fraction=max_nodata)


def cells(values, x0, y_top, cell):
    """Cell squares and values of a grid, row 0 northern."""
    rows, cols = np.indices(values.shape)
    squares = shapely.box(x0 + cols * cell, y_top - (rows + 1) * cell,
                          x0 + (cols + 1) * cell, y_top - rows * cell).ravel()
    return squares, values.ravel()


def reference_share(poly, soil_codes, soil_cell, imp, imp_cell, soil_class):
    """Share on one soil class by shapely: sum over (soil cell, imp cell) pairs of the
    polygon's area in both, times the imp value, over the area (grids from (0, 100))."""
    s_sq, s_code = cells(soil_codes, 0.0, 100.0, soil_cell)
    i_sq, i_val = cells(imp, 0.0, 100.0, imp_cell)
    keep = s_code == soil_class
    piece = shapely.intersection(s_sq[keep], poly)
    area = shapely.area(shapely.intersection(piece[:, None], i_sq[None, :]))
    return float((area * i_val[None, :]).sum() / area.sum())


def test_a_unit_in_one_cell_of_40_percent_has_share_0_4(geotiff):
    """Acceptance: a cell of 40 % impervious gives a unit of 0.4 share to 1e-12."""
    soil = geotiff(np.ones((2, 2), np.uint8), crs=LOCAL, origin=(0, 20))
    imp = geotiff(np.array([[40.0, 0.0], [100.0, 10.0]], np.float32), "imp.tif", crs=LOCAL,
                  origin=(0, 20))
    units, notes = shares_of(frame([box(2.0, 12.0, 7.5, 18.0)]), soil, imp)
    assert len(units) == 1
    assert abs(units["impervious_fraction"].iloc[0] - 0.4) <= 1e-12
    assert notes == []


def test_partial_cells_weight_by_covered_area(geotiff):
    """A square over four cells: (50 x 0.4 + 50 x 0 + 25 x 1 + 25 x 0.1) / 150 by hand."""
    soil = geotiff(np.ones((2, 2), np.uint8), crs=LOCAL, origin=(0, 20))
    imp = geotiff(np.array([[0.4, 0.0], [1.0, 0.1]]), "imp.tif", crs=LOCAL, origin=(0, 20))
    units, _ = shares_of(frame([box(5.0, 5.0, 15.0, 20.0)]), soil, imp, scale="fraction")
    assert_allclose(units["impervious_fraction"], [47.5 / 150.0], rtol=1e-12)


@pytest.mark.parametrize("imp_cell", [10.0, 5.0, 20.0])
def test_random_polygon_against_shapely(geotiff, imp_cell):
    """Same grid, a finer (5 m) and a coarser nested (20 m) impervious grid: the share of each
    soil class equals the shapely sum over polygon x soil cell x impervious cell pieces."""
    rng = np.random.default_rng(7)
    soil_codes = rng.integers(1, 3, size=(10, 10)).astype(np.uint8)
    n = int(100 / imp_cell)
    imp = rng.uniform(0, 100, size=(n, n))
    soil = geotiff(soil_codes, crs=LOCAL)
    imp_path = geotiff(imp, "imp.tif", crs=LOCAL, cell=imp_cell)
    angles = np.sort(rng.uniform(0, 2 * np.pi, 9))
    poly = Polygon(np.column_stack([50 + 37 * np.cos(angles), 50 + 41 * np.sin(angles)]))
    units, notes = shares_of(frame([poly]), soil, imp_path)
    assert not any("not aligned" in n for n in notes)
    for row in units.itertuples():
        code = {v: k for k, v in SOIL.items()}[row.soil_class]
        expected = reference_share(poly, soil_codes, 10.0, imp / 100.0, imp_cell, code)
        assert_allclose(row.impervious_fraction, expected, rtol=1e-10)


def test_cover_raster_and_unit_split(geotiff):
    """Shares per soil x cover; the impervious part of each unit is its share of the area and
    the cover still prices the pervious part (TR-55 CN of open space, group A = 39)."""
    soil_codes = np.ones((2, 2), np.uint8)
    soil_codes[:, 1] = 2
    cover_codes = np.ones((2, 2), np.uint8)
    cover_codes[1, :] = 2
    soil = geotiff(soil_codes, crs=LOCAL, origin=(0, 20))
    cover = geotiff(cover_codes, "cover.tif", crs=LOCAL, origin=(0, 20))
    imp = geotiff(np.array([[10.0, 20.0], [30.0, 40.0]]), "imp.tif", crs=LOCAL, origin=(0, 20))
    units, _ = shares_of(frame([box(0, 0, 20, 20)]), soil, imp, cover_path=cover)
    got = {(r.soil_class, r.cover_class): r.impervious_fraction for r in units.itertuples()}
    assert_allclose([got[("A", "open_space_good")], got[("B", "open_space_good")],
                     got[("A", "commercial")], got[("B", "commercial")]],
                    [0.1, 0.2, 0.3, 0.4], rtol=1e-12)
    params, _, _ = assign_parameters(units, classification="hydrologic_soil_group",
                                     initial_saturation=0.3, method="curve_number")
    imp_part = params[(params.surface == "impervious") & (params.soil_class == "A")
                      & (params.cover_class == "open_space_good")]
    perv_part = params[(params.surface == "pervious") & (params.soil_class == "A")
                       & (params.cover_class == "open_space_good")]
    assert_allclose(imp_part["area_m2"], [0.1 * 100.0], rtol=1e-9)
    assert_allclose(perv_part["area_m2"], [0.9 * 100.0], rtol=1e-9)
    assert perv_part["curve_number"].iloc[0] == 39.0  # TR-55 (1986) Table 2-2a, open space good


def test_nodata_cells_are_left_out_of_the_weighting(geotiff):
    """One of four cells nodata: the share is the mean of the other three (25 % nodata)."""
    soil = geotiff(np.ones((2, 2), np.uint8), crs=LOCAL, origin=(0, 20))
    imp = geotiff(np.array([[-1.0, 30.0], [60.0, 90.0]]), "imp.tif", crs=LOCAL, origin=(0, 20),
                  nodata=-1.0)
    units, _ = shares_of(frame([box(0, 0, 20, 20)]), soil, imp)
    assert_allclose(units["impervious_fraction"], [0.6], rtol=1e-12)
    with pytest.raises(RasterError, match=r"S0 \(25.0%\).*max_fraction"):
        shares_of(frame([box(0, 0, 20, 20)]), soil, imp, max_nodata=0.2)


def test_values_out_of_range_stop_with_one_line(geotiff):
    soil = geotiff(np.ones((2, 2), np.uint8), crs=LOCAL, origin=(0, 20))
    imp = geotiff(np.array([[40.0, 101.0], [0.0, 0.0]]), "imp.tif", crs=LOCAL, origin=(0, 20))
    with pytest.raises(RasterError, match=r"imp.tif.*value 101, outside 0-100.*'percent'"):
        shares_of(frame([box(0, 0, 20, 20)]), soil, imp)
    with pytest.raises(RasterError, match=r"value 40, outside 0-1 for .*'fraction'"):
        shares_of(frame([box(0, 0, 20, 20)]), soil, imp, scale="fraction")


def test_crs_must_match(geotiff):
    soil = geotiff(np.ones((2, 2), np.uint8), crs=LOCAL, origin=(0, 20))
    imp = geotiff(np.zeros((2, 2)), "imp.tif", crs="EPSG:32617", origin=(0, 20))
    with pytest.raises(CRSError, match="CRS differs"):
        shares_of(frame([box(0, 0, 20, 20)]), soil, imp)


def test_unaligned_grid_is_noted(geotiff):
    soil = geotiff(np.ones((2, 2), np.uint8), crs=LOCAL, origin=(0, 20))
    imp = geotiff(np.full((3, 3), 50.0), "imp.tif", crs=LOCAL, origin=(0, 23), cell=7.0)
    units, notes = shares_of(frame([box(0, 0, 20, 20)]), soil, imp)
    assert_allclose(units["impervious_fraction"], [0.5], rtol=1e-12)
    assert any("not aligned" in n for n in notes)
