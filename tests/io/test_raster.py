"""Class raster reader: grid description, windowed reads, and the checks."""

from __future__ import annotations

import pickle

import numpy as np
import pytest
from affine import Affine
from rasterio.windows import Window

from gisrun.errors import CRSError, RasterError
from gisrun.io.raster import ClassRaster, read_class_raster

CODES = np.arange(100, dtype=np.int16).reshape(10, 10)  # code = 10 * row + col


def test_grid_description(geotiff):
    path = geotiff(CODES, origin=(500.0, 2000.0), cell=10.0)
    r = read_class_raster(path, codes={1: "A"})
    assert (r.width, r.height, r.res) == (10, 10, (10.0, 10.0))
    assert r.crs.to_epsg() == 32617
    assert r.bounds == (500.0, 1900.0, 600.0, 2000.0)


def test_read_window_returns_only_that_window(geotiff):
    path = geotiff(CODES, origin=(0.0, 100.0), cell=10.0)
    r = read_class_raster(path)
    # bounds x 20-50, y 60-80 -> rows 2-3, cols 2-4 (north-up: y 80 is row 2)
    codes, t = r.read_window((20.0, 60.0, 50.0, 80.0))
    np.testing.assert_array_equal(codes, CODES[2:4, 2:5])
    assert (t.c, t.f) == (20.0, 80.0)
    # bounds cutting cells take every touched cell
    codes, _ = r.read_window((25.0, 61.0, 49.0, 79.0))
    np.testing.assert_array_equal(codes, CODES[2:4, 2:5])
    codes, _ = r.read_window(Window(1, 7, 2, 2))
    np.testing.assert_array_equal(codes, CODES[7:9, 1:3])
    codes, _ = r.read_window(((8, 12), (-3, 2)))  # clipped to the raster
    np.testing.assert_array_equal(codes, CODES[8:10, 0:2])


def test_pickles_and_reads_after(geotiff):
    r = read_class_raster(geotiff(CODES))
    again = pickle.loads(pickle.dumps(r))
    np.testing.assert_array_equal(again.read_window(((0, 1), (0, 3)))[0], CODES[:1, :3])


def test_unknown_codes_listed_nodata_ignored(geotiff):
    codes = np.ones((6, 6), np.uint8)
    codes[0, 0], codes[5, 5], codes[3, 3] = 7, 9, 255
    r = read_class_raster(geotiff(codes, nodata=255), codes={1: "A"})
    assert r.unknown_codes({1: "A"}) == [7, 9]
    # only the south-east corner: x 50-60, y 40-50 (rows 5, col 5) holds code 9
    assert r.unknown_codes([1], bounds=(50.0, 40.0, 60.0, 50.0)) == [9]
    assert r.unknown_codes([1, 7, 9]) == []


def test_scan_in_blocks_sees_every_row(geotiff, monkeypatch):
    import gisrun.io.raster as raster_mod
    monkeypatch.setattr(raster_mod, "SCAN_BLOCK_CELLS", 7)  # one row per block
    codes = np.ones((9, 5), np.uint8)
    codes[8, 4] = 3
    assert read_class_raster(geotiff(codes)).unknown_codes([1]) == [3]


def test_integer_valued_float_band_accepted(geotiff):
    codes = np.array([[1.0, 2.0], [3.0, np.nan]], dtype=np.float32)
    r = read_class_raster(geotiff(codes, nodata=np.nan), codes={1: "A", 2: "B", 3: "C"})
    assert r.unknown_codes([1, 2]) == [3]


def test_float_band_with_fractions_rejected(geotiff):
    codes = np.array([[1.0, 2.5], [3.0, 4.0]], dtype=np.float32)
    with pytest.raises(RasterError, match=r"soil\.tif.*non-integer values such as 2\.5"):
        read_class_raster(geotiff(codes), codes={1: "A"})


def test_missing_file(tmp_path):
    with pytest.raises(RasterError, match=r"nothere\.tif: file not found"):
        read_class_raster(tmp_path / "nothere.tif")


def test_not_a_raster(tmp_path):
    bad = tmp_path / "notes.tif"
    bad.write_text("this is text, not a raster")
    with pytest.raises(RasterError, match=r"notes\.tif: cannot be read as a raster"):
        read_class_raster(bad)


def test_no_crs_is_an_error_unless_stated(geotiff):
    path = geotiff(CODES, crs=None)
    with pytest.raises(CRSError, match=r"soil\.tif: has no CRS"):
        read_class_raster(path)
    assert read_class_raster(path, crs="EPSG:32617").crs.to_epsg() == 32617


def test_rotated_grid_rejected(geotiff):
    sheared = Affine(10.0, 2.0, 0.0, 0.0, -10.0, 100.0)  # b != 0
    path = geotiff(CODES, transform=sheared)
    with pytest.raises(RasterError, match=r"soil\.tif: grid is rotated or sheared"):
        read_class_raster(path)


def test_frozen_value_checks_itself():
    with pytest.raises(RasterError, match="rotated"):
        ClassRaster("x.tif", 1, None, Affine(1, 0, 0, 0.5, -1, 0), 1, 1, None, (1, 1), "x.tif")


def test_large_untiled_raster_warns_and_tiled_does_not(tmp_path, monkeypatch):
    import warnings

    import rasterio

    from gisrun.errors import GisrunWarning
    from gisrun.io import raster as raster_module

    monkeypatch.setattr(raster_module, "UNTILED_WARNING_CELLS", 100)  # keep the files tiny
    codes = np.ones((64, 64), dtype="uint8")
    profile = {"driver": "GTiff", "height": 64, "width": 64, "count": 1, "dtype": "uint8",
               "crs": "EPSG:32617", "transform": rasterio.transform.from_origin(0, 640, 10, 10)}
    with rasterio.open(tmp_path / "strips.tif", "w", **profile) as dst:
        dst.write(codes, 1)
    with rasterio.open(tmp_path / "tiled.tif", "w", tiled=True, blockxsize=16, blockysize=16,
                       **profile) as dst:
        dst.write(codes, 1)
    with pytest.warns(GisrunWarning, match=r"strips.tif.*tiled copy"):
        raster_module.read_class_raster(tmp_path / "strips.tif")
    with warnings.catch_warnings():
        warnings.simplefilter("error", GisrunWarning)
        raster_module.read_class_raster(tmp_path / "tiled.tif")
