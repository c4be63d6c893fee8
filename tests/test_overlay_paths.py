"""The overlay's two summing paths (compiled kernel, sparse runs) against shapely and each other.

Polygons that share a class window are summed by the compiled kernel
(gisrun.grid.overlay_kernels, through gisrun.grid.window_sums); a polygon larger than a chunk
on its own cell by cell with interior runs (gisrun.grid.sparse_sums). Both must give the exact
covered area per class: checked against shapely intersections of the polygon with every cell
square (a general-purpose reference library), against each other, and the kernel cell by cell
against the numpy computation it replaced (gisrun.grid.coverage.cell_coverage).
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from numpy.testing import assert_allclose
from shapely.geometry import MultiPolygon, Polygon, box
from test_overlay import SOIL, X0, Y0, by_class, frame, patchy_codes, reference_areas

from gisrun.grid.coverage import _running_sums, cell_coverage, cell_increments
from gisrun.grid.fine_grid import FineGrid
from gisrun.grid.overlay import _compact_chunks, compute_unit_areas
from gisrun.grid.overlay_kernels import polygon_class_sums
from gisrun.grid.sparse_sums import sparse_chunk_sums
from gisrun.grid.window_sums import ring_arrays, window_sums
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
    """The polygons in grid coordinates and their boxes (r0, r1, c0, c1)."""
    t = grid.t
    px = shapely.transform(np.asarray(geoms, dtype=object), lambda xy: np.column_stack(
        ((xy[:, 0] - t.c) / t.a, (xy[:, 1] - t.f) / t.e)))
    b = shapely.bounds(px)
    box_ = np.column_stack([np.floor(b[:, 1]), np.ceil(b[:, 3]), np.floor(b[:, 0]),
                            np.ceil(b[:, 2])]).astype(np.int64)
    return px, box_


def identity(cls):
    """A class window as the kernel's (codes, table, look): the classes, looked up as themselves."""
    return cls, np.arange(int(cls.max()) + 1, dtype=np.int32), (0, 0, 0, 0)


def coverage_grid(cov, n_poly, shape):
    """cell_coverage's shares laid out as (polygon, row, col) arrays (edge cells and runs)."""
    out = np.zeros((n_poly, *shape))
    np.add.at(out, (cov.poly, cov.row, cov.col), cov.fraction)
    for p, r, a, b, w in zip(cov.run_poly, cov.run_row, cov.run_start, cov.run_stop,
                             cov.run_weight, strict=True):
        out[p, r, a:b] += w
    return out


@pytest.mark.parametrize("chunk_cells", [4_000_000, 900])  # 900: the large polygons go sparse
def test_unit_areas_of_both_paths_equal_shapely_intersections(soil, chunk_cells):
    codes, raster = soil
    geoms = shapes()
    units, cov, _ = compute_unit_areas(frame(geoms), raster, soil_codes=SOIL,
                                       max_nodata_fraction=1.0, chunk_cells=chunk_cells)
    for i, g in enumerate(geoms):
        ref = {SOIL[k]: v for k, v in reference_areas(g, codes, X0, Y0, CELL).items() if v > 0}
        assert by_class(units, f"S{i}") == pytest.approx(ref, rel=1e-9)
    inside = shapely.intersection(np.asarray(geoms, dtype=object), box(X0, Y0 - 300, X0 + 400, Y0))
    assert_allclose(cov.covered_area_m2, shapely.area(inside), rtol=1e-12)


def _chunks_by_loop(order, box, chunk_cells):
    """The grouping loop the compiled ``chunk_starts`` replaced, in plain Python."""
    chunks, current = [], []
    r0 = c0 = np.iinfo(np.int64).max
    r1 = c1 = np.iinfo(np.int64).min
    for i in order.tolist():
        nr0, nr1 = min(r0, box[i, 0]), max(r1, box[i, 1])
        nc0, nc1 = min(c0, box[i, 2]), max(c1, box[i, 3])
        if current and (nr1 - nr0) * (nc1 - nc0) > chunk_cells:
            chunks.append(current)
            current, (nr0, nr1, nc0, nc1) = [], box[i]
        current.append(i)
        r0, r1, c0, c1 = nr0, nr1, nc0, nc1
    return chunks + [current]


@pytest.mark.parametrize("chunk_cells", [10**9, 5000, 900, 1])
def test_compact_chunks_group_as_the_plain_loop_did(chunk_cells):
    rng = np.random.default_rng(5)
    lo = rng.integers(-50, 400, (300, 2))
    box_ = np.column_stack([lo[:, 0], lo[:, 0] + rng.integers(1, 60, 300),
                            lo[:, 1], lo[:, 1] + rng.integers(1, 60, 300)])
    px = shapely.box(box_[:, 2], box_[:, 0], box_[:, 3], box_[:, 1])
    got = _compact_chunks(shapely.centroid(px), box_, chunk_cells)
    order = np.concatenate(got)
    assert sorted(order.tolist()) == list(range(300))
    assert [c.tolist() for c in got] == _chunks_by_loop(order, box_, chunk_cells)
    if chunk_cells == 1:
        assert all(c.size == 1 for c in got)  # every box is larger than a chunk on its own


@pytest.mark.parametrize("exterior_cw", [True, False])
def test_kernel_and_sparse_sums_agree(soil, exterior_cw):
    _, raster = soil
    grid = FineGrid.build(raster, None, SOIL, None, [])
    px, box_ = in_grid(shapes(), grid)
    t = grid.t
    world = shapely.orient_polygons(np.asarray(shapes(), dtype=object), exterior_cw=exterior_cw)
    kernel = window_sums(world, box_, grid, (t.c, t.a, t.f, t.e))
    assert_allclose(window_sums(px, box_, grid, (0.0, 1.0, 0.0, 1.0)), kernel,
                    rtol=1e-12, atol=1e-12)  # the same polygons given in grid coordinates
    r0, r1, c0, c1 = box_[:, 0].min(), box_[:, 1].max(), box_[:, 2].min(), box_[:, 3].max()
    cov = cell_coverage(px, origin=(float(c0), float(r0)))
    sparse = sparse_chunk_sums(cov, grid, len(px), (int(r0), int(r1), int(c0), int(c1)), 900)
    assert kernel.shape == sparse.shape
    assert_allclose(kernel, sparse, rtol=1e-12, atol=1e-12)
    assert kernel[:, 0].sum() > 0  # the overhanging polygon has cells outside the raster


@pytest.mark.parametrize("e", [-CELL, CELL])  # north-up and south-up grids
@pytest.mark.parametrize("exterior_cw", [True, False])
def test_kernel_cell_by_cell_equals_cell_coverage_and_shapely(e, exterior_cw):
    """Every cell its own class: the kernel's sums are its shares of single cells."""
    world = shapely.orient_polygons(np.asarray(shapes(), dtype=object), exterior_cw=exterior_cw)
    y_top = Y0 if e < 0 else Y0 - 300.0
    px = shapely.transform(world, lambda xy: np.column_stack(
        ((xy[:, 0] - X0) / CELL, (xy[:, 1] - y_top) / e)))
    shape = (31, 45)  # the polygons' cells and the column right of each
    cls = np.arange(shape[0] * shape[1], dtype=np.int32).reshape(shape)
    xy, ring_start, exterior, poly_ring = ring_arrays(world)
    window, classes = (0, 0, *shape), identity(cls)
    row_area = 1.0 + np.arange(shape[0]) / 7.0  # weights as on a geographic grid
    for weights in (np.zeros(0), row_area):
        got = polygon_class_sums(xy, ring_start, exterior, poly_ring, (X0, CELL, y_top, e),
                                 window, classes, weights, cls.size).reshape(-1, *shape)
        ref = coverage_grid(cell_coverage(px), len(px), shape)  # the numpy computation
        ref = ref * weights[None, :, None] if weights.size else ref
        assert_allclose(got, ref, rtol=0, atol=1e-12)
    cols, rows = np.meshgrid(np.arange(shape[1]), np.arange(shape[0]))
    squares = shapely.box(cols, rows, cols + 1, rows + 1)  # cell (row, col) in grid coordinates
    for i, g in enumerate(px):  # shapely's exact intersection of the polygon with each cell
        got = polygon_class_sums(xy, ring_start, exterior, poly_ring, (X0, CELL, y_top, e),
                                 window, classes, np.zeros(0), cls.size)[i].reshape(shape)
        assert_allclose(got, shapely.area(shapely.intersection(squares, g)), rtol=0, atol=1e-9)


def test_kernel_keeps_to_its_window_and_clears_its_buffer():
    """Cells beyond the class window add nothing; a polygon after a larger one is unaffected."""
    big, small = box(-3.5, -2.25, 9.75, 6.5), box(1.25, 1.5, 2.75, 3.0)
    xy, ring_start, exterior, poly_ring = ring_arrays(np.array([big, small, big], dtype=object))
    cls = np.zeros((4, 5), dtype=np.int32)  # rows 0-3, cols 0-4 only
    cls[:, 2:] = 1
    got = polygon_class_sums(xy, ring_start, exterior, poly_ring, (0.0, 1.0, 0.0, 1.0),
                             (0, 0, 4, 5), identity(cls), np.zeros(0), 2)
    assert_allclose(got[0], [8.0, 12.0], rtol=0, atol=1e-12)  # the whole window, by class
    assert_allclose(got[1], [0.75 * 1.5, 0.75 * 1.5], rtol=0, atol=1e-12)
    assert_allclose(got[2], got[0], rtol=0, atol=0)


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


def test_each_polygon_is_summed_alone_whatever_its_window_and_neighbours(soil):
    """Bit for bit: a polygon's sums do not depend on which polygons share its window."""
    _, raster = soil
    grid = FineGrid.build(raster, None, SOIL, None, [])
    t = grid.t
    to_grid = (t.c, t.a, t.f, t.e)
    world = np.asarray(shapes(), dtype=object)
    _, box_ = in_grid(world, grid)
    together = window_sums(world, box_, grid, to_grid)
    for i in range(len(world)):
        alone = window_sums(world[i:i + 1], box_[i:i + 1], grid, to_grid)
        assert np.array_equal(alone[0], together[i])


def test_ring_arrays_read_holes_either_way_and_skip_empty_entries():
    shell = [(0.5, 0.5), (6.5, 0.5), (6.5, 5.5), (0.5, 5.5)]
    hole = [(2.25, 1.75), (4.5, 1.75), (4.5, 3.5), (2.25, 3.5)]
    same_way = Polygon(shell, [hole])  # the hole runs the way the shell does
    other_way = Polygon(shell, [hole[::-1]])
    expect = 30.0 - 2.25 * 1.75  # shell minus hole (cell units)
    cls = np.zeros((8, 9), dtype=np.int32)
    for geoms in ([same_way, other_way], [same_way, shapely.Polygon(), other_way],
                  [same_way, None, other_way]):
        arrays = ring_arrays(np.array(geoms, dtype=object))
        got = polygon_class_sums(*arrays, (0.0, 1.0, 0.0, 1.0), (0, 0, 8, 9), identity(cls),
                                 np.zeros(0), 1)
        assert_allclose(got[:, 0], [expect] + [0.0] * (len(geoms) - 2) + [expect], rtol=1e-14)


@pytest.mark.parametrize(("dtype", "nodata", "codes"), [
    ("uint8", 255, {1: "A", 2: "B", 7: "C"}),
    ("int16", -9999, {-3: "A", 2: "B", 300: "C"}),
    ("int32", -9999, {1: "A", 2: "B", 40_000: "C"}),  # keys: the dense table; nodata below it
    ("uint32", 7, {3: "A", 6: "B", 7: "C"}),  # nodata among the codes, codes above the table
    ("int32", None, {1: "A", 5_000_000: "B"}),  # too wide a span: the class window itself
    ("float32", -1.0, {1: "A", 2: "B"}),
])
def test_class_source_gives_each_cell_the_class_that_classes_gives(geotiff, dtype, nodata, codes):
    rng = np.random.default_rng(11)
    keys = np.array([*codes, 5, 70_000 if dtype.endswith("32") else 9,
                     nodata if nodata is not None else 4])  # 5, 9, 70,000: not in the table
    raster = read_class_raster(geotiff(rng.choice(keys, (12, 17)).astype(dtype), nodata=nodata))
    grid = FineGrid.build(raster, None, codes, None, [])
    for win in [(0, 12, 0, 17), (-3, 5, 10, 21), (4, 9, -2, 3), (20, 25, 1, 4)]:
        source, table, (low, outside, r, c) = grid.class_source(*win)
        got = np.full((win[1] - win[0], win[3] - win[2]), outside, dtype=np.int32)
        at = np.clip(source.astype(np.int64) - low, 0, table.size - 1)  # ends: nodata
        got[r:r + source.shape[0], c:c + source.shape[1]] = table[at]
        expect = grid.classes(*win)
        assert np.array_equal(got, expect)
        # the kernel's own look-up: a polygon over the whole window gets every cell's class
        whole = np.array([box(win[2], win[0], win[3], win[1])], dtype=object)
        sums = polygon_class_sums(*ring_arrays(whole), (0.0, 1.0, 0.0, 1.0),
                                  (win[2], win[0], win[1] - win[0], win[3] - win[2]),
                                  (np.ascontiguousarray(source), table, (low, outside, r, c)),
                                  np.zeros(0), grid.n_classes)
        assert np.array_equal(sums[0], np.bincount(expect.ravel(), minlength=grid.n_classes))
    table = grid.class_source(0, 12, 0, 17)[1]  # a table over the codes, or the identity
    dense = {"uint8": 256, "int16": 65536, "int32": 40_002, "uint32": 7}
    wide = len(codes) == 2 and dtype == "int32" or dtype == "float32"
    assert table.size == (grid.n_classes if wide else dense[dtype])
