"""Issue 15 item 2: float output rasters use NaN as nodata, so no real value reads as nodata.

The soil raster's integer nodata (255 here) is also a plausible ponding time in minutes; GDAL
readers mask every float cell equal (to float32 rounding) to the nodata value.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import rasterio

from gisrun.io.geotiff import grid_of
from gisrun.io.raster import read_class_raster
from gisrun.model import CellRasters
from gisrun.write.rasters import write_cell_rasters


def test_ponding_at_exactly_255_min_reads_back_unmasked(geotiff, tmp_path):
    soil = read_class_raster(geotiff(np.ones((40, 50), np.uint8), nodata=255))
    assert soil.nodata == 255
    ponding = np.full((40, 50), 255.0 * 60)  # every cell ponds at 255 min ...
    ponding[:5] = np.nan  # ... but the top five rows, outside every subcatchment
    runoff = np.full((40, 50), 0.255)  # 255 mm of runoff
    runoff[:5] = np.nan
    grid = grid_of(soil)
    cells = CellRasters(grid=grid, runoff_depth_m=(runoff,), time_to_ponding_s=(ponding,))
    result = SimpleNamespace(cells=cells, project=SimpleNamespace(units=SimpleNamespace(
        depth="mm")), storms=(SimpleNamespace(name="s", file_stem="s"),))
    paths = write_cell_rasters(result, tmp_path / "rasters")["s"]
    for key in ("time_to_ponding", "runoff"):
        with rasterio.open(paths[key]) as src:
            assert math.isnan(src.nodata)  # stated in the README: float outputs' nodata is NaN
            data = src.read(1, masked=True)
        assert data.mask[:5].all()
        assert not data.mask[5:].any()  # 1,750 cells of real 255s, none masked
        assert np.all(data[5:] == np.float32(255.0))
