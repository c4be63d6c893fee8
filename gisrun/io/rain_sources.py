"""What the rain-stack readers share: the project's settings and what a source was found to be.

:mod:`gisrun.io.rain_grid` builds a :class:`~gisrun.io.rain_grid.RainStack` from a
:class:`FoundStack` that :mod:`gisrun.io.rain_netcdf` or :mod:`gisrun.io.rain_geotiff` made.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from affine import Affine
from numpy.typing import NDArray
from pyproj import CRS

from ..errors import StormError

__all__ = ["RainGridSettings", "FoundStack", "affine_from_centres", "AXIS_TOLERANCE"]

#: Largest departure of a cell-centre coordinate from a regular axis, as a share of the cell.
AXIS_TOLERANCE = 1e-6


@dataclass(frozen=True)
class RainGridSettings:
    """How to read a rain stack, as the project file says (all optional but the path)."""

    path: Path
    format: str | None = None
    variable: str | None = None
    time_pattern: str | None = None
    rain_is: str | None = None
    unit: str | None = None
    crs: str | None = None
    start: str | None = None
    step_s: float | None = None
    time_marks: str = "end"


@dataclass(frozen=True)
class FoundStack:
    """A rain stack as its reader found it: grid, times (datetime-like), unit text."""

    crs: CRS
    transform: Affine
    width: int
    height: int
    times: tuple[Any, ...]
    unit: str | None
    where: str
    step_s: float | None = None  # from the source's own time bounds
    start: Any = None  # likewise
    variable: str | None = None
    files: tuple[str, ...] = ()
    own_crs: bool = True  # the CRS is the file's own, not the project file's ``crs``


def affine_from_centres(x: NDArray[np.float64], y: NDArray[np.float64], where: str) -> Affine:
    """The transform of a regular grid whose cell centres are ``x`` (columns) and ``y`` (rows).

    Raises
    ------
    StormError
        If an axis has fewer than two cells or is not evenly spaced.
    """
    for name, axis in (("x", x), ("y", y)):
        if axis.ndim != 1 or axis.size < 2:
            raise StormError(where, f"has {axis.size} cell(s) along {name}",
                             "give a grid of at least 2 x 2 cells")
        step = np.diff(axis)
        if step[0] == 0 or np.any(np.abs(step - step[0]) > AXIS_TOLERANCE * abs(step[0])):
            raise StormError(where, f"has unevenly spaced {name} coordinates",
                             "give a regular grid (resample it first)")
    dx, dy = float(x[-1] - x[0]) / (x.size - 1), float(y[-1] - y[0]) / (y.size - 1)
    return Affine(dx, 0.0, float(x[0]) - dx / 2, 0.0, dy, float(y[0]) - dy / 2)
