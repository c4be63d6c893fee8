"""Read a categorical (class-code) raster lazily and check it.

A :class:`ClassRaster` holds only the path and the grid description; every
method opens the file itself, so the object pickles (for worker processes)
and reading a window costs memory for that window only.

The overlay reads through :meth:`ClassRaster.read_window`, so the compute
modules never import rasterio.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import rasterio
from numpy.typing import NDArray
from pyproj import CRS
from rasterio.errors import RasterioIOError
from rasterio.windows import Window, from_bounds

from ..crs import checked_crs
from ..errors import GisrunWarning, RasterError

__all__ = ["ClassRaster", "read_class_raster", "read_value_raster"]

#: Cells read per block when scanning a whole raster (about 64 MB of int64).
SCAN_BLOCK_CELLS = 8_000_000
#: GDAL's raster block cache while gisrun reads a raster, MB.
RASTER_CACHE_MB = 64


@dataclass(frozen=True)
class ClassRaster:
    """A categorical raster band described by its grid; opened on demand.

    Attributes
    ----------
    path : str
        File path.
    band : int
        Band number (1-based).
    crs : pyproj.CRS
        CRS of the grid (from the file, or stated by the user).
    transform : affine.Affine
        Pixel-to-CRS transform, north-up (no rotation or shear).
    width, height : int
        Columns and rows.
    nodata : float or None
        Nodata value of the band.
    res : tuple of float
        Cell width and height in CRS units (positive).
    where : str
        Name used in messages (usually the path).
    dtype : str
        Band data type.
    """

    path: str
    band: int
    crs: CRS
    transform: Any
    width: int
    height: int
    nodata: float | None
    res: tuple[float, float]
    where: str = ""
    dtype: str = "int32"

    def __post_init__(self) -> None:
        t = self.transform
        if t.b != 0 or t.d != 0:
            raise RasterError(self.where or self.path, "grid is rotated or sheared",
                              "warp it to a north-up grid (nearest neighbour) first")
        if t.e > 0:
            raise RasterError(self.where or self.path, "grid is south-up (positive cell height "
                              f"{t.e:g})", "warp it to a north-up grid first (gdalwarp, "
                              "nearest neighbour)")
        if self.width <= 0 or self.height <= 0:
            raise RasterError(self.where or self.path, "raster has no cells", "use another raster")

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) in CRS units."""
        t = self.transform
        xs = (t.c, t.c + t.a * self.width)
        ys = (t.f, t.f + t.e * self.height)
        return min(xs), min(ys), max(xs), max(ys)

    def read_window(self, window: Any) -> tuple[NDArray[Any], Any]:
        """Read the codes inside one window, and only that window.

        Parameters
        ----------
        window : rasterio Window, ((row_start, row_stop), (col_start, col_stop)) or
            (xmin, ymin, xmax, ymax) bounds in the raster CRS
            Parts outside the raster are not returned (the window is clipped).

        Returns
        -------
        codes : ndarray
            2-D array of codes (the band's dtype; integer-valued floats stay float).
        transform : affine.Affine
            Transform of the returned array.
        """
        win = self._as_window(window)
        with self._open() as src:
            return self._read(src, win), src.window_transform(win)

    def unknown_codes(self, codes: Iterable[int],
                      bounds: tuple[float, float, float, float] | None = None) -> list[int]:
        """Codes present in the raster (within ``bounds``) but not in ``codes``.

        Scans block by block, so memory stays bounded; nodata is ignored.

        Parameters
        ----------
        codes : iterable of int
            The known codes (keys of the code table).
        bounds : tuple of float, optional
            (xmin, ymin, xmax, ymax) in the raster CRS, e.g. the polygons' bounds.

        Returns
        -------
        list of int
            Sorted unknown codes; the caller raises ``RasterError`` listing them.
        """
        known = np.array(sorted({int(c) for c in codes}), dtype=np.float64)
        found: set[float] = set()
        for block in self._blocks(bounds):
            vals = np.unique(block)
            vals = vals[~_is_nodata(vals, self.nodata)]
            found.update(vals[~np.isin(vals, known)].tolist())
        return sorted(int(v) if float(v).is_integer() else v for v in found)

    def _blocks(self, bounds: tuple[float, float, float, float] | None) -> Iterable[NDArray[Any]]:
        full = Window(0, 0, self.width, self.height)
        win = self._as_window(bounds) if bounds is not None else full
        (r0, r1), (c0, c1) = win.toranges()
        step = max(1, SCAN_BLOCK_CELLS // max(1, c1 - c0))
        with self._open() as src:
            for r in range(r0, r1, step):
                yield self._read(src, Window(c0, r, c1 - c0, min(step, r1 - r)))

    def _read(self, src: Any, win: Window) -> NDArray[Any]:
        """Read one window; a file that ends early or is damaged is the raster's problem."""
        try:
            return src.read(self.band, window=win)
        except RasterioIOError as err:
            raise RasterError(self.where or self.path, f"cannot be read at rows {win.row_off}-"
                              f"{win.row_off + win.height} (the file ends early or is damaged)",
                              "copy or export the raster again") from err

    def _as_window(self, window: Any) -> Window:
        if isinstance(window, Window):
            win = window
        elif len(window) == 2:
            (r0, r1), (c0, c1) = window
            win = Window(c0, r0, c1 - c0, r1 - r0)
        else:
            win = _outer(from_bounds(*window, transform=self.transform))
        full = Window(0, 0, self.width, self.height)
        try:
            return win.intersection(full)
        except rasterio.errors.WindowError:
            return Window(0, 0, 0, 0)

    @contextmanager
    def _open(self) -> Iterator[Any]:
        # Read inside a rasterio environment with a bounded GDAL block cache: opened without
        # one, the blocks of a whole-raster scan stayed in memory (measured: +406 MB after
        # scanning a 400 MB raster, +15 MB with it). Each chunk reads its window once, so a
        # small cache loses nothing.
        with rasterio.Env(GDAL_CACHEMAX=RASTER_CACHE_MB):
            try:
                src = rasterio.open(self.path)
            except RasterioIOError as err:
                raise RasterError(self.where or self.path, f"cannot be opened ({err})",
                                  "check the path and that the file is a readable raster"
                                  ) from None
            with src:
                yield src


def _outer(win: Window) -> Window:
    col0, row0 = math.floor(win.col_off + 1e-9), math.floor(win.row_off + 1e-9)
    col1 = math.ceil(win.col_off + win.width - 1e-9)
    row1 = math.ceil(win.row_off + win.height - 1e-9)
    return Window(col0, row0, col1 - col0, row1 - row0)


def _is_nodata(vals: NDArray[Any], nodata: float | None) -> NDArray[np.bool_]:
    mask = np.zeros(vals.shape, dtype=bool)
    if vals.dtype.kind == "f":
        mask |= np.isnan(vals)
    if nodata is not None and not (isinstance(nodata, float) and math.isnan(nodata)):
        mask |= vals == nodata
    return mask


def read_class_raster(path: str | Path, *, codes: Mapping[int, str] | None = None,
                      where: str | None = None, crs: object = None, band: int = 1,
                      whole_numbers: bool = True) -> ClassRaster:
    """Open a categorical raster, check it, and describe its grid.

    Parameters
    ----------
    path : str or Path
        Raster file (any format GDAL reads: GeoTIFF, ...).
    codes : mapping of int to str, optional
        The code table; used only to list its codes in messages.
    where : str, optional
        Name for messages (default: the path).
    crs : object, optional
        CRS to use when the file has none.
    band : int
        Band number (1-based).
    whole_numbers : bool
        Check that a float band holds whole numbers only (class codes).

    Returns
    -------
    ClassRaster

    Raises
    ------
    RasterError
        Unreadable file, missing band, rotated/sheared grid, or a float band
        holding non-integer values.
    CRSError
        No CRS in the file and none stated.
    """
    name = where or str(path)
    if not Path(path).exists():
        raise RasterError(name, "file not found", "check the path in the project file")
    try:
        src = rasterio.open(path)
    except RasterioIOError as err:
        raise RasterError(name, f"cannot be read as a raster ({err})",
                          "give a GeoTIFF or another raster GDAL can read") from None
    with src:
        if not 1 <= band <= src.count:
            raise RasterError(name, f"has no band {band} (it has {src.count})", "pick another band")
        grid_crs = checked_crs(src.crs, name, stated=crs)
        t = src.transform
        if t.b != 0 or t.d != 0:
            raise RasterError(name, "grid is rotated or sheared",
                              "warp it to a north-up grid (nearest neighbour) first")
        raster = ClassRaster(path=str(path), band=band, crs=grid_crs, transform=t,
                             width=src.width, height=src.height, nodata=src.nodatavals[band - 1],
                             res=(abs(t.a), abs(t.e)), where=name, dtype=src.dtypes[band - 1])
        _warn_if_untiled(src, band, name)
    _check_nodata_not_a_code(raster, codes)
    if whole_numbers and np.dtype(raster.dtype).kind == "f":
        _check_integer_values(raster, codes)
    return raster


def read_value_raster(path: str | Path, *, where: str | None = None, crs: object = None,
                      band: int = 1) -> ClassRaster:
    """Open a raster of measured values (an impervious share), check its grid, read nothing.

    The same grid checks as :func:`read_class_raster`, without asking for whole numbers;
    the values are checked where they are read (:mod:`gisrun.grid.impervious`).
    """
    return read_class_raster(path, where=where, crs=crs, band=band, whole_numbers=False)


#: Rasters with more cells than this are worth tiling (common practice: 256 or 512 blocks).
UNTILED_WARNING_CELLS = 4096 * 4096


def _warn_if_untiled(src: Any, band: int, name: str) -> None:
    """Warn when a large raster is stored in whole-row strips: windows then read whole rows."""
    block_rows, block_cols = src.block_shapes[band - 1]
    if src.width * src.height > UNTILED_WARNING_CELLS and block_cols >= src.width:
        warnings.warn(GisrunWarning(
            f"{name}: stored in strips of whole rows ({block_rows} x {block_cols} blocks), so "
            "each window reads whole rows; a tiled copy reads faster (e.g. gdal_translate -co "
            "TILED=YES -co COMPRESS=DEFLATE)"), stacklevel=3)


def _check_nodata_not_a_code(raster: ClassRaster, codes: Mapping[int, str] | None) -> None:
    """Stop when the nodata value is also a mapped code: its cells would silently vanish."""
    nodata = raster.nodata
    if not codes or nodata is None or not math.isfinite(nodata) or nodata not in codes:
        return
    raise RasterError(raster.where, f"its nodata value {nodata:g} is also a class code in the "
                      f"code table ({codes[int(nodata)]!r}), so those cells would count as "
                      "missing", "give the raster another nodata value (gdal_edit -a_nodata) or "
                      "remove that code from the table")


def _check_integer_values(raster: ClassRaster, codes: Mapping[int, str] | None) -> None:
    for block in raster._blocks(None):
        vals = block[~_is_nodata(block, raster.nodata)]
        bad = vals[vals != np.round(vals)]
        if bad.size:
            table = f" (code table: {sorted(codes)})" if codes else ""
            raise RasterError(raster.where, f"holds non-integer values such as {float(bad[0])}; "
                              f"class codes must be whole numbers{table}",
                              "give a raster of integer class codes")
