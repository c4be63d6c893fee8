"""Read and write hyetograph CSV files and IDF tables.

CSV format (gisrun's own): one time column that marks the END of each interval -- elapsed
minutes ``time_min``, elapsed hours ``time_h`` or clock times ``time`` (ISO date-time or
``HH:MM``; an ISO time without a UTC offset is read as written, whatever the computer's time
zone, so a daylight-saving change never shifts it) -- and one value column whose header names
quantity and unit: ``intensity_mm_per_h``, ``intensity_in_per_h``, ``depth_mm``, ``depth_in``,
``cumulative_depth_mm``, ``cumulative_depth_in`` (or ``intensity``, ``depth``,
``cumulative_depth`` with the unit taken from the project's unit system). An optional first row
at time 0 (or the start clock time) with zero or blank rain marks the storm start. Lines starting
with ``#`` are comments; ``# name: <storm name>`` names the storm. Steps may be fixed or
irregular. A row with more (non-blank) cells than the header is an error: decimal commas or
another delimiter would otherwise change the rain without a word.

The project file's ``[[storms]]`` blocks are built in :mod:`gisrun.config.storms`.

Storm depths feed planning-level estimates; defer to local codes, agency methods and a licensed
engineer.
"""

from __future__ import annotations

import csv
import io
import math
import os
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from ..errors import StormError
from ..options import did_you_mean
from ..storm import Hyetograph, IdfTable
from ..storm.plausibility import warn_if_implausible
from ..units import FACTORS_TO_SI, SI, US, UnitSystem, from_si, to_si
from .csv_rows import row_cells
from .files import atomic_target

__all__ = [
    "read_hyetograph_csv",
    "write_hyetograph_csv",
    "read_idf_table_csv",
]

#: Time column -> seconds per unit (None: clock times).
_TIME_COLUMNS: dict[str, float | None] = {"time_min": FACTORS_TO_SI["min"],
                                          "time_h": FACTORS_TO_SI["h"], "time": None}
_QUANTITIES = ("intensity", "depth", "cumulative_depth")
#: Units a value column may name: those of the two unit systems.
_UNITS = {"intensity": (SI.rate, US.rate), "depth": (SI.depth, US.depth),
          "cumulative_depth": (SI.depth, US.depth)}
_VALUE_COLUMNS: dict[str, tuple[str, str | None]] = {
    **{f"{q}_{u}": (q, u) for q, units in _UNITS.items() for u in units},
    **{q: (q, None) for q in _QUANTITIES},
}


def read_hyetograph_csv(
    path: str | os.PathLike[str], *, units: UnitSystem | None = None, name: str | None = None
) -> Hyetograph:
    """Read a hyetograph CSV into a checked SI :class:`~gisrun.storm.Hyetograph`.

    Parameters
    ----------
    path : path-like
        The CSV file (format in the module docstring).
    units : UnitSystem, optional
        Unit system for a value column with no unit in its name.
    name : str, optional
        Storm name; default the ``# name:`` comment, else the file stem.

    Returns
    -------
    Hyetograph

    Raises
    ------
    StormError
        One line naming the file and the 1-based data row: unreadable or empty file, missing or
        unknown columns, missing units, blank/NaN or negative rain, non-increasing times,
        decreasing cumulative depth, a gap in an otherwise regular series.

    Warns
    -----
    GisrunWarning
        If the storm holds more rain than is plausible (see ``IMPLAUSIBLE_DEPTH_M``).
    """
    path = Path(path)
    src = str(path)
    header, rows, comment_name = _read_rows(path)
    time_col, value_col = _columns(header, src)
    quantity, unit = _value_unit(value_col, units, src)
    times = _parse_times(rows, time_col, src)
    values = _parse_values(rows, src)
    time_s, value, rows_used = _to_intervals(times, values, quantity, time_col == "time", src)
    _check_gaps(time_s, rows_used, src)
    depth_m = value * to_si(1.0, unit) * (np.diff(time_s) if quantity == "intensity" else 1.0)
    h = Hyetograph(name or comment_name or path.stem, time_s, depth_m)
    warn_if_implausible(h, src, units)
    return h


def _read_rows(path: Path) -> tuple[list[str], list[tuple[int, list[str]]], str | None]:
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise StormError(str(path), "cannot be read: it does not exist",
                         "check the storm's path (relative to the project file)") from None
    except (OSError, UnicodeDecodeError) as err:
        raise StormError(str(path), f"cannot be read ({err.__class__.__name__}: {err})",
                         "check the path and that it is a UTF-8 text CSV") from None
    lines, comment_name = [], None
    for line in text.splitlines():
        stripped = line.strip()
        if stripped.startswith("#"):
            key, _, val = stripped.lstrip("#").partition(":")
            if key.strip().lower() == "name" and val.strip():
                comment_name = val.strip()
        elif stripped:
            lines.append(line)
    records = list(csv.reader(io.StringIO("\n".join(lines))))
    if not records:
        raise StormError(str(path), "is empty", "add a header (time column, value column) and rows")
    header = [h.strip().lower() for h in records[0]]
    rows = [(i, row_cells(r, len(header), f"{path}:row {i}"))
            for i, r in enumerate(records[1:], start=1)]
    if not rows:
        raise StormError(str(path), "has a header but no data rows", "add at least one row of rain")
    return header, rows, comment_name


def _columns(header: list[str], src: str) -> tuple[str, str]:
    twice = next((h for h in header if header.count(h) > 1), None)
    if twice is not None:
        raise StormError(f"{src}:header", f"names the column {twice!r} twice",
                         "keep one time column and one value column, e.g. 'time_min,depth_mm'")
    if len(header) != 2:
        unknown = [h for h in header if h not in _TIME_COLUMNS and h not in _VALUE_COLUMNS]
        bad = unknown[0] if unknown else ",".join(header)
        sep = next((c for c in ";\t|" if len(header) == 1 and c in header[0]), None)
        hint = (f"the file separates them by {sep!r}: save it with commas" if sep else
                did_you_mean(bad, [*_TIME_COLUMNS, *_VALUE_COLUMNS]) if unknown else "")
        raise StormError(f"{src}:header", f"has {len(header)} columns ({bad!r} is not used)",
                         f"keep one time column and one value column; {hint}".rstrip("; "))
    time_cols = [h for h in header if h in _TIME_COLUMNS]
    value_cols = [h for h in header if h in _VALUE_COLUMNS]
    if len(time_cols) != 1:
        other = next((h for h in header if h not in _VALUE_COLUMNS), header[0])
        raise StormError(f"{src}:header", f"no time column ({other!r} is not one)",
                         did_you_mean(other, list(_TIME_COLUMNS)))
    if len(value_cols) != 1:
        other = next(h for h in header if h != time_cols[0])
        raise StormError(f"{src}:header", f"unknown value column {other!r}",
                         did_you_mean(other, list(_VALUE_COLUMNS)))
    if header[0] != time_cols[0]:
        raise StormError(f"{src}:header", "the time column must come first",
                         f"write '{time_cols[0]},{value_cols[0]}'")
    return time_cols[0], value_cols[0]


def _value_unit(column: str, units: UnitSystem | None, src: str) -> tuple[str, str]:
    quantity, unit = _VALUE_COLUMNS[column]
    if unit is None:
        if units is None:
            raise StormError(f"{src}:header", f"missing units: column {column!r} has no unit",
                             f"name it e.g. '{column}_{_UNITS[quantity][0]}' or set the units")
        unit = units.rate if quantity == "intensity" else units.depth
    return quantity, unit


def _parse_times(rows: list[tuple[int, list[str]]], time_col: str, src: str) -> np.ndarray:
    """Parse every row's time into seconds (elapsed, clock time of day, or timestamp)."""
    factor = _TIME_COLUMNS[time_col]
    out = []
    for row, cells in rows:
        text = cells[0] if cells else ""
        try:
            value = float(text) * factor if factor else _clock_s(text)
        except ValueError:
            kind = "a number" if factor else "an ISO date-time or HH:MM"
            raise StormError(f"{src}:row {row}", f"time {text!r} is not {kind}",
                             f"write the {time_col} column as {kind}") from None
        if not math.isfinite(value):
            raise StormError(f"{src}:row {row}", f"time {text!r} is not finite", "fix the time")
        out.append(value)
    times = np.array(out)
    if factor is None and all(len(c[0]) <= 8 for _, c in rows):
        # HH:MM clock times: a drop of more than 12 h means the storm ran past midnight
        crossed = np.concatenate([[False], np.diff(times) < -43200.0])
        times = times + FACTORS_TO_SI["d"] * np.cumsum(crossed)
    return times


def _clock_s(text: str) -> float:
    if len(text) <= 8 and ":" in text:  # HH:MM or HH:MM:SS
        parts = [float(p) for p in text.split(":")]
        if len(parts) not in (2, 3) or not (0 <= parts[0] < 24 and 0 <= parts[1] < 60):
            raise ValueError(text)
        hours, minutes, seconds = parts[0], parts[1], parts[2] if len(parts) == 3 else 0.0
        return hours * FACTORS_TO_SI["h"] + minutes * FACTORS_TO_SI["min"] + seconds
    stamp = datetime.fromisoformat(text)
    if stamp.tzinfo is None:  # a naive time is read as given, never through the local zone
        stamp = stamp.replace(tzinfo=UTC)
    return stamp.timestamp()


def _parse_values(rows: list[tuple[int, list[str]]], src: str) -> list[float | None]:
    values: list[float | None] = []
    for row, cells in rows:
        text = cells[1] if len(cells) > 1 else ""
        if text == "":
            values.append(None)
            continue
        try:
            values.append(float(text))
        except ValueError:
            raise StormError(f"{src}:row {row}", f"rain {text!r} is not a number",
                             "write a number (0 for no rain)") from None
    return values


def _to_intervals(times: np.ndarray, values: list[float | None], quantity: str, is_clock: bool,
                  src: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Edges (s from the start), value per interval (depth if cumulative), row per interval."""
    rows = np.arange(1, len(times) + 1)
    if _is_start_row(float(times[0]), values[0], quantity, is_clock, src):
        if len(times) == 1:
            raise StormError(f"{src}:row 1", "has only the start row", "add rows of rain")
        edges, vals, rows, base = times - times[0], values[1:], rows[1:], values[0] or 0.0
    else:
        start = _implied_start(times, src) if is_clock else 0.0
        edges, vals, base = np.concatenate([[start], times]) - start, values, 0.0
    _check_increasing(edges, rows, src)
    v = _checked_values(vals, rows, src)
    if quantity == "cumulative_depth":
        v = _cumulative_to_depth(base, v, rows, src)
    return edges, v, rows


def _is_start_row(t0: float, v0: float | None, quantity: str, is_clock: bool, src: str) -> bool:
    if not is_clock:
        if t0 < 0:
            raise StormError(f"{src}:row 1", "time is negative", "give elapsed time from the start")
        if t0 == 0 and quantity != "cumulative_depth" and v0 not in (None, 0.0):
            raise StormError(f"{src}:row 1", f"rain {v0!r} at time 0",
                             "times mark the END of each interval; give 0 or blank at time 0")
        return t0 == 0
    return quantity == "cumulative_depth" or v0 in (None, 0.0)


def _implied_start(times: np.ndarray, src: str) -> float:
    if len(times) < 2:
        raise StormError(f"{src}:row 1", "cannot tell when the storm starts",
                         "add a first row with the start time and zero rain")
    return float(times[0] - (times[1] - times[0]))


def _check_increasing(edges: np.ndarray, rows: np.ndarray, src: str) -> None:
    bad = np.diff(edges) <= 0
    if np.any(bad):
        row = int(rows[int(np.argmax(bad))])
        raise StormError(f"{src}:row {row}", "time does not increase",
                         "sort the rows by time and remove duplicate times")


def _checked_values(vals: list[float | None], rows: np.ndarray, src: str) -> np.ndarray:
    for v, row in zip(vals, rows, strict=True):
        if v is None or not math.isfinite(v):
            raise StormError(f"{src}:row {row}", f"rain is {'blank' if v is None else v!r}",
                             "give a number (0 for no rain)")
        if v < 0:
            raise StormError(f"{src}:row {row}", f"rain {v!r} is negative", "rain must be >= 0")
    return np.array(vals, dtype=np.float64)


def _cumulative_to_depth(base: float, cum: np.ndarray, rows: np.ndarray, src: str) -> np.ndarray:
    if not math.isfinite(base) or base < 0:
        raise StormError(f"{src}:row 1", f"start depth {base!r} is not >= 0", "fix the first row")
    depth = np.diff(np.concatenate([[base], cum]))
    if np.any(depth < 0):
        row = int(rows[int(np.argmax(depth < 0))])
        raise StormError(f"{src}:row {row}", "cumulative depth decreases",
                         "cumulative depth never falls; check the row or use a depth column")
    return depth


def _check_gaps(time_s: np.ndarray, rows: np.ndarray, src: str) -> None:
    """Reject a longer step inside a series that is otherwise regular (a missing row)."""
    steps = np.diff(time_s)
    if steps.size < 3:
        return
    base = steps.min()
    ratio = steps / base
    whole = np.abs(ratio - np.round(ratio)) < 1e-6
    regular = np.isclose(ratio, 1.0, rtol=1e-6)
    if np.all(whole) and regular.sum() >= 0.5 * steps.size and not np.all(regular):
        i = int(np.argmax(~regular))
        row = int(rows[i])
        raise StormError(
            f"{src}:row {row}",
            f"a {steps[i] / 60:g}-min gap in a regular {base / 60:g}-min series",
            "add rows with zero rain for the missing steps",
        )


def write_hyetograph_csv(
    h: Hyetograph, path: str | os.PathLike[str], *, units: UnitSystem, overwrite: bool = True
) -> Path:
    """Write a hyetograph as ``time_min`` and ``depth_<unit>`` columns that read back the same.

    The file is written beside the target and moved into place
    (:func:`gisrun.io.files.atomic_target`), so a failed write leaves no partial file. Values
    are written with full float precision.

    Parameters
    ----------
    h : Hyetograph
        The storm.
    path : path-like
        Target CSV.
    units : UnitSystem
        Depths are written in ``units.depth`` (mm or in).
    overwrite : bool
        Replace an existing file (default) or raise ``OutputExistsError``.

    Raises
    ------
    OutputError
        If the file cannot be written (``OutputExistsError`` if it exists and ``overwrite`` is
        false).
    """
    target = Path(path)
    depth = np.asarray(h.depth_m) / to_si(1.0, units.depth)
    lines = [f"# name: {' '.join(h.name.split())}",
             "# gisrun hyetograph: times mark the end of each interval; planning-level estimate",
             f"time_min,depth_{units.depth}", "0,0"]
    ends_min = from_si(h.time_s[1:], "min").tolist()
    lines += [f"{t!r},{d!r}" for t, d in zip(ends_min, depth.tolist(), strict=True)]
    with atomic_target(target, overwrite=overwrite) as tmp:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return target


def read_idf_table_csv(path: str | os.PathLike[str]) -> IdfTable:
    """Read an IDF table: ``duration_min`` and ``intensity_mm_per_h`` or ``intensity_in_per_h``.

    Raises
    ------
    StormError
        Naming the file and row for unreadable files, unknown columns or bad numbers.
    """
    path = Path(path)
    src = str(path)
    header, rows, _ = _read_rows(path)
    valid = ("intensity_mm_per_h", "intensity_in_per_h")
    if len(header) != 2 or header[0] != "duration_min" or header[1] not in valid:
        bad = next((h for h in header if h not in ("duration_min", *valid)), ",".join(header))
        raise StormError(f"{src}:header", f"columns {','.join(header)!r} are not an IDF table",
                         f"use 'duration_min,intensity_mm_per_h' ({did_you_mean(bad, valid)})")
    numbers = []
    for row, cells in rows:
        try:
            d, i = float(cells[0]), float(cells[1])
        except (ValueError, IndexError):
            raise StormError(f"{src}:row {row}", f"{','.join(cells)!r} is not two numbers",
                             "write a duration and an intensity") from None
        if not (math.isfinite(d) and math.isfinite(i) and d > 0 and i > 0):
            raise StormError(f"{src}:row {row}", "duration and intensity must be > 0",
                             "fix the row")
        numbers.append((d * 60.0, i))
    arr = np.array(numbers)
    if np.any(np.diff(arr[:, 0]) <= 0):
        row = int(np.argmax(np.diff(arr[:, 0]) <= 0)) + 2
        raise StormError(f"{src}:row {row}", "duration does not increase", "sort by duration")
    unit = header[1].removeprefix("intensity_")
    try:
        return IdfTable(arr[:, 0], to_si(arr[:, 1], unit))
    except StormError as err:
        raise StormError(src, err.problem, err.fix) from None
