"""Peak memory of the overlay does not grow with raster size (rasters are read by windows)."""

import subprocess
import sys
import textwrap

import geopandas as gpd
import numpy as np
import pytest
import rasterio
from conftest import write_polygons
from rasterio.transform import from_origin
from rasterio.windows import Window
from shapely.geometry import box

from gisrun.crs import polygon_area_m2

#: End-to-end, dask, memory, interrupt and fuzz tests: `pytest -m "not slow"` skips them.
pytestmark = pytest.mark.slow

CELL = 10.0
SCRIPT = textwrap.dedent("""
    import sys, tracemalloc
    from gisrun.io.raster import read_class_raster
    from gisrun.io.vector import read_subcatchments
    from gisrun.grid.overlay import compute_unit_areas
    soil_path, sub_path = sys.argv[1:3]
    subs = read_subcatchments(sub_path, id_field="code")
    codes = {1: "A", 2: "B", 3: "C", 4: "D"}
    soil = read_class_raster(soil_path, codes=codes)
    tracemalloc.start()
    units, coverage, _ = compute_unit_areas(subs, soil, None, soil_codes=codes,
                                            nodata_rule="omit", max_nodata_fraction=1.0,
                                            chunk_cells=250_000)
    peak = tracemalloc.get_traced_memory()[1]
    print(peak, units["area_m2"].sum())
""")


def striped_raster(path, n):
    """n x n cells in 4 classes by diagonal stripes, written by row bands (never whole)."""
    profile = dict(driver="GTiff", width=n, height=n, count=1, dtype="uint8", crs="EPSG:32617",
                   transform=from_origin(0, n * CELL, CELL, CELL), tiled=True, blockxsize=256,
                   blockysize=256, compress="deflate")
    with rasterio.open(path, "w", **profile) as dst:
        for r0 in range(0, n, 512):
            rows = np.arange(r0, min(n, r0 + 512))[:, None]
            cols = np.arange(n)[None, :]
            band = ((rows + cols) // 37 % 4 + 1).astype("uint8")
            dst.write(band, 1, window=Window(0, r0, n, len(rows)))


def polygons(path, n, per_side=6):
    """per_side^2 squares tiling the raster, edges cutting cells (offset by a third of a cell)."""
    size = n * CELL / per_side
    geoms, codes = [], []
    for i in range(per_side):
        for j in range(per_side):
            x0, y0 = i * size + CELL / 3, j * size + CELL / 3
            geoms.append(box(x0, y0, x0 + size - CELL, y0 + size - CELL))
            codes.append(f"S{i}{j}")
    write_polygons(path, geoms, code=codes)
    # ground areas: 500 km off the UTM central meridian the planar areas are 0.5 % too large
    return float(polygon_area_m2(gpd.GeoSeries(geoms, crs="EPSG:32617")).sum())


def peak_bytes(tmp_path, n):
    soil, subs = tmp_path / f"soil_{n}.tif", tmp_path / f"subs_{n}.gpkg"
    striped_raster(soil, n)
    area = polygons(subs, n)
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(soil), str(subs)], check=True,
                         capture_output=True, text=True, timeout=300).stdout.split()
    assert abs(float(out[1]) - area) / area < 1e-9  # every square's area is accounted for
    return int(out[0])


def test_overlay_peak_memory_flat_from_1500_to_4500_cells(tmp_path):
    small = peak_bytes(tmp_path, 1500)   # 2.25 M cells
    large = peak_bytes(tmp_path, 4500)   # 20.25 M cells: 9x the raster
    # 9x the cells must not mean more than 1.5x the peak (a whole-raster read would be ~9x)
    assert large < 1.5 * small + 8e6, (small, large)


SCAN_SCRIPT = textwrap.dedent("""
    import sys
    import gisrun.io.raster as raster
    def status_mb(key):
        with open("/proc/self/status") as status:
            return int(status.read().split(key + ":")[1].split()[0]) / 1024
    soil = raster.read_class_raster(sys.argv[1], codes={1: "A", 2: "B", 3: "C", 4: "D"})
    soil.read_window(((0, 256), (0, 256)))  # warm up: imports, the first block
    before = status_mb("VmRSS")
    unknown = soil.unknown_codes([1, 2])
    print(status_mb("VmHWM") - before, unknown)  # the scan's peak, above what was in use
""")


def test_whole_raster_scan_memory_does_not_follow_the_raster(tmp_path):
    # Checking a raster's codes reads all of it, block by block. Opened without a bounded
    # GDAL environment, the blocks read stayed in memory (+406 MB for a 400 MB raster here);
    # the scan's own buffers are 8 million cells.
    from gisrun.io.raster import RASTER_CACHE_MB

    soil = tmp_path / "big.tif"
    striped_raster(soil, 16000)  # 256 MB of cells once decompressed
    out = subprocess.run([sys.executable, "-c", SCAN_SCRIPT, str(soil)], check=True,
                         capture_output=True, text=True, timeout=300).stdout
    grown, unknown = out.split(maxsplit=1)
    assert unknown.strip() == "[3, 4]"
    assert float(grown) < RASTER_CACHE_MB + 40
