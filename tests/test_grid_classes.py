"""The shared class-raster door of the overlay and the cell values (gisrun.grid.classes).

Every expected value here is counted by hand on a few cells, or found independently of
the code under test: cell centres located with shapely point-in-box tests.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pytest
import shapely
from affine import Affine
from pyproj import CRS

from gisrun.grid import cells as cellgrid
from gisrun.grid.classes import CentreSampling, CodeLookup, nesting, read_padded


@dataclass
class ArrayGrid:
    """A class raster held in memory (the ClassGrid protocol); counts its reads."""

    codes: np.ndarray
    transform: Any = Affine(10.0, 0.0, 0.0, 0.0, -10.0, 100.0)
    nodata: float | None = 255
    crs: Any = CRS.from_epsg(32617)
    where: str = "array"
    reads: int = 0

    @property
    def width(self) -> int:
        return self.codes.shape[1]

    @property
    def height(self) -> int:
        return self.codes.shape[0]

    def read_window(self, window):
        (r0, r1), (c0, c1) = window
        assert 0 <= r0 < r1 <= self.height and 0 <= c0 < c1 <= self.width, "read beyond the edge"
        self.reads += 1
        return self.codes[r0:r1, c0:c1].copy(), None


CODES = np.arange(12, dtype=np.uint8).reshape(3, 4)


def test_read_padded_inside_the_raster_masks_nothing():
    block = read_padded(ArrayGrid(CODES), (1, 3), (0, 4))
    assert np.array_equal(block, CODES[1:3])
    assert not np.ma.getmaskarray(block).any()


def test_read_padded_masks_exactly_the_cells_beyond_the_edge():
    grid = ArrayGrid(CODES)
    block = read_padded(grid, (-1, 2), (2, 6))
    mask = np.ma.getmaskarray(block)
    # rows -1..1, columns 2..5: row -1 and columns 4, 5 lie beyond the 3 x 4 raster
    expected = np.ones((3, 4), bool)
    expected[1:, :2] = False
    assert np.array_equal(mask, expected)
    assert block[1:, :2].tolist() == [[2, 3], [6, 7]]
    assert grid.reads == 1


def test_read_padded_wholly_outside_reads_nothing():
    grid = ArrayGrid(CODES)
    block = read_padded(grid, (5, 7), (0, 2))
    assert block.shape == (2, 2) and np.ma.getmaskarray(block).all()
    assert grid.reads == 0


def _lookup(**kw):
    return CodeLookup({1: "A", 4: "D", 7: "A", 300: "far"}, ["A", "D"], 255, **kw)


def test_lookup_maps_codes_unknown_nodata_and_outside_cells():
    block = np.ma.MaskedArray(np.array([[1, 4, 7, 9], [255, 4, 1, 0]], np.uint8),
                              mask=[[False, False, False, False], [False, False, False, True]])
    # overlay convention: 0 outside, 1 nodata, labels from 2
    overlay = _lookup(first=2, nodata_index=1, outside_index=0)
    assert overlay.index(block).tolist() == [[2, 3, 2, 1], [1, 3, 2, 0]]
    # cell convention: labels from 0, nodata and outside both in the slot after the labels
    cells = _lookup(first=0, nodata_index=2, outside_index=2)
    assert cells.index(block).tolist() == [[0, 1, 0, 2], [2, 1, 0, 2]]


@pytest.mark.parametrize("dtype", [np.uint8, np.int16, np.int32, np.int64, np.float32,
                                   np.float64])
def test_lookup_gives_the_same_classes_whatever_the_band_type(dtype):
    values = np.array([[1, 4, 7, 9, 255, 0]])
    got = _lookup(first=2, nodata_index=1, outside_index=0).index(values.astype(dtype))
    assert got.tolist() == [[2, 3, 2, 1, 1, 1]]


def test_lookup_on_a_float_band_matches_only_whole_codes():
    values = np.array([1.0, 1.5, np.nan, np.inf, 4.0000001, 4.0])
    got = _lookup(first=0, nodata_index=2, outside_index=2).index(values)
    assert got.tolist() == [0, 2, 2, 2, 2, 1]


def test_nesting_of_whole_and_shifted_grids():
    fine = Affine(5.0, 0.0, 0.0, 0.0, -5.0, 40.0)
    # 10 m cells starting one 5 m column east: 2 x 2 fine cells each, offset (0, 1)
    assert nesting(fine, Affine(10.0, 0.0, 5.0, 0.0, -10.0, 40.0)) == (2, 2, 0, 1)
    assert nesting(fine, fine) == (1, 1, 0, 0)
    # a half-cell shift or a cell size that is not a multiple does not nest
    assert nesting(fine, Affine(10.0, 0.0, 2.5, 0.0, -10.0, 40.0)) is None
    assert nesting(fine, Affine(7.0, 0.0, 0.0, 0.0, -7.0, 40.0)) is None


@pytest.mark.parametrize("coarse", [
    Affine(30.0, 0.0, -7.0, 0.0, -30.0, 103.0),   # coarser, not aligned
    Affine(10.0, 0.0, -5.0, 0.0, -10.0, 105.0),   # same size, half a cell off
    Affine(20.0, 0.0, 0.0, 0.0, -20.0, 100.0),    # nested 2 x 2
])
def test_centre_sampling_finds_the_coarse_cell_holding_each_centre(coarse):
    fine = Affine(10.0, 0.0, 0.0, 0.0, -10.0, 100.0)
    rows, cols = (2, 7), (1, 9)
    sampling = CentreSampling(fine, coarse)
    r_idx, c_idx = sampling.indices(rows, cols)
    for i, r in enumerate(range(*rows)):
        for j, c in enumerate(range(*cols)):
            x, y = fine * (c + 0.5, r + 0.5)
            # independent: the coarse cell box (half-open to the east and south) holding the point
            cr, cc = int(r_idx[i]), int(c_idx[j])
            x0, y0 = coarse * (cc, cr)
            x1, y1 = coarse * (cc + 1, cr + 1)
            assert shapely.box(min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1)).covers(
                shapely.Point(x, y))


def test_centre_sampling_reads_one_window_and_gathers_it():
    fine = Affine(10.0, 0.0, 0.0, 0.0, -10.0, 100.0)
    coarse_codes = np.array([[1, 4], [4, 1]], np.uint8)
    coarse = ArrayGrid(coarse_codes, transform=Affine(20.0, 0.0, 0.0, 0.0, -20.0, 100.0))
    lookup = CodeLookup({1: "A", 4: "D"}, ["A", "D"], 255, first=0, nodata_index=2,
                        outside_index=2)
    got = CentreSampling(fine, coarse.transform).sample(coarse, lookup, (0, 5), (0, 4))
    # 10 m cells on 20 m cells: each coarse cell covers 2 x 2 fine cells; row 4 is beyond
    assert got.tolist() == [[0, 0, 1, 1], [0, 0, 1, 1], [1, 1, 0, 0], [1, 1, 0, 0],
                            [2, 2, 2, 2]]
    assert coarse.reads == 1


def test_cell_plan_treats_the_raster_nodata_as_nodata_as_the_overlay_does():
    """A code table that also lists the nodata value: both look-ups give the nodata slot."""
    soil = ArrayGrid(np.array([[1, 9]], np.uint8), nodata=9)
    plan = cellgrid.plan_cells(np.array([shapely.box(0, 0, 2, 1)]), soil_grid=soil,
                               cover_grid=None, soil_codes={1: "A", 9: "B"}, cover_codes=None,
                               soil_labels=["A", "B"], cover_labels=["unspecified"])
    assert plan.soil_classes.index(soil.codes).tolist() == [[0, 2]]


@pytest.mark.parametrize("dtype", ["int32", "int64", "uint32", "uint64"])
@pytest.mark.parametrize("span", [2_000, 2_000_000])  # the dense table, and the binary search
def test_lookup_of_thousands_of_wide_codes_matches_a_plain_mapping(dtype, span):
    rng = np.random.default_rng(5)
    keys = 460_000 + rng.choice(span, 2000, replace=False)
    codes = {int(k): "ABCDEF"[i % 6] for i, k in enumerate(keys)}
    nodata = int(keys.min()) + 1 if int(keys.min()) + 1 not in codes else int(keys.min()) - 1
    lookup = CodeLookup(codes, list("ABCDEF"), float(nodata), first=2, nodata_index=1,
                        outside_index=0)
    info = np.iinfo(dtype)
    strange = [nodata, 0, 459_999, int(keys.max()) + 1, int(info.max), int(info.min)]
    vals = np.array([*keys[rng.integers(0, keys.size, 5000)].tolist(), *strange], dtype=dtype)
    expected = [1 if v == nodata else 2 + "ABCDEF".index(codes[v]) if v in codes else 1
                for v in vals.tolist()]
    assert lookup.index(vals.reshape(1, -1)).ravel().tolist() == expected
