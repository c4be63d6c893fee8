"""The overlay's two summing paths (dense spans, sparse runs) against shapely and each other.

Compact polygons are summed on dense spans of cells (gisrun.grid.dense_sums), long thin or
sprawling ones cell by cell with interior runs (gisrun.grid.sparse_sums). Both must give the
exact covered area per class: checked against shapely intersections of the polygon with every
cell square (a general-purpose reference library), and against each other.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from numpy.testing import assert_allclose
from shapely.geometry import MultiPolygon, Polygon, box
from test_overlay import SOIL, X0, Y0, by_class, frame, patchy_codes, reference_areas

from gisrun.grid.coverage import _running_sums, cell_coverage, cell_increments
from gisrun.grid.dense_sums import dense_chunk_sums, dense_eligible
from gisrun.grid.fine_grid import FineGrid
from gisrun.grid.overlay import compute_unit_areas
from gisrun.grid.sparse_sums import sparse_chunk_sums
from gisrun.io.raster import read_class_raster

CELL = 10.0


def shapes() -> list:
    """Compact, holed, two-part, thin diagonal, and overhanging-the-edge polygons (world m)."""
    star = Polygon([(X0 + 23.7, Y0 - 11.1), (X0 + 211.3, Y0 - 37.9), (X0 + 120.4, Y0 - 95.2),
                    (X0 + 333.3, Y0 - 280.6), (X0 + 41.9, Y0 - 201.7)])
    holed = shapely.Point(X0 + 250.0, Y0 - 120.0).buffer(70.3).difference(
        shapely.Point(X0 + 262.0, Y0 - 111.0).buffer(25.1))
    two_parts = MultiPolygon([box(X0 + 12.5, Y0 - 48.3, X0 + 61.1, Y0 - 20.2),
                              box(X0 + 30.4, Y0 - 251.9, X0 + 77.7, Y0 - 203.3)])  # rows apart
    diagonal = shapely.LineString([(X0 + 3.3, Y0 - 4.1), (X0 + 391.7, Y0 - 293.2)]).buffer(2.2)
    overhang = box(X0 + 371.2, Y0 - 190.4, X0 + 433.9, Y0 - 140.6)  # past the east edge
    tiny = box(X0 + 101.2, Y0 - 52.6, X0 + 103.7, Y0 - 50.1)  # inside one cell
    return [star, holed, two_parts, diagonal, overhang, tiny]


@pytest.fixture
def soil(geotiff):
    codes = patchy_codes((30, 40))  # 300 m x 400 m of 10 m cells
    return codes, read_class_raster(geotiff(codes, origin=(X0, Y0), cell=CELL))


def in_grid(geoms, grid):
    """The polygons in grid coordinates, their boxes (r0, r1, c0, c1) and areas in cells."""
    t = grid.t
    px = shapely.transform(np.asarray(geoms, dtype=object), lambda xy: np.column_stack(
        ((xy[:, 0] - t.c) / t.a, (xy[:, 1] - t.f) / t.e)))
    b = shapely.bounds(px)
    box_ = np.column_stack([np.floor(b[:, 1]), np.ceil(b[:, 3]), np.floor(b[:, 0]),
                            np.ceil(b[:, 2])]).astype(np.int64)
    return px, box_, shapely.area(px), shapely.length(px) + shapely.get_num_coordinates(px)


def test_unit_areas_of_both_paths_equal_shapely_intersections(soil):
    codes, raster = soil
    geoms = shapes()
    units, cov, _ = compute_unit_areas(frame(geoms), raster, soil_codes=SOIL,
                                       max_nodata_fraction=1.0)
    for i, g in enumerate(geoms):
        ref = {SOIL[k]: v for k, v in reference_areas(g, codes, X0, Y0, CELL).items() if v > 0}
        assert by_class(units, f"S{i}") == pytest.approx(ref, rel=1e-9)
    inside = shapely.intersection(np.asarray(geoms, dtype=object), box(X0, Y0 - 300, X0 + 400, Y0))
    assert_allclose(cov.covered_area_m2, shapely.area(inside), rtol=1e-12)


def test_thin_diagonal_takes_the_sparse_path_and_compact_shapes_the_dense_one(soil):
    _, raster = soil
    grid = FineGrid.build(raster, None, SOIL, None, [])
    _, box_, area, edges = in_grid(shapes(), grid)
    assert dense_eligible(area, box_, 4_000_000, edges).tolist() == [
        True, True, False, False, True, True]  # the two parts' box is mostly empty, too
    # no block above the budget: only the one-cell polygon's 2 x 3 block fits in 60 cells
    assert dense_eligible(area, box_, 60, edges).tolist() == [False] * 5 + [True]
    # with few edges for its area (here: counted as none) a compact polygon takes the sparse path
    assert not dense_eligible(area, box_, 4_000_000, 0 * edges).any()


@pytest.mark.parametrize("chunk_cells", [4_000_000, 900])
@pytest.mark.parametrize("exterior_cw", [True, False])
def test_dense_and_sparse_sums_agree(soil, chunk_cells, exterior_cw):
    _, raster = soil
    grid = FineGrid.build(raster, None, SOIL, None, [])
    px, box_, _, _ = in_grid(shapes(), grid)
    t = grid.t
    world = shapely.orient_polygons(np.asarray(shapes(), dtype=object), exterior_cw=exterior_cw)
    dense = dense_chunk_sums(world, box_, grid, chunk_cells, to_grid=(t.c, t.a, t.f, t.e))
    assert_allclose(dense_chunk_sums(px, box_, grid, chunk_cells), dense, rtol=1e-12, atol=1e-12)
    r0, r1, c0, c1 = box_[:, 0].min(), box_[:, 1].max(), box_[:, 2].min(), box_[:, 3].max()
    cov = cell_coverage(px, origin=(float(c0), float(r0)))
    sparse = sparse_chunk_sums(cov, grid, len(px), (int(r0), int(r1), int(c0), int(c1)),
                               chunk_cells)
    assert dense.shape == sparse.shape
    assert_allclose(dense, sparse, rtol=1e-12, atol=1e-12)
    assert dense[:, 0].sum() > 0  # the overhanging polygon has cells outside the raster


@pytest.mark.parametrize("e", [-CELL, CELL])  # north-up and south-up grids
@pytest.mark.parametrize("exterior_cw", [True, False])
def test_increments_read_in_map_coordinates_give_the_grid_coordinates_coverage(e, exterior_cw):
    world = shapely.orient_polygons(np.asarray(shapes(), dtype=object), exterior_cw=exterior_cw)
    to_grid = (X0, CELL, Y0, e)
    px = shapely.transform(world, lambda xy: np.column_stack(
        ((xy[:, 0] - X0) / CELL, (xy[:, 1] - Y0) / e)))
    ref = cell_coverage(px)
    got = _running_sums(*cell_increments(world, to_grid=to_grid), n_poly=len(px))
    for name in ("poly", "row", "col", "run_poly", "run_row", "run_start", "run_stop"):
        assert np.array_equal(getattr(got, name), getattr(ref, name)), name
    assert_allclose(got.fraction, ref.fraction, rtol=0, atol=1e-12)
    assert_allclose(got.run_weight, ref.run_weight, rtol=0, atol=1e-12)
    areas = np.bincount(got.poly, got.fraction, minlength=len(px)) + np.bincount(
        got.run_poly, got.run_weight * (got.run_stop - got.run_start), minlength=len(px))
    assert_allclose(areas, shapely.area(px), rtol=1e-12)  # shapely, the reference library
