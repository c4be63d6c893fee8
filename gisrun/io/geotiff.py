"""Write float GeoTIFFs band by band (memory bounded), read class windows and previews.

Rasters are tiled (256 x 256), DEFLATE-compressed float32 with the grid of a
reference raster (CRS, transform, size, nodata). Each is written to a
temporary file beside its target and moved into place only when complete
(:func:`gisrun.io.files.atomic_target`).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from contextlib import ExitStack
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import rasterio
from numpy.typing import NDArray
from rasterio.enums import Resampling
from rasterio.windows import Window

from .files import atomic_target

__all__ = ["GridSpec", "write_float_rasters", "read_padded", "read_preview", "DEFAULT_NODATA"]

#: Nodata of the written rasters when the reference raster has none.
DEFAULT_NODATA = -9999.0
TILE = 256


@dataclass(frozen=True)
class GridSpec:
    """The grid written rasters share with a reference raster."""

    crs: Any
    transform: Any
    width: int
    height: int
    nodata: float


def grid_of(raster: Any) -> GridSpec:
    """Return the grid of a :class:`gisrun.io.raster.ClassRaster` (nodata -9999 if none)."""
    nodata = raster.nodata
    if nodata is None or (isinstance(nodata, float) and np.isnan(nodata)):
        nodata = DEFAULT_NODATA
    return GridSpec(raster.crs, raster.transform, raster.width, raster.height, float(nodata))


def write_float_rasters(targets: Mapping[str, Path], grid: GridSpec,
                        bands: Iterable[tuple[int, Mapping[str, NDArray[np.float64]]]],
                        *, overwrite: bool = False) -> dict[str, Path]:
    """Write several float32 rasters at once from row bands (NaN = nodata).

    Parameters
    ----------
    targets : mapping of key to path
        One GeoTIFF per key.
    grid : GridSpec
        CRS, transform, size and nodata of every raster.
    bands : iterable of (row_offset, {key: array (rows, width)})
        Row bands in any order; NaN cells are written as ``grid.nodata``. A value
        that equals the nodata value in float32 is moved one float32 step away,
        so it stays valid.
    overwrite : bool
        Replace existing files.

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
        for row0, arrays in bands:
            for key, arr in arrays.items():
                out = arr.astype(np.float32)
                out[out == nodata32] = np.nextafter(nodata32, np.float32(np.inf))
                out[np.isnan(out)] = nodata32
                dsts[key].write(out, 1, window=Window(0, row0, out.shape[1], out.shape[0]))
    return {k: Path(p) for k, p in targets.items()}


def read_padded(raster: Any, rows: tuple[int, int], cols: tuple[int, int]) -> np.ma.MaskedArray:
    """Rows and columns of a class raster; cells beyond its edge come back masked."""
    (r0, r1), (c0, c1) = rows, cols
    shape = (r1 - r0, c1 - c0)
    rr0, rr1, cc0, cc1 = max(r0, 0), min(r1, raster.height), max(c0, 0), min(c1, raster.width)
    if rr0 >= rr1 or cc0 >= cc1:
        return np.ma.masked_all(shape, dtype=np.int64)
    data, _ = raster.read_window(((rr0, rr1), (cc0, cc1)))
    out = np.ma.masked_all(shape, dtype=data.dtype)
    out[rr0 - r0:rr1 - r0, cc0 - c0:cc1 - c0] = data
    return out


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
