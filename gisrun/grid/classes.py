"""Class rasters as the grid code sees them: what a class raster offers, read through one door.

A class raster (soil or cover codes) reaches the grid code as a :class:`ClassGrid`:
its georeferencing and a ``read_window`` method. ``gisrun.io.raster.ClassRaster``
is the file-backed one; tests pass arrays.
"""

from __future__ import annotations

from typing import Any, Protocol

from numpy.typing import NDArray
from pyproj import CRS

__all__ = ["ClassGrid"]


class ClassGrid(Protocol):
    """What the overlay needs from a class raster (see ``gisrun.io.raster.ClassRaster``)."""

    crs: CRS
    transform: Any
    width: int
    height: int
    nodata: float | None
    where: str

    def read_window(self, window: Any) -> tuple[NDArray[Any], Any]:
        """Read ((row_start, row_stop), (col_start, col_stop)), clipped to the raster."""
