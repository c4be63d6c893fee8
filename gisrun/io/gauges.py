"""Read rain gauges: their locations (a point layer) and their records (CSV), checked, in SI.

Records (gisrun's own format) are one CSV with a time column and one column per gauge, headed
by the gauge's id, or a folder with one CSV per gauge, ``<gauge id>.csv``, each with a time
column and one value column. The time column is ``time`` (an ISO 8601 date-time; one without a
UTC offset is read as written, whatever the computer's time zone), ``time_min`` or ``time_h``
(elapsed); each row's time marks the end of its step (``time_marks = "start"``: its start). The
step must be one fixed length, the same in every file, and so must the times (as instants,
however written). Values are rain depth per step in the
project's depth unit (``rain_is = "intensity"``: the project's rate unit). A blank cell, ``NA``
or ``nan`` is a gap in that gauge's record (the storm kind says what happens to it). Lines
starting with ``#`` are comments.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import shapely
from pyogrio.errors import DataLayerError, DataSourceError

from ..crs import checked_crs
from ..errors import StormError, VectorError
from ..options import did_you_mean
from ..units import FACTORS_TO_SI, UnitSystem, to_si
from .csv_rows import row_cells

__all__ = ["GaugeRecords", "read_gauge_points", "read_gauge_records", "GAP_TEXTS"]

#: Cell texts read as a gap in a record (besides a blank cell).
GAP_TEXTS = frozenset({"na", "nan", "n/a", "-"})
_ELAPSED = {"time_min": FACTORS_TO_SI["min"], "time_h": FACTORS_TO_SI["h"]}
_STEP_TOL = 1e-6  # relative tolerance of "one fixed step"


@dataclass(frozen=True)
class GaugeRecords:
    """Every gauge's rain on one fixed step (SI); NaN marks a gap."""

    ids: tuple[str, ...]
    #: Depth per step and gauge, m, shape (steps, gauges); NaN where the record has a gap.
    depth_m: np.ndarray
    step_s: float
    #: Each step's time as written in the records (for messages).
    times: tuple[str, ...]
    #: The first step's start (ISO 8601), or None for elapsed times.
    start: str | None
    #: The file each gauge's record was read from.
    files: tuple[str, ...]


def read_gauge_points(path: Path, *, id_field: str, layer: str | None = None
                      ) -> gpd.GeoDataFrame:
    """Read a point layer of gauges: columns ``gauge_id`` (text) and ``geometry``, with a CRS.

    Raises
    ------
    VectorError
        Missing or unreadable file, unknown layer or field, no features, a missing, empty or
        repeated id, a geometry that is not one point.
    CRSError
        The layer has no CRS.
    """
    here = f"{path}" + (f":{layer}" if layer else "")
    if not Path(path).exists():
        raise VectorError(str(path), "file not found", "check the gauges path in [[storms]]")
    try:
        fields = [str(f) for f in pyogrio.read_info(path, layer=layer)["fields"]]
        if id_field not in fields:
            raise VectorError(f"{here}:{id_field}", "no such field",
                              did_you_mean(id_field, fields))
        gdf = pyogrio.read_dataframe(path, layer=layer, columns=[id_field])
    except (DataSourceError, DataLayerError) as err:
        raise VectorError(here, f"cannot be read as a point layer ({err})",
                          "give a GeoPackage, shapefile, GeoJSON or CSV layer of points") from None
    if len(gdf) == 0:
        raise VectorError(here, "has no gauges", "add the gauge points")
    gdf = gdf.set_crs(checked_crs(gdf.crs, here), allow_override=True)
    ids = [_id_text(v) for v in gdf[id_field]]
    for row, gauge in enumerate(ids, start=1):
        if not gauge:
            raise VectorError(f"{here}:{id_field}", f"feature {row} has no gauge id",
                              "give every gauge an id")
    repeated = sorted({g for g in ids if ids.count(g) > 1})
    if repeated:
        raise VectorError(f"{here}:{id_field}", f"gauge id {repeated[0]!r} is used twice",
                          "give every gauge its own id")
    geoms = gdf.geometry.to_numpy()
    bad = ~(shapely.get_type_id(geoms) == 0) | shapely.is_empty(geoms)
    if bad.any():
        raise VectorError(f"{here}:id={ids[int(np.argmax(bad))]}", "is not a single point",
                          "give each gauge as one point")
    return gpd.GeoDataFrame({"gauge_id": ids}, geometry=geoms, crs=gdf.crs)


def read_gauge_records(path: Path, *, units: UnitSystem, rain_is: str = "depth",
                       time_marks: str = "end") -> GaugeRecords:
    """Read gauge records from one CSV or a folder of ``<gauge id>.csv`` files.

    Raises
    ------
    StormError
        Naming the file and row: unreadable or empty file, unknown time column, a time that
        does not parse or increase, a step that changes (or differs between files), a value
        that is not a number or is negative, the same gauge twice.
    """
    path = Path(path)
    if path.is_dir():
        files = sorted(p for p in path.iterdir() if p.suffix.lower() == ".csv")
        if not files:
            raise StormError(str(path), "holds no .csv file", "put one <gauge id>.csv per gauge")
        tables = [_read_table(f, single=f.stem) for f in files]
    else:
        tables = [_read_table(path, single=None)]
    first = tables[0]
    for other in tables[1:]:
        _same_times(first, other)
    ids = [g for t in tables for g in t.ids]
    twice = next((g for g in ids if ids.count(g) > 1), None)
    if twice is not None:
        raise StormError(str(path), f"gauge {twice!r} has two records", "keep one per gauge")
    values = np.concatenate([t.values for t in tables], axis=1)
    factor = float(to_si(1.0, units.rate if rain_is == "intensity" else units.depth))
    depth = values * factor * (first.step_s if rain_is == "intensity" else 1.0)
    shift = first.step_s if time_marks == "end" else 0.0
    start = None if first.start is None else _iso(first.start - shift)
    return GaugeRecords(tuple(ids), depth, first.step_s, first.times, start,
                        tuple(t.file for t in tables for _ in t.ids))


@dataclass(frozen=True)
class _Table:
    file: str
    ids: tuple[str, ...]
    values: np.ndarray  # (steps, gauges), as written, NaN for gaps
    step_s: float
    times: tuple[str, ...]
    start: float | None  # the first row's time as a POSIX timestamp (clock times only)
    seconds: np.ndarray  # each row's time, s (POSIX for clock times, else elapsed)


def _read_table(path: Path, *, single: str | None) -> _Table:
    """One CSV: time column first, then the gauges' columns (``single``: one, its id)."""
    src = str(path)
    header, rows = _rows(path)
    time_col = header[0].strip().lower()
    if time_col != "time" and time_col not in _ELAPSED:
        raise StormError(f"{src}:header", f"the first column {header[0]!r} is not a time column",
                         did_you_mean(time_col, ["time", *_ELAPSED]))
    ids = [h.strip() for h in header[1:]]
    if single is not None:
        if len(ids) != 1:
            raise StormError(f"{src}:header", f"has {len(ids)} value columns",
                             "give a gauge's file a time column and one value column")
        ids = [single]
    if not ids or any(not g for g in ids):
        raise StormError(f"{src}:header", "has a column without a gauge id",
                         "head each value column with its gauge's id")
    seconds = np.array([_time_s(cells[0], time_col, f"{src}:row {n}") for n, cells in rows])
    step = _fixed_step(seconds, rows, src)
    values = np.array([[_value(c, f"{src}:row {n}", g) for c, g in zip(cells[1:], ids,
                                                                         strict=False)]
                       + [math.nan] * (len(ids) + 1 - len(cells)) for n, cells in rows])
    times = tuple(cells[0] for _, cells in rows)
    return _Table(src, tuple(ids), values.reshape(len(rows), len(ids)), step, times,
                  float(seconds[0]) if time_col == "time" else None, seconds)


def _rows(path: Path) -> tuple[list[str], list[tuple[int, list[str]]]]:
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise StormError(str(path), "cannot be read: it does not exist",
                         "check the records path (relative to the project file)") from None
    except (OSError, UnicodeDecodeError) as err:
        raise StormError(str(path), f"cannot be read ({err.__class__.__name__})",
                         "give a UTF-8 text CSV") from None
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    records = list(csv.reader(io.StringIO("\n".join(lines))))
    if len(records) < 3:
        raise StormError(str(path), "needs a header and at least two rows",
                         "give a time column and one column per gauge, one row per step")
    header = records[0]
    return header, [(n, row_cells(r, len(header), f"{path}:row {n}"))
                    for n, r in enumerate(records[1:], start=1)]


def _time_s(text: str, column: str, where: str) -> float:
    try:
        if column in _ELAPSED:
            value = float(text) * _ELAPSED[column]
        else:
            stamp = datetime.fromisoformat(text)
            value = (stamp if stamp.tzinfo else stamp.replace(tzinfo=UTC)).timestamp()
    except ValueError:
        kind = "a number" if column in _ELAPSED else "an ISO 8601 date-time"
        raise StormError(where, f"time {text!r} is not {kind}", f"write {column} as {kind}") \
            from None
    if not math.isfinite(value):
        raise StormError(where, f"time {text!r} is not finite", "fix the time")
    return value


def _fixed_step(seconds: np.ndarray, rows: list[tuple[int, list[str]]], src: str) -> float:
    steps = np.diff(seconds)
    if np.any(steps <= 0):
        row = rows[int(np.argmax(steps <= 0)) + 1][0]
        raise StormError(f"{src}:row {row}", "time does not increase",
                         "sort the rows by time and remove repeated times")
    step = float(steps[0])
    off = np.abs(steps - step) > _STEP_TOL * step
    if np.any(off):
        k = int(np.argmax(off))
        raise StormError(f"{src}:row {rows[k + 1][0]}", f"the step changes from {step / 60:g} to "
                         f"{steps[k] / 60:g} min (a missing row?)",
                         "give every step a row; write a blank cell for a missing value")
    return step


def _value(text: str, where: str, gauge: str) -> float:
    if text == "" or text.lower() in GAP_TEXTS:
        return math.nan
    try:
        value = float(text)
    except ValueError:
        raise StormError(where, f"gauge {gauge!r}: {text!r} is not a number",
                         "write a number, or leave the cell blank for a gap") from None
    if not math.isfinite(value) or value < 0:
        raise StormError(where, f"gauge {gauge!r}: rain {text!r} is not >= 0",
                         "write a depth >= 0, or leave the cell blank for a gap")
    return value


def _same_times(first: _Table, other: _Table) -> None:
    if abs(other.step_s - first.step_s) > _STEP_TOL * first.step_s:
        raise StormError(other.file, f"has a {other.step_s / 60:g}-min step, {first.file} a "
                         f"{first.step_s / 60:g}-min step (mismatched step)",
                         "give every gauge's record on the same step")
    if (other.start is None) != (first.start is None):
        raise StormError(other.file, f"has {'elapsed' if other.start is None else 'clock'} "
                         f"times, {first.file} {'elapsed' if first.start is None else 'clock'} "
                         "times", "give every gauge's record the same kind of time column")
    n = min(len(first.times), len(other.times))
    # the same instants, however written (06:05, 06:05:00, 06:05Z), to a millionth of a step
    off = np.abs(other.seconds[:n] - first.seconds[:n]) > _STEP_TOL * first.step_s
    if off.any() or len(other.times) != len(first.times):
        k = int(np.argmax(off)) if off.any() else n
        shown = other.times[k] if k < len(other.times) else "the end of the file"
        raise StormError(other.file, f"step {k + 1} is at {shown}, in {first.file} at "
                         f"{first.times[k] if k < len(first.times) else 'its end'}",
                         "give every gauge's record the same times (blank cells for gaps)")


def _iso(timestamp: float) -> str:
    return (datetime(1970, 1, 1, tzinfo=UTC) + timedelta(seconds=timestamp)).strftime(
        "%Y-%m-%dT%H:%M:%S")


def _id_text(value: object) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return str(value).strip()
