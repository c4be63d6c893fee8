"""Read a project file (TOML) into a checked, frozen :class:`Project`.

The project file names every input and choice of a run. Paths in it are
relative to the folder that holds the file. Keys are checked: an unknown key
is an error that suggests the nearest valid one, and a value of the wrong type
or out of range is an error naming the key. Whether the named files exist and
hold what they should is checked by the readers (``gisrun check`` runs them
all and reports every problem).

Examples
--------
>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> _ = (folder / "gisrun.toml").write_text('''
... [project]
... output = "out.gpkg"
... [subcatchments]
... path = "sub.gpkg"
... id_field = "code"
... [soil]
... path = "soil.tif"
... [soil.codes]
... "1" = "A"
... [[storms]]
... kind = "uniform"
... depth = 25
... duration_min = 60
... ''')
>>> project = load_project(folder)
>>> project.soil.codes
{1: 'A'}
>>> project.time_step_s
300.0
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from ..engine import PARAMETERS, method_name
from ..errors import ProjectFileError
from ..options import (
    COMBINE_RULES,
    DUAL_GROUP_CONDITIONS,
    NODATA_RULES,
    UNIT_SYSTEMS,
    Choices,
    did_you_mean,
)
from ..parameters.soils import CLASSIFICATIONS, check_cover_labels, check_soil_labels
from ..project import CoverSource, Project, SoilSource, SubcatchmentSource
from ..units import UnitSystem, unit_system

__all__ = [
    "PROJECT_FILE_NAMES",
    "SubcatchmentSource",
    "SoilSource",
    "CoverSource",
    "Project",
    "load_project",
    "find_project_file",
]

#: File names looked for when a folder is given instead of a project file.
PROJECT_FILE_NAMES = ("gisrun.toml", "project.toml")

#: ``[soil] classification``: the names of the soil classification registry.
SOIL_CLASSIFICATIONS = Choices(CLASSIFICATIONS, what="soil classification",
                               default="hydrologic_soil_group")

_SCHEMA: dict[str, tuple[str, ...]] = {
    "": ("project", "subcatchments", "soil", "cover", "nodata", "method", "parameters",
         "storms", "rain_scale"),
    "project": ("name", "units", "output", "time_step_min", "memory_budget_mb", "overlay_cache"),
    "subcatchments": ("path", "layer", "id_field", "crs", "method_field", "parameter_fields"),
    "soil": ("path", "classification", "dual_group_condition", "initial_saturation",
             "initial_water_content", "codes", "crs"),
    "cover": ("path", "codes", "crs"),
    "nodata": ("rule", "max_fraction"),
    "method": ("name", "combine", "compare_composite", "initial_abstraction_ratio",
               "antecedent_condition"),
    "parameters": ("overrides",),
    "rain_scale": ("field",),
}


def find_project_file(path: str | Path) -> Path:
    """Return the project file at ``path``, or the one inside the folder ``path``.

    Raises
    ------
    ProjectFileError
        If nothing is there, or a folder holds no project file.
    """
    path = Path(path).expanduser()
    if path.is_dir():
        for name in PROJECT_FILE_NAMES:
            if (path / name).is_file():
                return (path / name).resolve()
        raise ProjectFileError(
            str(path), "holds no project file",
            f"add one named {PROJECT_FILE_NAMES[0]!r} or give the file's path",
        )
    if not path.is_file():
        raise ProjectFileError(str(path), "does not exist", "check the path to the project file")
    return path.resolve()


def load_project(path: str | Path) -> Project:
    """Read and check a project file.

    Parameters
    ----------
    path : str or Path
        A project file, or a folder holding ``gisrun.toml``.

    Returns
    -------
    Project

    Raises
    ------
    ProjectFileError
        If the file cannot be parsed, has an unknown key, lacks a required key,
        or has a value of the wrong type or out of range.
    """
    file = find_project_file(path)
    try:
        raw = tomllib.loads(file.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as err:
        raise ProjectFileError(file.name, f"is not valid TOML ({err})", "fix the syntax") from None
    except (OSError, UnicodeDecodeError) as err:
        raise ProjectFileError(str(file), f"cannot be read ({err})", "check the file") from None
    return _build(file, raw)


def _build(file: Path, raw: dict[str, Any]) -> Project:
    reader = _Reader(file)
    reader.check_keys("", raw)
    top = reader.table(raw, "project", required=False)
    units = _units(reader, top)
    step_min = reader.number(top, "project", "time_step_min", default=5.0, low=0.0, low_open=True)
    sub = reader.table(raw, "subcatchments")
    soil = reader.table(raw, "soil")
    cover = reader.table(raw, "cover", required=False)
    nodata = reader.table(raw, "nodata", required=False)
    method = reader.table(raw, "method", required=False)
    params = reader.table(raw, "parameters", required=False)
    rain_scale = reader.table(raw, "rain_scale", required=False)
    overrides = reader.string(params, "parameters", "overrides", required=False)
    project = Project(
        path=file,
        name=reader.string(top, "project", "name", default=file.parent.name) or file.parent.name,
        units=units,
        output=reader.path(reader.string(top, "project", "output", default="output/runoff.gpkg")),
        time_step_s=step_min * 60.0,
        subcatchments=SubcatchmentSource(
            path=reader.path(reader.string(sub, "subcatchments", "path")),
            id_field=reader.string(sub, "subcatchments", "id_field"),
            layer=reader.string(sub, "subcatchments", "layer", required=False),
            crs=reader.string(sub, "subcatchments", "crs", required=False),
            method_field=reader.string(sub, "subcatchments", "method_field", required=False),
            parameter_fields=reader.strings(sub, "subcatchments", "parameter_fields"),
        ),
        soil=SoilSource(
            path=reader.path(reader.string(soil, "soil", "path")),
            codes=reader.codes(soil, "soil"),
            classification=reader.choice(soil, "soil", "classification", SOIL_CLASSIFICATIONS),
            dual_group_condition=reader.choice(
                soil, "soil", "dual_group_condition", DUAL_GROUP_CONDITIONS),
            initial_saturation=reader.number(
                soil, "soil", "initial_saturation", default=0.3, low=0.0, high=1.0),
            crs=reader.string(soil, "soil", "crs", required=False),
            initial_water_content=_water_content(reader, soil),
        ),
        cover=_cover(reader, cover),
        storms=_storms(reader, raw),
        nodata_rule=reader.choice(nodata, "nodata", "rule", NODATA_RULES),
        max_nodata_fraction=reader.number(
            nodata, "nodata", "max_fraction", default=0.25, low=0.0, high=1.0),
        method=_method_name(reader, method),
        combine=reader.choice(method, "method", "combine", COMBINE_RULES),
        overrides=reader.path(overrides) if overrides else None,
        rain_scale_field=reader.string(rain_scale, "rain_scale", "field", required=False),
        memory_budget_mb=reader.number(top, "project", "memory_budget_mb", default=1500.0,
                                       low=50.0),
        compare_composite=reader.flag(method, "method", "compare_composite", default=False),
        initial_abstraction_ratio=reader.declared(method, "method", "initial_abstraction_ratio"),
        antecedent_condition=int(reader.declared(method, "method", "antecedent_condition")),
        overlay_cache=_optional_path(reader, top, "project", "overlay_cache"),
    )
    _check_class_labels(reader, project)
    return project


def _optional_path(reader: _Reader, table: Mapping[str, Any], section: str, key: str
                   ) -> Path | None:
    value = reader.string(table, section, key, required=False)
    return reader.path(value) if value else None


def _check_class_labels(reader: _Reader, project: Project) -> None:
    """Stop on a code table entry naming a class the parameter tables do not know."""
    for code, label in project.soil.codes.items():
        check_soil_labels([label], project.soil.classification,
                          reader.where("soil.codes", f'"{code}"'))
    if project.cover is not None:
        for code, label in project.cover.codes.items():
            check_cover_labels([label], reader.where("cover.codes", f'"{code}"'))


def _water_content(reader: _Reader, soil: Mapping[str, Any]) -> float | None:
    if "initial_water_content" not in soil:
        return None
    if "initial_saturation" in soil:
        raise ProjectFileError(
            reader.where("soil", "initial_water_content"),
            "is given together with initial_saturation", "keep only one of the two",
        )
    return reader.number(soil, "soil", "initial_water_content", default=0.0, low=0.0, high=1.0)


def _units(reader: _Reader, top: Mapping[str, Any]) -> UnitSystem:
    name = reader.choice(top, "project", "units", UNIT_SYSTEMS)
    return unit_system(name)


def _cover(reader: _Reader, cover: Mapping[str, Any]) -> CoverSource | None:
    if not cover:
        return None
    return CoverSource(
        path=reader.path(reader.string(cover, "cover", "path")),
        codes=reader.codes(cover, "cover"),
        crs=reader.string(cover, "cover", "crs", required=False),
    )


def _storms(reader: _Reader, raw: Mapping[str, Any]) -> tuple[dict[str, Any], ...]:
    storms = raw.get("storms")
    if storms is None:
        raise ProjectFileError(
            reader.file.name, "names no storm", "add at least one [[storms]] table"
        )
    if isinstance(storms, dict):
        storms = [storms]
    if not isinstance(storms, list) or not all(isinstance(s, dict) for s in storms):
        raise ProjectFileError(
            f"{reader.file.name}:storms", "is not a list of tables", "write each as [[storms]]"
        )
    if not storms:
        raise ProjectFileError(
            reader.file.name, "names no storm", "add at least one [[storms]] table"
        )
    return tuple(dict(s) for s in storms)


def _method_name(reader: _Reader, method: Mapping[str, Any]) -> str:
    name = reader.string(method, "method", "name", default="green_ampt")
    return method_name(name, where=reader.where("method", "name"), error=ProjectFileError)


class _Reader:
    """Typed look-ups in the parsed TOML with one-line errors naming the key."""

    def __init__(self, file: Path) -> None:
        self.file = file

    def where(self, section: str, key: str | None = None) -> str:
        if not section:  # a top-level key or table
            return f"{self.file.name}:[{key}]" if key else self.file.name
        return f"{self.file.name}:[{section}]" + (f".{key}" if key else "")

    def check_keys(self, section: str, table: Mapping[str, Any]) -> None:
        valid = _SCHEMA[section]
        for key in table:
            if key not in valid:
                raise ProjectFileError(self.where(section, key), "is not a known key",
                                       did_you_mean(key, valid))

    def table(self, raw: Mapping[str, Any], section: str, *, required: bool = True
              ) -> Mapping[str, Any]:
        value = raw.get(section)
        if value is None:
            if required:
                raise ProjectFileError(
                    self.where(section), "is missing", f"add a [{section}] table"
                )
            return {}
        if not isinstance(value, dict):
            raise ProjectFileError(self.where(section), "is not a table",
                                   f"write it as [{section}]")
        self.check_keys(section, value)
        return value

    def string(self, table: Mapping[str, Any], section: str, key: str, *,
               default: str | None = None, required: bool = True) -> str:
        value = table.get(key, default)
        if value is None:
            if required:
                raise ProjectFileError(self.where(section, key), "is missing", "add it")
            return None  # type: ignore[return-value]
        if not isinstance(value, str) or not value.strip():
            raise ProjectFileError(
                self.where(section, key), f"must be a non-empty text, got {value!r}",
                "write it in quotes",
            )
        return value.strip()

    def number(self, table: Mapping[str, Any], section: str, key: str, *, default: float,
               low: float | None = None, high: float | None = None,
               low_open: bool = False) -> float:
        value = table.get(key, default)
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise ProjectFileError(
                self.where(section, key), f"must be a number, got {value!r}", "write a number"
            )
        too_low = low is not None and (value <= low if low_open else value < low)
        too_high = high is not None and value > high
        if too_low or too_high or value != value:
            span = f"{'(' if low_open else '['}{low}, {high if high is not None else 'inf'}]"
            raise ProjectFileError(
                self.where(section, key), f"is {value}, outside {span}", "give a value in range"
            )
        return float(value)

    def strings(self, table: Mapping[str, Any], section: str, key: str) -> tuple[str, ...]:
        value = table.get(key, [])
        if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
            raise ProjectFileError(
                self.where(section, key), f"must be a list of field names, got {value!r}",
                'write e.g. ["ks_mm_per_h", "curve_number"]',
            )
        return tuple(value)

    def declared(self, table: Mapping[str, Any], section: str, key: str) -> float:
        """A run option declared as a loss-method parameter (its allowed values and default)."""
        parameter = PARAMETERS[key]
        allowed = parameter.allowed
        value = self.number(table, section, key, default=parameter.missing)
        if value not in allowed:
            raise ProjectFileError(self.where(section, key), f"is {value:g}",
                                   f"use one of {[f'{a:g}' for a in allowed]}")
        return value

    def flag(self, table: Mapping[str, Any], section: str, key: str, *, default: bool) -> bool:
        value = table.get(key, default)
        if not isinstance(value, bool):
            raise ProjectFileError(
                self.where(section, key), f"must be true or false, got {value!r}",
                "write true or false without quotes",
            )
        return value

    def choice(self, table: Mapping[str, Any], section: str, key: str, valid: Choices
               ) -> str:
        """One of ``valid``, spelled any way :func:`~gisrun.options.normalize_name` allows."""
        value = self.string(table, section, key, default=valid.default)
        return valid.pick(value, where=self.where(section, key), error=ProjectFileError)

    def codes(self, table: Mapping[str, Any], section: str) -> dict[int, str]:
        raw = table.get("codes")
        if not isinstance(raw, dict) or not raw:
            raise ProjectFileError(
                self.where(section, "codes"), "is missing or empty",
                f"add a [{section}.codes] table mapping raster codes to classes",
            )
        codes: dict[int, str] = {}
        for key, label in raw.items():
            try:
                code = int(str(key).strip())
            except ValueError:
                raise ProjectFileError(
                    self.where(f"{section}.codes", str(key)), "is not a whole-number raster code",
                    "use integer codes as keys, e.g. \"1\" = \"A\"",
                ) from None
            if not isinstance(label, str) or not label.strip():
                raise ProjectFileError(
                    self.where(f"{section}.codes", str(key)), f"maps to {label!r}",
                    "map each code to a class name in quotes",
                )
            codes[code] = label.strip()
        return codes

    def path(self, value: str) -> Path:
        path = Path(value).expanduser()
        return path if path.is_absolute() else (self.file.parent / path).resolve()
