"""Read a table of areal reduction factors by area and duration (CSV) into SI.

The columns carry their units: an area column (``area_km2`` or ``area_mi2``), a duration column
(``duration_min`` or ``duration_h``) and ``factor``, in any order; lines starting with ``#`` are
comments. Every area must have a factor at every duration (a full grid), each pair once::

    # factors from the local drainage manual, table 3
    area_km2,duration_min,factor
    1,60,0.98
    10,60,0.93
    1,360,0.99
    10,360,0.96

Areal reduction gives planning-level estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path

import numpy as np

from ..errors import StormError
from ..options import did_you_mean
from ..storm import FactorTable
from ..units import to_si
from .csv_rows import row_cells

__all__ = ["read_factor_table_csv", "AREA_COLUMNS", "DURATION_COLUMNS"]

#: Area columns and their unit.
AREA_COLUMNS = {"area_km2": "km2", "area_mi2": "mi2"}
#: Duration columns and their unit.
DURATION_COLUMNS = {"duration_min": "min", "duration_h": "h"}
_FIX_HEADER = "use a header such as 'area_km2,duration_min,factor' (or area_mi2, duration_h)"


def read_factor_table_csv(path: str | Path) -> FactorTable:
    """Read a factor table (see the module text) into a :class:`~gisrun.storm.FactorTable`.

    Raises
    ------
    StormError
        Naming the file and the header, row or pair at fault.
    """
    path = Path(path)
    header, rows = _rows(path)
    area_col, duration_col = _columns(header, f"{path}:header")
    values = {}
    for row, cells in rows:
        numbers = _numbers(cells, f"{path}:row {row}")
        area, duration, factor = (numbers[header.index(c)]
                                  for c in (area_col, duration_col, "factor"))
        if factor > 1:
            raise StormError(f"{path}:row {row}", f"factor {factor:g} is above 1",
                             "give a factor in (0, 1]: the areal depth over the point depth")
        key = (float(to_si(area, AREA_COLUMNS[area_col])),
               float(to_si(duration, DURATION_COLUMNS[duration_col])))
        if key in values:
            raise StormError(f"{path}:row {row}", f"gives area {area:g} and duration "
                             f"{duration:g} a second time", "keep one row per area and duration")
        values[key] = factor
    areas = np.array(sorted({a for a, _ in values}))
    durations = np.array(sorted({d for _, d in values}))
    missing = [(a, d) for d in durations for a in areas if (a, d) not in values]
    if missing:
        a, d = missing[0]
        raise StormError(str(path), f"has no factor for area {a / 1e6:g} km2 at duration "
                         f"{d / 60:g} min", "give a factor for every area at every duration")
    grid = np.array([[values[(a, d)] for a in areas] for d in durations])
    return FactorTable(areas, durations, grid, where=path.name)


def _rows(path: Path) -> tuple[list[str], list[tuple[int, list[str]]]]:
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise StormError(str(path), "cannot be read: it does not exist",
                         "check the table's path (relative to the project file)") from None
    except (OSError, UnicodeDecodeError) as err:
        raise StormError(str(path), f"cannot be read ({err.__class__.__name__}: {err})",
                         "check the path and that it is a UTF-8 text CSV") from None
    lines = [line for line in text.splitlines()
             if line.strip() and not line.strip().startswith("#")]
    records = list(csv.reader(io.StringIO("\n".join(lines))))
    if len(records) < 2:
        raise StormError(str(path), "has no rows of factors", _FIX_HEADER + " and rows")
    header = [h.strip().lower() for h in records[0]]
    return header, [(i, row_cells(r, len(header), f"{path}:row {i}"))
                    for i, r in enumerate(records[1:], start=1)]


def _columns(header: list[str], where: str) -> tuple[str, str]:
    """The area and duration columns of a header of three known columns."""
    known = [*AREA_COLUMNS, *DURATION_COLUMNS, "factor"]
    unknown = [h for h in header if h not in known]
    if unknown:
        raise StormError(where, f"column {unknown[0]!r} is not a factor table column",
                         did_you_mean(unknown[0], known))
    areas = [h for h in header if h in AREA_COLUMNS]
    durations = [h for h in header if h in DURATION_COLUMNS]
    if len(header) != 3 or len(areas) != 1 or len(durations) != 1 or "factor" not in header:
        raise StormError(where, f"has columns {','.join(header)!r}",
                         f"{_FIX_HEADER}: one area, one duration and the factor")
    return areas[0], durations[0]


def _numbers(cells: list[str], where: str) -> list[float]:
    try:
        numbers = [float(c) for c in cells]
    except ValueError:
        raise StormError(where, f"{','.join(cells)!r} is not three numbers",
                         "write an area, a duration and a factor") from None
    if len(numbers) != 3 or not all(math.isfinite(v) and v > 0 for v in numbers):
        raise StormError(where, f"{','.join(cells)!r} is not three numbers > 0",
                         "write an area and a duration > 0 and a factor in (0, 1]")
    return numbers
