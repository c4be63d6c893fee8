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
    LUMPED_PARAMETER_SETS,
    NODATA_RULES,
    SERIES_STORES,
    UNIT_SYSTEMS,
    UNLISTED_KEY_RULES,
    Choices,
    check_geopackage_name,
)
from ..parameters.soils import CLASSIFICATIONS, check_cover_labels, check_soil_labels
from ..project import CoverSource, Project, SoilSource, SubcatchmentSource
from ..units import unit_system
from .areal import AREAL_KINDS
from .attributes import ATTRIBUTE_KEYS, KeyedSource, keyed_source
from .impervious import IMPERVIOUS_KEYS, check_impervious_combination, read_impervious
from .reader import TableReader
from .storms import STORM_FILE_KEYS
from .uncertainty import UNCERTAINTY_KEYS, uncertainty_settings

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

#: Tables that must be present.
_REQUIRED = ("subcatchments", "soil")
#: Keys of each table ("" = the top level); [[storms]] keys come from the storm kinds.
_SCHEMA: dict[str, tuple[str, ...]] = {
    "": ("project", "subcatchments", "soil", "cover", "nodata", "method", "parameters",
         "storms", "rain_scale", "impervious", "uncertainty"),
    "project": ("name", "units", "output", "time_step_min", "memory_budget_mb", "overlay_cache",
                "series"),
    "subcatchments": ("path", "layer", "id_field", "crs", "method_field", "parameter_fields",
                      "max_overlap_fraction"),
    "soil": ("path", "classification", "dual_group_condition", "initial_saturation",
             "initial_water_content", "codes", "crs", "layer", "class_field",
             *ATTRIBUTE_KEYS),
    "cover": ("path", "codes", "crs", "layer", "class_field", *ATTRIBUTE_KEYS),
    "nodata": ("rule", "max_fraction"),
    "method": ("name", "combine", "compare_composite", "initial_abstraction_ratio",
               "antecedent_condition", "lumped_parameters"),
    "parameters": ("overrides",),
    "rain_scale": ("field",),
    "impervious": IMPERVIOUS_KEYS,
    "uncertainty": UNCERTAINTY_KEYS,
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
    top_level = TableReader(raw, file.name, file.parent, top_level=True)
    top_level.check_keys(_SCHEMA[""])
    read = {name: _section(top_level, file, name, required=name in _REQUIRED)
            for name in _SCHEMA if name}
    top, method = read["project"], read["method"]
    step_min = top.number("time_step_min", default=5.0, low=0.0, low_open=True)
    output = top.path("output", default="output/runoff.gpkg")
    check_geopackage_name(output, top.where("output"))
    project = Project(
        path=file,
        name=top.string("name", default=file.parent.name) or file.parent.name,
        units=unit_system(top.choice("units", UNIT_SYSTEMS)),
        output=output,
        time_step_s=step_min * 60.0,
        subcatchments=_subcatchments(read["subcatchments"]),
        soil=_soil(read["soil"]),
        cover=_cover(read["cover"], present="cover" in raw),
        storms=_storms(top_level, raw),
        nodata_rule=read["nodata"].choice("rule", NODATA_RULES),
        max_nodata_fraction=read["nodata"].number("max_fraction", default=0.25, low=0.0,
                                                  high=1.0),
        method=method_name(method.string("name", default="green_ampt"),
                           where=method.where("name"), error=ProjectFileError),
        combine=method.choice("combine", COMBINE_RULES),
        overrides=read["parameters"].path("overrides", required=False),
        rain_scale_field=read["rain_scale"].string("field", required=False),
        memory_budget_mb=top.number("memory_budget_mb", default=1500.0, low=50.0),
        compare_composite=method.flag("compare_composite", default=False),
        lumped_parameters=method.choice("lumped_parameters", LUMPED_PARAMETER_SETS),
        initial_abstraction_ratio=_declared(method, "initial_abstraction_ratio"),
        antecedent_condition=int(_declared(method, "antecedent_condition")),
        overlay_cache=top.path("overlay_cache", required=False),
        storm_file_keys=tuple(dict.fromkeys(
            [*STORM_FILE_KEYS, *(k for kind in AREAL_KINDS.values() for k in kind.file_keys)])),
        series=top.choice("series", SERIES_STORES),
        impervious=read_impervious(read["impervious"], present="impervious" in raw),
        uncertainty=uncertainty_settings(read["uncertainty"], present="uncertainty" in raw,
                                         combine=method.choice("combine", COMBINE_RULES)),
    )
    _check_class_labels(file, project)
    check_impervious_combination(project.impervious, combine=project.combine,
                                 compare_composite=project.compare_composite,
                                 uncertainty=project.uncertainty is not None,
                                 where=method.where())
    return project


def _section(top_level: TableReader, file: Path, name: str, *, required: bool) -> TableReader:
    """The reader of one ``[name]`` table, its keys checked (``{}`` when absent)."""
    if required and top_level.data.get(name) is None:
        top_level.fail(name, "is missing", f"add a [{name}] table")
    value = top_level.data.get(name)
    if value is not None and not isinstance(value, dict):
        raise ProjectFileError(f"{file.name}:[{name}]", "is not a table", f"write it as [{name}]")
    reader = TableReader(value or {}, f"{file.name}:[{name}]", file.parent)
    reader.check_keys(_SCHEMA[name])
    return reader


def _subcatchments(sub: TableReader) -> SubcatchmentSource:
    return SubcatchmentSource(
        path=sub.path("path"),
        id_field=sub.string("id_field"),
        layer=sub.string("layer", required=False),
        crs=sub.string("crs", required=False),
        method_field=sub.string("method_field", required=False),
        parameter_fields=sub.strings("parameter_fields", '["ks_mm_per_h", "curve_number"]'),
        max_overlap_fraction=sub.number("max_overlap_fraction", default=0.01, low=0.0,
                                        high=1.0),
    )


def _soil(soil: TableReader) -> SoilSource:
    layer, class_field = _polygon_keys(soil)
    classification = soil.choice("classification", SOIL_CLASSIFICATIONS)
    codes, keys, attributes, unlisted = _class_table(soil, "soil", class_field, classification)
    return SoilSource(
        path=soil.path("path"),
        codes=codes, keys=keys, attributes=attributes, unlisted_keys=unlisted,
        layer=layer, class_field=class_field,
        classification=classification,
        dual_group_condition=soil.choice("dual_group_condition", DUAL_GROUP_CONDITIONS),
        initial_saturation=soil.number("initial_saturation", default=0.3, low=0.0, high=1.0),
        crs=soil.string("crs", required=False),
        initial_water_content=_water_content(soil),
    )


def _declared(method: TableReader, key: str) -> float:
    """A curve-number run option, checked against its declaration (allowed values, default)."""
    parameter = PARAMETERS[key]
    return method.allowed(key, parameter.allowed, default=parameter.missing)


def _check_class_labels(file: Path, project: Project) -> None:
    """Stop on a code table entry naming a class the parameter tables do not know."""
    if project.soil.keys is None:  # an attribute table checks its own classes
        for code, label in project.soil.codes.items():
            check_soil_labels([label], project.soil.classification,
                              f'{file.name}:[soil.codes]."{code}"')
    if project.cover is not None and project.cover.keys is None:
        for code, label in project.cover.codes.items():
            check_cover_labels([label], f'{file.name}:[cover.codes]."{code}"')


def _water_content(soil: TableReader) -> float | None:
    if "initial_water_content" not in soil.data:
        return None
    if "initial_saturation" in soil.data:
        soil.fail("initial_water_content", "is given together with initial_saturation",
                  "keep only one of the two")
    return soil.number("initial_water_content", low=0.0, high=1.0)


def _cover(cover: TableReader, *, present: bool) -> CoverSource | None:
    if not present or not cover.data:
        return None
    layer, class_field = _polygon_keys(cover)
    codes, keys, attributes, unlisted = _class_table(cover, "cover", class_field)
    return CoverSource(path=cover.path("path"), codes=codes, keys=keys, attributes=attributes,
                       unlisted_keys=unlisted, crs=cover.string("crs", required=False),
                       layer=layer, class_field=class_field)


def _polygon_keys(table: TableReader) -> tuple[str | None, str | None]:
    """``layer`` and ``class_field`` of a polygon layer (both None for a raster)."""
    layer = table.string("layer", required=False)
    class_field = table.string("class_field", required=False)
    if layer is not None and class_field is None:
        table.fail("layer", "is given without class_field", "name the field that holds each "
                   "polygon's class (class_field = ...), or remove layer for a raster")
    return layer, class_field


def _class_table(table: TableReader, kind: str, class_field: str | None,
                 classification: str = "hydrologic_soil_group") -> KeyedSource:
    """The code or attribute table; neither is needed by a polygon layer of class names."""
    if class_field is not None and "codes" not in table.data \
            and "attributes" not in table.data:
        return {}, None, None, UNLISTED_KEY_RULES.default
    return keyed_source(table, kind, classification)


def _storms(top_level: TableReader, raw: Mapping[str, Any]) -> tuple[dict[str, Any], ...]:
    storms = raw.get("storms")
    if isinstance(storms, dict):
        storms = [storms]
    if storms is not None and (not isinstance(storms, list)
                               or not all(isinstance(s, dict) for s in storms)):
        top_level.fail("storms", "is not a list of tables", "write each as [[storms]]")
    if not storms:
        raise ProjectFileError(top_level.where(), "names no storm",
                               "add at least one [[storms]] table")
    return tuple(dict(s) for s in storms)
