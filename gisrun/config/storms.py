"""Build storms from the project file's ``[[storms]]`` blocks.

Each block names a ``kind`` (see :data:`STORM_KINDS`) and its keys; depths and intensities are
in the project's unit system and converted to SI here. Errors name the block
(``project.toml:[[storms]] 2``) and the key.

Storm depths feed planning-level estimates; defer to local codes, agency methods and a licensed
engineer.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from .. import storm as st
from ..errors import StormError
from ..io.storm_csv import (
    nearest_hint,
    read_hyetograph_csv,
    read_idf_table_csv,
    warn_if_implausible,
)
from ..units import UnitSystem, to_si

__all__ = ["storm_from_config", "storms_from_config", "STORM_KINDS"]

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
                         nearest_hint(str(kind).lower(), list(STORM_KINDS)))
    return kind.strip().lower()


def _check_keys(spec: Mapping[str, Any], kind: str, allowed: Sequence[str],
                required: Sequence[str], where: str) -> None:
    for key in spec:
        if key not in allowed:
            if key in _ALL_KEYS:
                raise StormError(f"{where}.{key}", f"does not apply to kind {kind!r}",
                                 f"remove it; keys for {kind!r} are {sorted(allowed)}")
            raise StormError(f"{where}.{key}", "is not a storm key", nearest_hint(key, _ALL_KEYS))
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
                             nearest_hint(key, "abc"))
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
                         nearest_hint(dist, list(st.NRCS_DISTRIBUTIONS)))
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
