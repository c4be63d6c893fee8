"""Read a rain stack from a NetCDF file following the CF conventions (through xarray).

The time coordinate is decoded by xarray's CF decoding (``units = "minutes since ..."``,
any CF calendar through cftime); CF time bounds, when the time coordinate names them, give
the step and its start. The grid's axes are found by their CF attributes (``axis``,
``standard_name``, ``units``) or their usual names; the CRS by the variable's
``grid_mapping`` (``pyproj.CRS.from_cf``), or longitude-latitude on WGS 84 for
``longitude``/``latitude`` axes with no grid mapping (common practice), or as the project
states.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xarray as xr
from numpy.typing import NDArray
from pyproj import CRS
from pyproj.exceptions import CRSError as _PyprojCRSError

from ..crs import checked_crs
from ..errors import StormError
from ..units import coordinate_length_m
from .rain_sources import FoundStack, RainGridSettings, affine_from_centres

__all__ = ["describe", "read_steps"]

#: Coordinate units within this share of the CRS's own unit are taken to be it (the
#: international and the US survey foot differ by 2 in a million).
SAME_UNIT = 1e-3
_X_NAMES = {"standard_name": ("projection_x_coordinate", "longitude", "grid_longitude"),
            "units": ("degrees_east", "degree_east", "degree_e", "degrees_e"),
            "name": ("x", "lon", "longitude", "easting")}
_Y_NAMES = {"standard_name": ("projection_y_coordinate", "latitude", "grid_latitude"),
            "units": ("degrees_north", "degree_north", "degree_n", "degrees_n"),
            "name": ("y", "lat", "latitude", "northing")}


def describe(settings: RainGridSettings) -> FoundStack:
    """Grid, CRS, times and unit of the rain variable of a CF NetCDF file.

    Raises
    ------
    StormError
        For an unreadable file, a missing variable, time units that are not CF or not
        understood, time bounds that do not match the times, or irregular axes.
    """
    path = Path(settings.path)
    with _open(path) as ds:
        name = _variable(ds, settings.variable, path)
        var = ds[name]
        where = f"{path.name}:{name}"
        tdim, ydim, xdim, _ = _dims(var, where)
        _placed(ds, (xdim, ydim), where)
        times = _times(ds[tdim], f"{path.name}:{tdim}")
        step_s, start = _bounds(ds, tdim, times, f"{path.name}:{tdim}")
        crs = _crs(ds, var, _is_lonlat(ds[xdim], ds[ydim]), settings.crs, where)
        own = bool(_mapping(ds, var)) or settings.crs is None
        x = _in_crs_units(ds[xdim], crs)
        y = _in_crs_units(ds[ydim], crs)
        transform = affine_from_centres(x, y, where)
        unit = var.attrs.get("units")
        return FoundStack(crs, transform, x.size, y.size, times, _text(unit), where,
                          step_s=step_s, start=start, variable=name, own_crs=own)


def read_steps(path: str, variable: str, first: int, stop: int, where: str
               ) -> NDArray[np.floating]:
    """Values of ``variable`` at time steps ``first:stop``, ``(k, y, x)``; NaN where missing.

    As xarray decodes them (CF scale, offset and missing values), float32 kept as float32
    (it widens to float64 exactly); any other type as float64.
    """
    with _open(Path(path), decode_times=False) as ds:
        var = ds[variable]
        tdim, ydim, xdim, extra = _dims(var, where)
        block = var.isel({tdim: slice(first, stop), **{d: 0 for d in extra}})
        values = np.ascontiguousarray(block.transpose(tdim, ydim, xdim).values)
        return values if values.dtype in (np.float32, np.float64) else \
            values.astype(np.float64)


def _open(path: Path, decode_times: bool = True) -> xr.Dataset:
    try:
        return xr.open_dataset(path, decode_times=decode_times, decode_timedelta=False)
    except ValueError as err:
        if decode_times and "time" in str(err):
            raise _time_error(path, err) from None
        raise StormError(str(path), f"cannot be read as NetCDF ({_first_line(err)})",
                         "check that the file is a NetCDF file") from None
    except OSError as err:
        raise StormError(str(path), f"cannot be opened ({_first_line(err)})",
                         "check the path and that the file is a readable NetCDF file") from None


def _time_error(path: Path, err: Exception) -> StormError:
    with _open(path, decode_times=False) as ds:
        names = [n for n in ds.variables if "since" in str(ds[n].attrs.get("units", ""))]
        name = names[0] if names else "time"
        units = ds[name].attrs.get("units") if name in ds.variables else None
    return StormError(f"{path.name}:{name}", f"time units {units!r} are not understood "
                      f"({_first_line(err)})", "write CF time units such as 'minutes since "
                      "2026-07-01 00:00:00'")


def _variable(ds: xr.Dataset, wanted: str | None, path: Path) -> str:
    candidates = [str(n) for n, v in ds.data_vars.items()
                  if v.ndim >= 3 and sum(size > 1 for size in v.shape) <= 3]
    if not candidates:  # one variable of more dimensions: its own dimensions are the message
        candidates = [str(n) for n, v in ds.data_vars.items() if v.ndim >= 3]
    if wanted is not None:
        if wanted not in ds.data_vars:
            raise StormError(str(path), f"has no variable {wanted!r}",
                             f"give variable = one of {candidates or list(ds.data_vars)}")
        return wanted
    if len(candidates) != 1:
        raise StormError(str(path), f"has {len(candidates)} gridded variables "
                         f"{candidates}", "name the rain one with variable = ...")
    return candidates[0]


def _dims(var: xr.DataArray, where: str) -> tuple[str, str, str, tuple[str, ...]]:
    """The time, y and x dimensions, and any others (each of length 1, read at index 0)."""
    dims = [str(d) for d in var.dims]
    if len(dims) < 3:
        raise StormError(where, f"has dimensions {dims}", "give a variable on (time, y, x)")
    x = _axis(var, dims, "X", _X_NAMES)
    y = _axis(var, dims, "Y", _Y_NAMES)
    rest = [d for d in dims if d not in (x, y)]
    if x is None or y is None or not rest:
        raise StormError(where, f"has no recognisable x, y and time dimensions among {dims}",
                         "give the coordinates CF attributes (axis = 'X' / 'Y' / 'T')")
    timed = [d for d in rest if _is_time(var, d)] if len(rest) > 1 else rest
    extra = tuple(d for d in rest if d not in timed)
    if len(timed) != 1 or any(var.sizes[d] != 1 for d in extra):
        sizes = ", ".join(f"{d}: {var.sizes[d]}" for d in dims)
        raise StormError(where, f"has dimensions ({sizes}), not (time, y, x)",
                         "give a variable on (time, y, x) and a CF time coordinate (any other "
                         "dimension must have length 1)")
    return timed[0], y, x, extra


def _is_time(var: xr.DataArray, dim: str) -> bool:
    """Whether a dimension's coordinate is CF time (decoded or not)."""
    if dim not in var.coords:
        return dim.lower() == "time"
    coord = var[dim]
    units = str(coord.attrs.get("units") or coord.encoding.get("units") or "")
    return (coord.dtype.kind == "M" or str(coord.attrs.get("axis", "")).upper() == "T"
            or str(coord.attrs.get("standard_name", "")).lower() == "time"
            or " since " in units or dim.lower() == "time")


def _placed(ds: xr.Dataset, dims: tuple[str, str], where: str) -> None:
    """Refuse a grid whose x or y dimension has no coordinate values (a curvilinear grid)."""
    for dim in dims:
        if dim not in ds.variables:
            two_d = [str(n) for n, v in ds.variables.items() if v.ndim == 2 and dim in v.dims]
            found = f" (only 2-D {', '.join(two_d)}: a curvilinear grid)" if two_d else ""
            raise StormError(where, f"has no coordinate values along dimension {dim!r}{found}",
                             "regrid the stack onto a regular grid with 1-D x and y (or "
                             "longitude and latitude) coordinates")


def _axis(var: xr.DataArray, dims: list[str], axis: str, names: dict[str, tuple[str, ...]]
          ) -> str | None:
    for d in dims:
        attrs = var[d].attrs if d in var.coords else {}
        if str(attrs.get("axis", "")).upper() == axis:
            return d
        if str(attrs.get("standard_name", "")).lower() in names["standard_name"]:
            return d
        if str(attrs.get("units", "")).lower() in names["units"]:
            return d
    return next((d for d in dims if d.lower() in names["name"]), None)


def _times(coord: xr.DataArray, where: str) -> tuple[Any, ...]:
    values = np.ravel(coord.values)
    if values.dtype.kind == "M":
        return tuple(pd.DatetimeIndex(values).to_pydatetime())
    if values.dtype.kind == "O" and all(hasattr(v, "calendar") for v in values):
        return tuple(values)
    raise StormError(where, f"has no CF time units (units = {coord.attrs.get('units')!r})",
                     "write units such as 'minutes since 2026-07-01 00:00:00'")


def _bounds(ds: xr.Dataset, tdim: str, times: tuple[Any, ...], where: str
            ) -> tuple[float | None, Any]:
    """Step and start from the CF time bounds, if the time coordinate names them."""
    name = ds[tdim].attrs.get("bounds") or ds[tdim].encoding.get("bounds")
    if not name or name not in ds.variables:
        return None, None
    edges = _times(ds[name], f"{where} bounds")
    lo, hi = edges[0::2], edges[1::2]
    widths = np.array([(b - a).total_seconds() for a, b in zip(lo, hi, strict=True)])
    gaps = np.array([(a - b).total_seconds() for a, b in zip(lo[1:], hi[:-1], strict=True)])
    step = float(widths[0])
    if step <= 0 or np.any(np.abs(widths - step) > 1e-6 * step) or np.any(np.abs(gaps) > 1e-3):
        raise StormError(where, "has time bounds of unequal or non-contiguous steps (mismatched "
                         "step)", "give bounds of one fixed step, each starting where the last "
                         "ended")
    return step, lo[0]


def _in_crs_units(coord: xr.DataArray, crs: CRS) -> NDArray[np.float64]:
    """A projected coordinate's values in its CRS's unit.

    CF allows ``units = "km"`` on a grid mapping in metres. Values of a unit not known as a
    length are taken as they are, and so are feet of either kind on a CRS in feet (files write
    "ft" for the US survey foot too: within :data:`SAME_UNIT` the CRS's own unit is meant).
    """
    values = np.asarray(coord.values, dtype=np.float64)
    length = coordinate_length_m(coord.attrs.get("units"))
    if crs.is_geographic or length is None or not crs.axis_info:
        return values
    own = float(crs.axis_info[0].unit_conversion_factor)
    return values if abs(length / own - 1.0) <= SAME_UNIT else values * (length / own)


def _is_lonlat(x: xr.DataArray, y: xr.DataArray) -> bool:
    return (str(x.attrs.get("units", "")).lower() in _X_NAMES["units"]
            or str(x.attrs.get("standard_name", "")).lower() == "longitude"
            or str(y.attrs.get("standard_name", "")).lower() == "latitude"
            or x.name in ("lon", "longitude"))


def _crs(ds: xr.Dataset, var: xr.DataArray, lonlat: bool, stated: str | None,
         where: str) -> CRS:
    mapping = _mapping(ds, var)
    if mapping:
        attrs = ds[mapping].attrs
        try:
            return CRS.from_cf(attrs)
        except _PyprojCRSError as err:
            raise StormError(where, f"grid_mapping {mapping!r} is not understood "
                             f"({_first_line(err)})", "state the grid's CRS in the project "
                             "file (crs = ...)") from None
    if stated is None and lonlat:
        return CRS.from_epsg(4326)
    return checked_crs(None, where, stated=stated)


def _mapping(ds: xr.Dataset, var: xr.DataArray) -> str:
    """The name of the variable's CF grid mapping variable, or "" without one."""
    mapping = str(var.attrs.get("grid_mapping") or var.encoding.get("grid_mapping") or "")
    name = mapping.split(":")[0]
    return name if name and name in ds.variables else ""


def _text(value: object) -> str | None:
    return None if value is None or not str(value).strip() else str(value).strip()


def _first_line(err: Exception) -> str:
    return str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
