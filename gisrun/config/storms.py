"""Build storms from the project file's ``[[storms]]`` tables.

Each table names a ``kind``: a design storm of :data:`gisrun.storm.KINDS` (its
builder and keys are declared there), ``file`` (a hyetograph CSV), or a kind of rain that
differs between subcatchments, :data:`gisrun.config.areal.AREAL_KINDS` (built once the
subcatchments are read). Depths and
intensities are in the project's unit system and converted to SI here. The
tables are read by the project file's :class:`~gisrun.config.reader.TableReader`;
errors name the table (``project.toml:[[storms]] 2``) and the key, and are
:class:`~gisrun.config.reader.StormTableError` (a project-file error and a storm error).

Storm depths feed planning-level estimates; defer to local codes, agency methods and a licensed
engineer.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import geopandas as gpd

from ..errors import StormError
from ..io.storm_csv import read_hyetograph_csv, read_idf_table_csv
from ..options import did_you_mean
from ..storm import (
    KINDS,
    Hyetograph,
    IdfFormula,
    IdfTable,
    StormKey,
    StormKind,
    check_step_count,
)
from ..storm.plausibility import warn_if_implausible
from ..units import UnitSystem, to_si
from .areal import AREAL_KINDS, build_areal_storm
from .areal_reduction import REDUCTION_KEY, ReductionSpec, apply_reduction, read_reduction
from .reader import StormTableError, TableReader

__all__ = ["storm_from_config", "storms_from_config", "STORM_KINDS", "FILE_KIND",
           "STORM_FILE_KEYS", "storm_kinds"]

#: The kind that reads a hyetograph CSV (the other kinds are :data:`gisrun.storm.KINDS`).
FILE_KIND = "file"
#: Every ``kind`` a ``[[storms]]`` table may name (the registries are read again at each call).
STORM_KINDS: tuple[str, ...] = (*KINDS, FILE_KIND, *AREAL_KINDS)
#: Keys of the design and file kinds that name an input file (areal kinds declare their own).
STORM_FILE_KEYS = ("path", "idf_table")
_COMMON = ("name", "kind")


def storm_kinds() -> list[str]:
    """Every kind a ``[[storms]]`` table may name, from the registries as they are now."""
    return [*KINDS, FILE_KIND, *AREAL_KINDS]


def _all_keys() -> list[str]:
    return sorted({k.name for kind in KINDS.values() for k in kind.keys}
                  | {k for kind in AREAL_KINDS.values() for k in kind.keys}
                  | {"path", REDUCTION_KEY, *_COMMON})


def _kind_keys(kind: str) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """(keys, required keys) of a kind, besides name and kind."""
    if kind == FILE_KIND:
        return ("path",), ("path",)
    if kind in AREAL_KINDS:
        return AREAL_KINDS[kind].keys, AREAL_KINDS[kind].required
    return ((*(k.name for k in KINDS[kind].keys), REDUCTION_KEY),
            tuple(k.name for k in KINDS[kind].required))


def storm_from_config(
    spec: Mapping[str, Any], *, base_dir: Path, units: UnitSystem, where: str,
    subcatchments: gpd.GeoDataFrame | None = None, step_s: float | None = None,
    memory_budget_mb: float | None = None,
) -> Hyetograph:
    """Build one storm from a ``[[storms]]`` table of the project file.

    Parameters
    ----------
    spec : mapping
        The table: ``kind`` (one of :data:`STORM_KINDS`) and its keys (``name``,
        ``distribution``, ``depth`` in ``units.depth``, ``duration_min``, ``step_min``
        (default 6 for ``nrcs_24h``, else 5), ``idf = {a, b, c}`` with ``a`` in
        ``units.rate`` and ``t`` in minutes, ``idf_table`` (CSV path),
        ``peak_position`` (default 0.5), ``path``).
    base_dir : Path
        Folder that relative paths are resolved against (the project file's folder).
    units : UnitSystem
        The project's unit system.
    where : str
        Location for messages, e.g. ``"project.toml:[[storms]] 1"``.
    subcatchments : GeoDataFrame, optional
        The subcatchment layer as read; needed by the kinds of areal rain
        (:data:`gisrun.config.areal.AREAL_KINDS`) and by a design storm's ``areal_reduction``
        (:mod:`gisrun.config.areal_reduction`).
    step_s : float, optional
        The run's step (for ``areal_reduction`` factors that differ between subcatchments).
    memory_budget_mb : float, optional
        The run's ``[project] memory_budget_mb``, for the kinds of areal rain that read in
        blocks (a rain grid: :func:`gisrun.storm.gridded.block_bytes_for_budget`).

    Raises
    ------
    StormTableError
        For an unknown kind or key (suggesting the nearest), a missing key, or a bad value,
        or an areal kind or areal reduction without ``subcatchments``.
    """
    if not isinstance(spec, Mapping):
        raise StormTableError(where, "is not a table", "write it as a [[storms]] table of keys")
    table = TableReader(spec, where, base_dir, error=StormTableError)
    kind = _kind(table)
    if REDUCTION_KEY in table.data and kind not in KINDS:
        table.fail(REDUCTION_KEY, f"does not apply to kind {kind!r}: areal reduction applies to "
                   "point design depths", "remove it (rain from gauges, a grid or a file is "
                   "taken as it fell; give reduced depths in the file if they need reducing)")
    keys, required = _kind_keys(kind)
    table.check_keys((*_COMMON, *keys), elsewhere=_all_keys(),
                     elsewhere_problem=f"does not apply to kind {kind!r}",
                     elsewhere_fix=f"remove it; keys for {kind!r} are {sorted((*_COMMON, *keys))}")
    for key in required:
        if key not in spec:
            table.fail(None, f"kind {kind!r} needs key {key!r}", f"add {key} = ...")
    name = spec.get("name")
    if name is not None and (not isinstance(name, str) or not name.strip()):
        table.fail("name", f"{name!r} is not a name", "give a non-empty text name")
    reduction = _reduction(table, kind, subcatchments, step_s)
    if kind in AREAL_KINDS:
        if subcatchments is None:
            table.fail(None, f"kind {kind!r} is rain per subcatchment and needs the "
                       "subcatchment layer", "build it within a project (gisrun run or check)")
        h = build_areal_storm(AREAL_KINDS[kind], table, subcatchments, units, name,
                              memory_budget_mb)
    elif kind == FILE_KIND:
        h = read_hyetograph_csv(_file_path(table, "path"), units=units, name=name)
    else:
        h = _design_storm(KINDS[kind], table, units, name)
    warn_if_implausible(h, where, units)
    if reduction is not None:
        h = apply_reduction(h, reduction, subcatchments, step_s)
    return h


def _reduction(table: TableReader, kind: str, subcatchments: gpd.GeoDataFrame | None,
               step_s: float | None) -> ReductionSpec | None:
    """The storm's ``areal_reduction`` table as read, or None (design kinds only)."""
    if REDUCTION_KEY not in table.data or kind not in KINDS:
        return None
    if subcatchments is None or step_s is None:
        table.fail(REDUCTION_KEY, "needs the subcatchment layer's areas",
                   "build the storm within a project (gisrun run or check)")
    return read_reduction(table.sub(REDUCTION_KEY))


def storms_from_config(
    specs: Sequence[Mapping[str, Any]], *, base_dir: Path, units: UnitSystem, where: str,
    subcatchments: gpd.GeoDataFrame | None = None, step_s: float | None = None,
    memory_budget_mb: float | None = None,
) -> list[Hyetograph]:
    """Build every ``[[storms]]`` table; names must be unique.

    ``subcatchments``, ``step_s`` and ``memory_budget_mb`` are as for
    :func:`storm_from_config`.

    Raises
    ------
    StormTableError
        If there is no storm, any storm is bad, or two storms share a name.
    """
    if not specs:
        raise StormTableError(where, "has no [[storms]]", "add at least one [[storms]] table")
    storms, seen = [], {}
    for i, spec in enumerate(specs, start=1):
        h = storm_from_config(spec, base_dir=base_dir, units=units, where=f"{where} {i}",
                              subcatchments=subcatchments, step_s=step_s,
                              memory_budget_mb=memory_budget_mb)
        if h.name in seen:
            raise StormTableError(f"{where} {i}",
                                  f"name {h.name!r} is also used by storm {seen[h.name]}",
                                  "give every storm its own name")
        seen[h.name] = i
        storms.append(h)
    return storms


def _kind(table: TableReader) -> str:
    kind = table.data.get("kind")
    kinds = storm_kinds()
    if kind is None:
        table.fail(None, "has no kind", f"add kind = one of {kinds}")
    if not isinstance(kind, str) or kind.strip().lower() not in kinds:
        table.fail("kind", f"unknown storm kind {kind!r}", did_you_mean(str(kind).lower(), kinds))
    return kind.strip().lower()


def _design_storm(kind: StormKind, table: TableReader, units: UnitSystem,
                  name: str | None) -> Hyetograph:
    """Read the kind's keys, convert them to SI and call its builder."""
    for group in (kind.one_of,) if kind.one_of else ():
        if sum(key in table.data for key in group) != 1:
            table.fail(None, f"needs exactly one of {' and '.join(group)}",
                       f"give one of {', '.join(group)}")
    args: dict[str, Any] = {}
    shown: dict[str, str] = {}
    for key in kind.keys:
        if key.name not in table.data and key.default is None:
            continue
        args[key.arg], shown[key.name] = _value(key, table, units)
    name = name or kind.default_name.format(**shown)
    if "duration_s" in args and "step_s" in args:  # before the builder allocates the steps
        check_step_count(args["duration_s"], args["step_s"], f"{table.at}.duration_min",
                         "shorten the storm or give a longer step_min")
    try:
        return kind.build(**args, name=name)
    except StormError as err:
        if err.where.startswith(table.at):
            raise
        raise StormTableError(table.at, f"{err.where}: {err.problem}", err.fix) from None


def _value(key: StormKey, table: TableReader, units: UnitSystem) -> tuple[object, str]:
    """A key's value for the builder (SI) and as written (for the default name)."""
    if key.quantity == "choice":
        text = str(table.data[key.name]).strip().upper()
        if text not in key.choices:
            table.fail(key.name, f"{table.data[key.name]!r} is not one of {list(key.choices)}",
                       did_you_mean(text, key.choices))
        return text, text
    if key.quantity == "idf":
        return _idf_formula(table.sub(key.name), units), ""
    if key.quantity == "idf_table":
        return _idf_table(table), ""
    if key.quantity == "fraction":
        value = table.number(key.name, default=key.default, low=0.0, high=1.0)
        return value, f"{value:g}"
    value = table.number(key.name, default=key.default, low=0.0, low_open=True)
    if key.quantity == "depth":
        return float(to_si(value, units.depth)), f"{value:g}{units.depth}"
    return value * 60.0, f"{value:g}"  # minutes


def _idf_formula(idf: TableReader, units: UnitSystem) -> IdfFormula:
    for key in idf.data:
        if key not in ("a", "b", "c"):
            idf.fail(key, "is not an IDF coefficient", did_you_mean(key, "abc"))
    a = idf.number("a", low=0.0, low_open=True)
    return IdfFormula(float(to_si(a, units.rate)), idf.number("b", low=0.0),
                      idf.number("c", low=0.0, low_open=True))


def _idf_table(table: TableReader) -> IdfTable:
    return read_idf_table_csv(_file_path(table, "idf_table"))


def _file_path(table: TableReader, key: str) -> Path:
    """A file named in the table, relative to the project file's folder."""
    value = table.data[key]
    if not isinstance(value, str) or not value.strip():
        table.fail(key, f"{value!r} is not a path", "give a file path as text")
    path = Path(value)
    return path if path.is_absolute() else table.base_dir / path

