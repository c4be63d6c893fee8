"""Read a stack of rain grids: NetCDF (CF), a multi-band GeoTIFF, or a folder of GeoTIFFs.

:func:`open_rain_grid` looks at the file once (grid, CRS, times, unit) and returns a
:class:`RainStack`, which holds no open file: :meth:`RainStack.read_steps` opens it for each
block of steps, so the stack pickles and memory holds one block
(:func:`gisrun.storm.gridded.grid_areal_depth`). Values come back as stored
(:meth:`RainStack.read_stored`, float32 or float64), or as rain depth per step in metres
(:meth:`RainStack.read_steps`), NaN where the source has no value.

Times are decoded by the library made for them (xarray's CF decoding for NetCDF,
``datetime.strptime`` with the user's pattern for file names, ISO 8601 for band
descriptions), never by hand; the step must be the same throughout. A time marks the end of
its step unless the source gives CF time bounds or the project says ``time_marks = "start"``.
The rain unit comes from the source (the CF ``units`` attribute, a band's unit) or the
project file (``unit``); read by :func:`gisrun.units.rain_unit`.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

import numpy as np
from numpy.typing import NDArray
from pyproj import CRS, Geod, Transformer

from ..crs import checked_crs
from ..errors import StormError
from ..options import RAIN_GRID_FORMATS
from ..units import rain_unit
from . import rain_geotiff, rain_netcdf
from .rain_sources import RainGridSettings

__all__ = ["RainGridSettings", "RainStack", "open_rain_grid"]

#: Largest difference between two steps, as a share of the step, taken as rounding.
STEP_TOLERANCE = 1e-6
#: Largest distance (m) between where a stack's own CRS and the project file's ``crs`` put the
#: grid's middle for the two to be taken as one CRS (realisations of one datum, WGS 84 and
#: NAD83, differ by a metre or two; a wrong zone or datum by far more).
CRS_AGREEMENT_M = 10.0


@dataclass(frozen=True)
class RainStack:
    """A rain stack described by its grid and steps; opened on demand.

    Attributes
    ----------
    path : str
        The file (or the folder, for ``geotiff_folder``).
    format : str
        One of :data:`gisrun.options.RAIN_GRID_FORMATS`.
    crs : pyproj.CRS
    transform : affine.Affine
        Cell ``(row, col)`` -> CRS coordinates of its corner; rows may run south-up.
    width, height : int
    step_s : float
        The step, s.
    labels : tuple of str
        Each step's time as the source marks it (ISO 8601).
    start : str
        Start of the first step (ISO 8601).
    to_depth_m : float
        A stored value times this is the step's rain depth in m.
    variable : str or None
        NetCDF variable.
    files : tuple of str
        The folder's files in time order (``geotiff_folder``).
    where : str
        Name for messages (``rain.nc:precip``).
    """

    path: str
    format: str
    crs: CRS
    transform: Any
    width: int
    height: int
    step_s: float
    labels: tuple[str, ...]
    start: str
    to_depth_m: float
    where: str
    variable: str | None = None
    files: tuple[str, ...] = ()

    @property
    def steps(self) -> int:
        """Number of steps."""
        return len(self.labels)

    def step_label(self, step: int) -> str:
        """The source's time of step ``step``, for messages."""
        return f"time {self.labels[step]}"

    def read_steps(self, first: int, stop: int) -> NDArray[np.float64]:
        """Rain depth in m of steps ``first:stop``, shape ``(k, height, width)``; NaN: nodata.

        The stored values (:meth:`read_stored`) times :attr:`to_depth_m`, in one pass.
        """
        return np.multiply(self.read_stored(first, stop), self.to_depth_m, dtype=np.float64)

    def read_stored(self, first: int, stop: int) -> NDArray[np.floating]:
        """The values of steps ``first:stop`` as stored, ``(k, height, width)``; NaN: nodata.

        float32 or float64 (scale and offset applied, missing values NaN); times
        :attr:`to_depth_m` they are rain depths in m, as :meth:`read_steps` gives them.
        """
        if self.format == "netcdf":
            return rain_netcdf.read_steps(self.path, self.variable or "", first, stop,
                                          self.where)
        if self.format == "geotiff":
            return rain_geotiff.read_bands(self.path, range(first + 1, stop + 1), self.where)
        return np.stack([rain_geotiff.read_bands(f, [1], self.where)[0]
                         for f in self.files[first:stop]])


def open_rain_grid(settings: RainGridSettings) -> RainStack:
    """Look at a rain stack once and describe it.

    Parameters
    ----------
    settings : RainGridSettings
        Path and what the project file says about the stack.

    Returns
    -------
    RainStack

    Raises
    ------
    StormError
        For a missing file, an unknown format, variable, time unit or rain unit, or an
        irregular or mismatched step; one line naming the file (and variable).
    CRSError
        If the stack has no CRS and the project states none.
    """
    fmt = _format(settings)
    if fmt == "netcdf":
        found = rain_netcdf.describe(settings)
    elif fmt == "geotiff":
        found = rain_geotiff.describe_stack(settings)
    else:
        found = rain_geotiff.describe_folder(settings)
    if settings.crs is not None and found.own_crs:
        _stated_crs_agrees(found, settings.crs)
    step_s, start, labels = _steps(found, settings)
    factor = _depth_factor(found, settings, step_s)
    return RainStack(str(settings.path), fmt, found.crs, found.transform, found.width,
                     found.height, step_s, labels, start, factor, found.where,
                     variable=found.variable, files=found.files)


def _stated_crs_agrees(found: Any, stated: str) -> None:
    """Refuse a project ``crs`` that would put the stack elsewhere than its own CRS does.

    The middle of the grid, read in each CRS, must land within :data:`CRS_AGREEMENT_M` on the
    ground; so one CRS written two ways (EPSG code, CF grid mapping) passes.
    """
    said = checked_crs(stated, f"{found.where}: project file crs")
    if said.equals(found.crs, ignore_axis_order=True):
        return
    x, y = found.transform * (found.width / 2, found.height / 2)
    places = [Transformer.from_crs(c, "EPSG:4326", always_xy=True).transform(x, y)
              for c in (found.crs, said)]
    apart = Geod(ellps="WGS84").inv(*places[0], *places[1])[2]
    if not apart <= CRS_AGREEMENT_M:
        raise StormError(found.where, f"has its own CRS ({found.crs.name}) but the project file "
                         f"says crs = {stated!r}, which puts the grid {apart:,.0f} m away",
                         "leave crs out of the project file (it is for a stack without a CRS), "
                         "or correct the file's CRS")


def _format(settings: RainGridSettings) -> str:
    path = settings.path
    if not path.exists():
        raise StormError(str(path), "does not exist", "check the rain grid's path")
    if settings.format is not None:
        return RAIN_GRID_FORMATS.pick(settings.format, where=f"{path}: format",
                                      error=StormError)
    if path.is_dir():
        return "geotiff_folder"
    suffix = path.suffix.lower()
    if suffix in (".nc", ".nc4", ".netcdf", ".cdf"):
        return "netcdf"
    if suffix in (".tif", ".tiff"):
        return "geotiff"
    raise StormError(str(path), f"is not a known rain grid format ({suffix or 'no suffix'})",
                     f"give format = one of {list(RAIN_GRID_FORMATS)}")


def _steps(found: Any, settings: RainGridSettings) -> tuple[float, str, tuple[str, ...]]:
    """The step, the first step's start and each step's label, checked."""
    times: list[datetime] = list(found.times)
    where = found.where
    if not times:
        raise StormError(where, "has no time steps", "give a stack with at least one step")
    _one_kind_of_time(times, where)
    if found.step_s is not None:  # the source's own step (CF time bounds)
        step = found.step_s
    elif len(times) > 1:
        step = _regular_step(times, where)
    elif settings.step_s is not None:
        step = settings.step_s
    else:
        raise StormError(where, "has one time step and no step length",
                         "give step_min in the project file")
    if settings.step_s is not None and abs(settings.step_s - step) > STEP_TOLERANCE * step:
        raise StormError(where, f"has a step of {step / 60:g} min but the project file says "
                         f"step_min = {settings.step_s / 60:g}",
                         "make step_min match the rain grid, or leave it out")
    if found.start is not None:
        start = found.start
    else:
        start = times[0] if settings.time_marks == "start" else _minus(times[0], step)
    return step, _iso(start), tuple(_iso(t) for t in times)


def _one_kind_of_time(times: list[Any], where: str) -> None:
    """Refuse times some of which carry a UTC offset and some not (they cannot be compared)."""
    aware = [getattr(t, "utcoffset", lambda: None)() is not None for t in times]
    if any(aware) and not all(aware):
        k = aware.index(not aware[0])
        raise StormError(where, f"has times with and without a UTC offset ({_iso(times[0])}, "
                         f"step {k + 1} {_iso(times[k])})",
                         "write every time with its offset (e.g. 'Z' or '+02:00'), or none")


def _regular_step(times: list[datetime], where: str) -> float:
    seconds = np.array([(t - times[0]).total_seconds() for t in times])
    steps = np.diff(seconds)
    step = float(steps[0])
    back = np.flatnonzero(steps <= 0)
    if back.size:
        k = int(back[0])
        raise StormError(where, f"times do not increase ({_iso(times[k])}, then "
                         f"{_iso(times[k + 1])})", "give the steps in time order, each once")
    bad = np.flatnonzero(np.abs(steps - step) > STEP_TOLERANCE * step)
    if bad.size:
        k = int(bad[0])
        raise StormError(where, f"has an irregular time step: {step / 60:g} min at first, "
                         f"{steps[k] / 60:g} min from {_iso(times[k])} to {_iso(times[k + 1])}",
                         "give a stack on one fixed step (fill missing steps with zero rain "
                         "where none fell)")
    return step


def _depth_factor(found: Any, settings: RainGridSettings, step_s: float) -> float:
    """Stored value -> depth per step in m."""
    where = found.where
    if found.unit is not None and settings.unit is not None:
        own, said = rain_unit(found.unit, where), rain_unit(settings.unit, "project file unit")
        if own.kind != said.kind or not np.isclose(own.factor, said.factor, rtol=1e-12):
            raise StormError(where, f"has units {found.unit!r} but the project file says "
                             f"unit = {settings.unit!r}", "leave unit out of the project file "
                             "or make it match the rain grid")
    text = found.unit if found.unit is not None else settings.unit
    if text is None:
        raise StormError(where, "has no rain unit", "give unit = 'mm' (depth per step) or "
                         "'mm/h' (intensity) in the project file")
    unit = rain_unit(text, where)
    if settings.rain_is is not None and settings.rain_is != unit.kind:
        raise StormError(where, f"rain_is = {settings.rain_is!r} but its unit {text!r} is "
                         f"a{'n' if unit.kind == 'intensity' else ''} {unit.kind}",
                         "make rain_is and the unit agree")
    return unit.factor * (step_s if unit.kind == "intensity" else 1.0)


def _minus(t: Any, seconds: float) -> Any:
    return t - timedelta(seconds=seconds)  # datetime and cftime alike


def _iso(t: Any) -> str:
    return t.isoformat() if hasattr(t, "isoformat") else str(t)


