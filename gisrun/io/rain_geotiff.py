"""Read a rain stack from GeoTIFF: one multi-band file, or a folder of single-band files.

A multi-band file's band times are its band descriptions, or a ``time`` tag of each band, in
ISO 8601 (``datetime.fromisoformat``); without them the project file gives ``start`` and
``step_min``. A folder's files carry their time in the name, read with ``datetime.strptime``
and the pattern the project file gives (``time_pattern = "rain_%Y%m%d_%H%M.tif"``). The unit
is the band's unit, a ``units`` tag, or the project file's ``unit``. Nodata cells come back
NaN; band scales and offsets are applied.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from datetime import datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np
import rasterio
from numpy.typing import NDArray
from rasterio.errors import RasterioIOError

from ..crs import checked_crs
from ..errors import StormError
from .rain_sources import FoundStack, RainGridSettings
from .raster import RASTER_CACHE_MB

__all__ = ["describe_stack", "describe_folder", "read_bands", "SUFFIXES"]

#: File name endings of a folder's rain grids.
SUFFIXES = (".tif", ".tiff")


def describe_stack(settings: RainGridSettings) -> FoundStack:
    """Grid, CRS, band times and unit of a multi-band GeoTIFF.

    Raises
    ------
    StormError
        For an unreadable file, band times that are partly missing or not ISO 8601, or no
        times at all without ``start`` and ``step_min`` in the project file.
    """
    path = Path(settings.path)
    with _open(path) as src:
        grid = _grid(src, path.name, settings)
        marks = [_band_time(src, b) for b in range(1, src.count + 1)]
        unit = _unit(src, path.name)
    if all(m is None for m in marks):
        times = _stated_times(settings, len(marks), path.name)
    else:
        times = tuple(_parse_iso(m, f"{path.name}:band {b}") for b, m in enumerate(marks, start=1))
        if settings.start is not None:
            raise StormError(path.name, "has band times and the project file gives start",
                             "leave start out of the project file")
    return FoundStack(**grid, times=times, unit=unit, where=path.name)


def describe_folder(settings: RainGridSettings) -> FoundStack:
    """Grid, CRS, times (from the file names) and unit of a folder of single-band GeoTIFFs.

    Raises
    ------
    StormError
        Without ``time_pattern``, for a file whose name does not match it, two files of one
        time, or a file on another grid.
    """
    folder = Path(settings.path)
    pattern = settings.time_pattern
    if not pattern:
        raise StormError(str(folder), "is a folder of rain grids but no time_pattern is given",
                         "give time_pattern, e.g. 'rain_%Y%m%d_%H%M.tif'")
    files = sorted(p for p in folder.iterdir() if p.suffix.lower() in SUFFIXES)
    if not files:
        raise StormError(str(folder), "holds no GeoTIFF files", "give the folder of rain grids")
    timed = sorted((_time_from_name(p, pattern), p) for p in files)
    for (t0, p0), (t1, p1) in zip(timed[:-1], timed[1:], strict=True):
        if t0 == t1:
            raise StormError(p1.name, f"has the same time as {p0.name} ({t1.isoformat()})",
                             "keep one grid per time in the folder")
    grid, unit = _folder_grid([p for _, p in timed], settings)
    return FoundStack(**grid, times=tuple(t for t, _ in timed), unit=unit,
                      where=f"{folder.name}/", files=tuple(str(p) for _, p in timed))


def read_bands(path: str, indexes: Iterable[int], where: str) -> NDArray[np.float64]:
    """Bands ``indexes`` (1-based) as float64 ``(k, height, width)``, NaN where nodata."""
    with _open(Path(path)) as src:
        idx = list(indexes)
        try:
            data = src.read(idx, masked=True)
        except RasterioIOError as err:
            raise StormError(Path(path).name, f"cannot be read ({err})",
                             "copy or export the rain grid again") from None
        scale = np.array([src.scales[i - 1] for i in idx])[:, None, None]
        offset = np.array([src.offsets[i - 1] for i in idx])[:, None, None]
    out = data.astype(np.float64).filled(np.nan) * scale + offset
    return out


@contextmanager
def _open(path: Path) -> Iterator[Any]:
    with rasterio.Env(GDAL_CACHEMAX=RASTER_CACHE_MB):
        try:
            src = rasterio.open(path)
        except RasterioIOError as err:
            raise StormError(str(path), f"cannot be opened ({err})",
                             "check the path and that the file is a readable GeoTIFF") from None
        with src:
            yield src


def _grid(src: Any, where: str, settings: RainGridSettings) -> dict[str, Any]:
    t = src.transform
    if t.b != 0 or t.d != 0:
        raise StormError(where, "grid is rotated or sheared", "warp it to a north-up grid first")
    return {"crs": checked_crs(src.crs, where, stated=settings.crs), "transform": t,
            "own_crs": src.crs is not None,
            "width": int(src.width), "height": int(src.height)}


def _folder_grid(files: list[Path], settings: RainGridSettings
                 ) -> tuple[dict[str, Any], str | None]:
    with _open(files[0]) as src:
        grid, unit = _grid(src, files[0].name, settings), _unit(src, files[0].name)
    for p in files:
        with _open(p) as src:
            if src.count != 1:
                raise StormError(p.name, f"has {src.count} bands", "give one band per file")
            own = _unit(src, p.name)
            if own is not None and own != unit:
                raise StormError(p.name, f"has unit {own!r}, {files[0].name} {unit or 'none'!r}",
                                 "give every file of the folder the same rain unit")
            if (src.transform, src.width, src.height) != (grid["transform"], grid["width"],
                                                          grid["height"]) or (
                    src.crs is not None and not grid["crs"].equals(src.crs.to_wkt())):
                raise StormError(p.name, f"is not on the grid of {files[0].name}",
                                 "give every file of the folder the same grid and CRS")
    return grid, unit


def _band_time(src: Any, band: int) -> str | None:
    text = (src.descriptions[band - 1] or "").strip()
    if not text:
        tags = src.tags(band)
        text = str(tags.get("time") or tags.get("TIME") or "").strip()
    return text or None


def _unit(src: Any, where: str) -> str | None:
    """The bands' unit (or the file's ``units`` tag); every band that states one must agree."""
    stated = [(b, str(u).strip()) for b, u in enumerate(src.units or (), start=1)
              if u and str(u).strip()]
    other = next(((b, u) for b, u in stated if u != stated[0][1]), None)
    if other is not None:
        raise StormError(f"{where}:band {other[0]}", f"has unit {other[1]!r}, band "
                         f"{stated[0][0]} {stated[0][1]!r}", "give every band the same rain unit")
    text = stated[0][1] if stated else src.tags().get("units", "")
    return str(text).strip() or None


def _parse_iso(text: str | None, where: str) -> datetime:
    try:
        return datetime.fromisoformat(str(text))
    except ValueError:
        raise StormError(where, f"time {text!r} is not an ISO 8601 date and "
                         "time", "describe every band by its time, e.g. "
                         "'2026-07-01T00:05:00'") from None


def _stated_times(settings: RainGridSettings, n: int, where: str) -> tuple[datetime, ...]:
    if settings.start is None or settings.step_s is None:
        raise StormError(where, "has no band times", "describe each band by its time (ISO 8601)"
                         " or give start and step_min in the project file")
    start = _parse_iso(settings.start, f"{where}: project file start")
    first = 1 if settings.time_marks == "end" else 0
    return tuple(start + timedelta(seconds=(k + first) * settings.step_s) for k in range(n))


def _time_from_name(path: Path, pattern: str) -> datetime:
    try:
        return datetime.strptime(path.name, pattern)
    except ValueError:
        raise StormError(path.name, f"does not match time_pattern {pattern!r}",
                         "rename the file, move it out of the folder, or fix time_pattern"
                         ) from None
