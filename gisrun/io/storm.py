"""Read and write hyetograph CSV files and build storms from the project file's ``[[storms]]``.

CSV format (gisrun's own): one time column that marks the END of each interval -- elapsed
minutes ``time_min``, elapsed hours ``time_h`` or clock times ``time`` (ISO date-time or
``HH:MM``) -- and one value column whose header names quantity and unit:
``intensity_mm_per_h``, ``intensity_in_per_h``, ``depth_mm``, ``depth_in``,
``cumulative_depth_mm``, ``cumulative_depth_in`` (or ``intensity``, ``depth``,
``cumulative_depth`` with the unit taken from the project's unit system). An optional first row
at time 0 (or the start clock time) with zero or blank rain marks the storm start. Lines starting
with ``#`` are comments; ``# name: <storm name>`` names the storm. Steps may be fixed or
irregular.

Storm depths feed planning-level estimates; defer to local codes, agency methods and a licensed
engineer.
"""

from __future__ import annotations

import csv
import difflib
import io
import math
import os
import warnings
from collections.abc import Mapping, Sequence
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np

from .. import storm as st
from ..errors import GisrunWarning, OutputError, StormError
from ..units import UnitSystem, to_si

__all__ = [
    "read_hyetograph_csv",
    "write_hyetograph_csv",
    "read_idf_table_csv",
    "storm_from_config",
    "storms_from_config",
    "STORM_KINDS",
    "IMPLAUSIBLE_DEPTH_M",
    "warn_if_implausible",
]

_TIME_COLUMNS: dict[str, float | None] = {"time_min": 60.0, "time_h": 3600.0, "time": None}
_QUANTITIES = ("intensity", "depth", "cumulative_depth")
_UNITS = {"intensity": ("mm_per_h", "in_per_h"), "depth": ("mm", "in"),
          "cumulative_depth": ("mm", "in")}
_VALUE_COLUMNS: dict[str, tuple[str, str | None]] = {
    **{f"{q}_{u}": (q, u) for q, units in _UNITS.items() for u in units},
    **{q: (q, None) for q in _QUANTITIES},
}
#: Windows (s) and the depth (m) above which a storm is implausible. The world-record point
#: rainfalls are about 1.83 m in 24 h (Foc-Foc, La Reunion, January 1966) and 0.305 m in
#: 42 min (Holt, Missouri, June 1947), per the WMO World Weather and Climate Extremes Archive
#: (from memory); the limits sit a little above them.
IMPLAUSIBLE_DEPTH_M: tuple[tuple[float, float], ...] = ((3600.0, 0.4), (86400.0, 2.0))


def read_hyetograph_csv(
    path: str | os.PathLike[str], *, units: UnitSystem | None = None, name: str | None = None
) -> st.Hyetograph:
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
    h = st.Hyetograph(name or comment_name or path.stem, time_s, depth_m)
    warn_if_implausible(h, src)
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
    rows = [(i, [c.strip() for c in r]) for i, r in enumerate(records[1:], start=1)]
    if not rows:
        raise StormError(str(path), "has a header but no data rows", "add at least one row of rain")
    return header, rows, comment_name


def _nearest(name: str, valid: Sequence[str]) -> str:
    near = difflib.get_close_matches(name, list(valid), n=1, cutoff=0.5)
    return f"did you mean {near[0]!r}?" if near else f"use one of {sorted(valid)}"


def _columns(header: list[str], src: str) -> tuple[str, str]:
    if len(header) != 2:
        unknown = [h for h in header if h not in _TIME_COLUMNS and h not in _VALUE_COLUMNS]
        bad = unknown[0] if unknown else ",".join(header)
        hint = _nearest(bad, [*_TIME_COLUMNS, *_VALUE_COLUMNS]) if unknown else ""
        raise StormError(f"{src}:header", f"has {len(header)} columns ({bad!r} is not used)",
                         f"keep one time column and one value column; {hint}".rstrip("; "))
    time_cols = [h for h in header if h in _TIME_COLUMNS]
    value_cols = [h for h in header if h in _VALUE_COLUMNS]
    if len(time_cols) != 1:
        other = next((h for h in header if h not in _VALUE_COLUMNS), header[0])
        raise StormError(f"{src}:header", f"no time column ({other!r} is not one)",
                         _nearest(other, list(_TIME_COLUMNS)))
    if len(value_cols) != 1:
        other = next(h for h in header if h != time_cols[0])
        raise StormError(f"{src}:header", f"unknown value column {other!r}",
                         _nearest(other, list(_VALUE_COLUMNS)))
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
        times = times + 86400.0 * np.cumsum(crossed)
    return times


def _clock_s(text: str) -> float:
    if len(text) <= 8 and ":" in text:  # HH:MM or HH:MM:SS
        parts = [float(p) for p in text.split(":")]
        if len(parts) not in (2, 3) or not (0 <= parts[0] < 24 and 0 <= parts[1] < 60):
            raise ValueError(text)
        return parts[0] * 3600 + parts[1] * 60 + (parts[2] if len(parts) == 3 else 0.0)
    return datetime.fromisoformat(text).timestamp()


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


def warn_if_implausible(h: st.Hyetograph, where: str) -> None:
    """Warn (``GisrunWarning``) if the storm holds more rain than is plausible anywhere on Earth."""
    for window_s, limit_m in IMPLAUSIBLE_DEPTH_M:
        depth = st.max_depth_in_window_m(h, window_s)
        if depth > limit_m:
            warnings.warn(
                f"{where}: {depth * 1000:.0f} mm of rain within {window_s / 3600:g} h exceeds the "
                f"world record (about {limit_m * 1000:.0f} mm); check the units and values",
                GisrunWarning, stacklevel=3,
            )
            return


def write_hyetograph_csv(
    h: st.Hyetograph, path: str | os.PathLike[str], *, units: UnitSystem, overwrite: bool = True
) -> Path:
    """Write a hyetograph as ``time_min`` and ``depth_<unit>`` columns that read back the same.

    The file is written beside the target and moved into place, so a failed write leaves no
    partial file. Values are written with full float precision.

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
    from ..errors import OutputExistsError

    target = Path(path)
    if target.exists() and not overwrite:
        raise OutputExistsError(str(target), "already exists",
                                "pass --overwrite or pick another path")
    depth = np.asarray(h.depth_m) / to_si(1.0, units.depth)
    lines = [f"# name: {' '.join(h.name.split())}",
             "# gisrun hyetograph: times mark the end of each interval; planning-level estimate",
             f"time_min,depth_{units.depth}", "0,0"]
    ends_min = (h.time_s[1:] / 60.0).tolist()
    lines += [f"{t!r},{d!r}" for t, d in zip(ends_min, depth.tolist(), strict=True)]
    tmp = target.with_name(f".{target.name}.{os.getpid()}.partial")
    try:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
        os.replace(tmp, target)
    except OSError as err:
        raise OutputError(str(target), f"cannot be written ({err})",
                          "check the folder exists and is writable") from None
    finally:
        tmp.unlink(missing_ok=True)
    return target


def read_idf_table_csv(path: str | os.PathLike[str]) -> st.IdfTable:
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
                         f"use 'duration_min,intensity_mm_per_h' ({_nearest(bad, valid)})")
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
        return st.IdfTable(arr[:, 0], to_si(arr[:, 1], unit))
    except StormError as err:
        raise StormError(src, err.problem, err.fix) from None


# --- [[storms]] in the project file ----------------------------------------------------------

_COMMON = ("name", "kind")
#: Keys per storm kind: (required, optional).
STORM_KINDS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "nrcs_24h": (("distribution", "depth"), ("step_min",)),
    "alternating_block": (("duration_min",), ("idf", "idf_table", "step_min", "peak_position")),
    "chicago": (("idf", "duration_min"), ("step_min", "peak_position")),
    "uniform": (("depth", "duration_min"), ("step_min",)),
    "file": (("path",), ()),
}
_ALL_KEYS = sorted({k for req, opt in STORM_KINDS.values() for k in (*req, *opt)} | set(_COMMON))


def storm_from_config(
    spec: Mapping[str, Any], *, base_dir: Path, units: UnitSystem, where: str
) -> st.Hyetograph:
    """Build one storm from a ``[[storms]]`` table of the project file.

    Parameters
    ----------
    spec : mapping
        The table: ``kind`` (``nrcs_24h``, ``alternating_block``, ``chicago``, ``uniform``,
        ``file``) and its keys (``name``, ``distribution``, ``depth`` in ``units.depth``,
        ``duration_min``, ``step_min`` (default 6 for ``nrcs_24h``, else 5),
        ``idf = {a, b, c}`` with ``a`` in ``units.rate`` and ``t`` in minutes, ``idf_table``
        (CSV path), ``peak_position`` (default 0.5), ``path``).
    base_dir : Path
        Folder that relative paths are resolved against (the project file's folder).
    units : UnitSystem
        The project's unit system.
    where : str
        Location for messages, e.g. ``"project.toml:[[storms]] 1"``.

    Raises
    ------
    StormError
        For an unknown kind or key (suggesting the nearest), a missing key, or a bad value.
    """
    kind = _kind(spec, where)
    required, optional = STORM_KINDS[kind]
    _check_keys(spec, kind, (*_COMMON, *required, *optional), required, where)
    name = spec.get("name")
    if name is not None and (not isinstance(name, str) or not name.strip()):
        raise StormError(f"{where}.name", f"{name!r} is not a name", "give a non-empty text name")
    h = _BUILDERS[kind](spec, base_dir, units, where, name)
    warn_if_implausible(h, where)
    return h


def storms_from_config(
    specs: Sequence[Mapping[str, Any]], *, base_dir: Path, units: UnitSystem, where: str
) -> list[st.Hyetograph]:
    """Build every ``[[storms]]`` table; names must be unique.

    Raises
    ------
    StormError
        If there is no storm, any storm is bad, or two storms share a name.
    """
    if not specs:
        raise StormError(where, "has no [[storms]]", "add at least one [[storms]] table")
    storms, seen = [], {}
    for i, spec in enumerate(specs, start=1):
        h = storm_from_config(spec, base_dir=base_dir, units=units, where=f"{where} {i}")
        if h.name in seen:
            raise StormError(f"{where} {i}",
                             f"name {h.name!r} is also used by storm {seen[h.name]}",
                             "give every storm its own name")
        seen[h.name] = i
        storms.append(h)
    return storms


def _kind(spec: Mapping[str, Any], where: str) -> str:
    if not isinstance(spec, Mapping):
        raise StormError(where, "is not a table", "write it as a [[storms]] table of keys")
    kind = spec.get("kind")
    if kind is None:
        raise StormError(where, "has no kind", f"add kind = one of {list(STORM_KINDS)}")
    if not isinstance(kind, str) or kind.strip().lower() not in STORM_KINDS:
        raise StormError(f"{where}.kind", f"unknown storm kind {kind!r}",
                         _nearest(str(kind).lower(), list(STORM_KINDS)))
    return kind.strip().lower()


def _check_keys(spec: Mapping[str, Any], kind: str, allowed: Sequence[str],
                required: Sequence[str], where: str) -> None:
    for key in spec:
        if key not in allowed:
            if key in _ALL_KEYS:
                raise StormError(f"{where}.{key}", f"does not apply to kind {kind!r}",
                                 f"remove it; keys for {kind!r} are {sorted(allowed)}")
            raise StormError(f"{where}.{key}", "is not a storm key", _nearest(key, _ALL_KEYS))
    for key in required:
        if key not in spec:
            raise StormError(where, f"kind {kind!r} needs key {key!r}", f"add {key} = ...")


def _number(spec: Mapping[str, Any], key: str, where: str, default: float | None = None, *,
            low: float = 0.0, high: float = math.inf, strict: bool = True) -> float:
    value = spec.get(key, default)
    ok = isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
    inside = ok and (value > low if strict else value >= low) and value <= high
    if not inside:
        rng = f"{'>' if strict else '>='} {low:g}"
        rng += f" and <= {high:g}" if high < math.inf else ""
        raise StormError(f"{where}.{key}", f"{value!r} is not a number {rng}", f"set {key} {rng}")
    return float(value)


def _step_s(spec: Mapping[str, Any], where: str, default_min: float) -> float:
    return _number(spec, "step_min", where, default_min) * 60.0


def _idf(spec: Mapping[str, Any], base_dir: Path, units: UnitSystem, where: str
         ) -> st.IdfFormula | st.IdfTable:
    if ("idf" in spec) == ("idf_table" in spec):
        raise StormError(where, "needs exactly one of idf = {a, b, c} and idf_table",
                         "give the IDF formula or the path of an IDF table CSV")
    if "idf_table" in spec:
        return read_idf_table_csv(_path(spec, "idf_table", base_dir, where))
    idf = spec["idf"]
    if not isinstance(idf, Mapping):
        raise StormError(f"{where}.idf", f"{idf!r} is not a table",
                         "write idf = {a=..., b=..., c=...}")
    for key in idf:
        if key not in ("a", "b", "c"):
            raise StormError(f"{where}.idf.{key}", "is not an IDF coefficient",
                             _nearest(key, "abc"))
    w = f"{where}.idf"
    a = _number(idf, "a", w)
    return st.IdfFormula(float(to_si(a, units.rate)), _number(idf, "b", w, strict=False),
                         _number(idf, "c", w))


def _path(spec: Mapping[str, Any], key: str, base_dir: Path, where: str) -> Path:
    value = spec[key]
    if not isinstance(value, str) or not value.strip():
        raise StormError(f"{where}.{key}", f"{value!r} is not a path", "give a file path as text")
    path = Path(value)
    return path if path.is_absolute() else Path(base_dir) / path


def _build_nrcs(spec: Mapping[str, Any], base_dir: Path, units: UnitSystem, where: str,
                name: str | None) -> st.Hyetograph:
    dist = str(spec["distribution"]).strip().upper()
    if dist not in st.NRCS_DISTRIBUTIONS:
        raise StormError(f"{where}.distribution", f"{spec['distribution']!r} is not an NRCS type",
                         _nearest(dist, list(st.NRCS_DISTRIBUTIONS)))
    depth = _number(spec, "depth", where)
    name = name or f"nrcs_24h_{dist}_{depth:g}{units.depth}"
    return st.nrcs_24h(dist, float(to_si(depth, units.depth)), _step_s(spec, where, 6.0), name=name)


def _build_block(spec: Mapping[str, Any], base_dir: Path, units: UnitSystem, where: str,
                 name: str | None) -> st.Hyetograph:
    return _build_from_idf(st.alternating_block, "alternating_block", spec, base_dir, units,
                           where, name)


def _build_chicago(spec: Mapping[str, Any], base_dir: Path, units: UnitSystem, where: str,
                   name: str | None) -> st.Hyetograph:
    return _build_from_idf(st.chicago, "chicago", spec, base_dir, units, where, name)


def _build_from_idf(make: Any, kind: str, spec: Mapping[str, Any], base_dir: Path,
                    units: UnitSystem, where: str, name: str | None) -> st.Hyetograph:
    """An IDF-based design storm (alternating block or Chicago) from its [[storms]] table."""
    idf = _idf(spec, base_dir, units, where)
    duration = _number(spec, "duration_min", where)
    peak = _number(spec, "peak_position", where, 0.5, high=1.0, strict=False)
    name = name or f"{kind}_{duration:g}min"
    return _located(where, lambda: make(
        idf, duration * 60.0, _step_s(spec, where, 5.0), peak_position=peak, name=name))


def _build_uniform(spec: Mapping[str, Any], base_dir: Path, units: UnitSystem, where: str,
                   name: str | None) -> st.Hyetograph:
    depth = _number(spec, "depth", where)
    duration = _number(spec, "duration_min", where)
    name = name or f"uniform_{depth:g}{units.depth}_{duration:g}min"
    return st.uniform(float(to_si(depth, units.depth)), duration * 60.0,
                      _step_s(spec, where, 5.0), name=name)


def _build_file(spec: Mapping[str, Any], base_dir: Path, units: UnitSystem, where: str,
                name: str | None) -> st.Hyetograph:
    return read_hyetograph_csv(_path(spec, "path", base_dir, where), units=units, name=name)


def _located(where: str, build: Any) -> st.Hyetograph:
    """Run a builder and prefix its errors with the project-file location."""
    try:
        return build()
    except StormError as err:
        if err.where.startswith(where):
            raise
        raise StormError(f"{where}", f"{err.where}: {err.problem}", err.fix) from None


_BUILDERS = {"nrcs_24h": _build_nrcs, "alternating_block": _build_block,
             "chicago": _build_chicago, "uniform": _build_uniform, "file": _build_file}
