"""Write float GeoTIFFs band by band (memory bounded) and read previews of them.

Rasters are tiled (256 x 256), DEFLATE-compressed float32 with the grid of a
reference raster (CRS, transform, size); their nodata is NaN, never the
reference raster's (an integer class raster's 255 is also a real ponding time
in minutes, and GDAL readers mask every cell that equals the nodata value).
Each is written to a
temporary file beside its target and moved into place only when complete
(:func:`gisrun.io.files.atomic_target`).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from contextlib import ExitStack
from pathlib import Path
from typing import Any

import numpy as np
import rasterio
from numpy.typing import NDArray
from rasterio.enums import Resampling
from rasterio.windows import Window

from ..model import GridSpec
from .files import atomic_target

__all__ = ["grid_of", "write_float_rasters", "read_preview", "FLOAT_NODATA"]

#: Nodata of every float raster written: NaN, which no result can equal.
FLOAT_NODATA = float("nan")
TILE = 256


def grid_of(raster: Any) -> GridSpec:
    """The grid of a :class:`gisrun.io.raster.ClassRaster`, for float rasters written on it.

    Its nodata is :data:`FLOAT_NODATA` (NaN), whatever the class raster's nodata.
    """
    return GridSpec(raster.crs, raster.transform, raster.width, raster.height, FLOAT_NODATA)


def write_float_rasters(targets: Mapping[str, Path], grid: GridSpec,
                        bands: Iterable[tuple[int, Mapping[str, NDArray[np.float64]]]],
                        *, overwrite: bool = False,
                        labels: Mapping[str, tuple[str, str]] | None = None) -> dict[str, Path]:
    """Write several float32 rasters at once from row bands (NaN = nodata).

    Parameters
    ----------
    targets : mapping of key to path
        One GeoTIFF per key.
    grid : gisrun.model.GridSpec
        CRS, transform, size and nodata of every raster.
    bands : iterable of (row_offset, {key: array (rows, width)})
        Row bands in any order; NaN cells are nodata. With a numeric
        ``grid.nodata`` NaN cells are written as it, and a value that equals it in
        float32 is moved one float32 step away (GDAL readers still mask such a
        value as nodata, hence :data:`FLOAT_NODATA`).
    overwrite : bool
        Replace existing files.
    labels : mapping of key to (description, unit), optional
        The band's description (``"runoff depth"``) and unit (``"mm"``), written into the
        GeoTIFF (GDAL band description and unit type), so a GIS shows what the values are.

    Returns
    -------
    dict of key to Path
    """
    profile = {"driver": "GTiff", "dtype": "float32", "count": 1, "crs": grid.crs.to_wkt(),
               "transform": grid.transform, "width": grid.width, "height": grid.height,
               "nodata": grid.nodata, "tiled": True, "blockxsize": TILE, "blockysize": TILE,
               "compress": "deflate", "predictor": 3, "BIGTIFF": "IF_SAFER"}
    nodata32 = np.float32(grid.nodata)
    with ExitStack() as stack:
        tmps = {k: stack.enter_context(atomic_target(p, overwrite=overwrite))
                for k, p in targets.items()}
        dsts = {k: stack.enter_context(rasterio.open(tmp, "w", **profile))
                for k, tmp in tmps.items()}
        for key, (description, unit) in (labels or {}).items():
            dsts[key].set_band_description(1, description)
            dsts[key].set_band_unit(1, unit)
        for row0, arrays in bands:
            for key, arr in arrays.items():
                out = arr.astype(np.float32)
                if not np.isnan(nodata32):
                    out[out == nodata32] = np.nextafter(nodata32, np.float32(np.inf))
                    out[np.isnan(out)] = nodata32
                dsts[key].write(out, 1, window=Window(0, row0, out.shape[1], out.shape[0]))
    return {k: Path(p) for k, p in targets.items()}


def read_preview(path: str | Path, *, max_cells: int = 1_000_000
                 ) -> tuple[NDArray[np.float64], tuple[float, float, float, float]]:
    """Read a float raster, decimated to about ``max_cells`` cells, for drawing.

    Returns
    -------
    values : ndarray
        NaN at nodata.
    extent : tuple
        (xmin, xmax, ymin, ymax) in the raster's CRS, for ``imshow(extent=...)``.
    """
    with rasterio.open(path) as src:
        step = max(1.0, float(np.sqrt(src.width * src.height / max_cells)))
        shape = (max(1, int(src.height / step)), max(1, int(src.width / step)))
        data = src.read(1, out_shape=shape, masked=True, resampling=Resampling.nearest)
        b = src.bounds
    values = np.ma.filled(data.astype(np.float64), np.nan)
    return values, (b.left, b.right, b.bottom, b.top)
