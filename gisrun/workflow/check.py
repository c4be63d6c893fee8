"""Check every input of a project and collect each problem as one line.

Unlike a run, which stops at the first problem, a check goes on after each
failed input so the user sees every problem at once. Steps that need an input
that failed are skipped.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import geopandas as gpd

from ..config.areal import AREAL_KINDS
from ..config.areal_reduction import REDUCTION_KEY
from ..config.project import load_project
from ..errors import GisrunError, GisrunWarning, OutputError
from ..grid.polygons import ClassPolygons
from ..io.files import refuse_inputs_among
from ..io.raster import ClassRaster
from ..io.series_file import series_path, series_store
from ..model import Inputs
from ..present.reduction import reduction_line
from ..project import Project
from ..storm import Hyetograph, resampling_note
from .bands import check_named_ids, check_uncertainty_ranges
from .inputs import (
    bounds_in,
    check_overlaps,
    check_raster_codes,
    check_raster_extent,
    read_cover,
    read_impervious_grid,
    read_overrides,
    read_soil,
    read_storms,
    read_subcatchment_layer,
    warn_if_rain_scale_implausible,
)
from .polygon_inputs import align_polygon_layers, describe_polygon_layer
from .steps import overlay_inputs, prepare_parameters

__all__ = ["check_project", "check_output_path", "output_lines"]

T = TypeVar("T")


def check_project(path: str | Path, facts: list[str] | None = None
                  ) -> tuple[list[str], list[str], list[str]]:
    """Check a project's inputs without running it.

    Parameters
    ----------
    path : path
        Project file or folder.
    facts : list, optional
        Filled with one line per polygon layer: its features, classes, overlaps and gaps.

    Returns
    -------
    problems : list of str
        One line per problem (empty when the project can run).
    notes : list of str
        Warnings raised while checking.
    outputs : list of str
        Where a run would write: the GeoPackage, and where the excess series go (its
        ``excess_series`` table or a Parquet file beside it, and how to read that).
    """
    problems: list[str] = []
    outputs: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GisrunWarning)
        project = _attempt(problems, load_project, path)
        if project is not None:  # the output a run would write must not be an input
            _attempt(problems, refuse_inputs_among, [project.output], project.input_files())
        later = (_check_inputs(project, problems, outputs, facts) if project is not None
                 else [])
    notes = [str(w.message) for w in caught if issubclass(w.category, GisrunWarning)]
    return problems, list(dict.fromkeys([*notes, *later])), outputs


def _check_inputs(project: Project, problems: list[str], outputs: list[str],
                  facts: list[str] | None = None) -> list[str]:
    """Run every reader and the overlay and parameter steps; return their notes.

    Where the run would write is added to ``outputs`` once the subcatchments and storms
    (which decide where the series go) have been read; ``facts`` gets one line per
    polygon layer.
    """
    _attempt(problems, check_output_path, project.output)
    subs = _attempt(problems, read_subcatchment_layer, project)
    soil = _attempt(problems, read_soil, project)
    cover = _attempt(problems, read_cover, project)
    storms = _attempt(problems, read_storms, _storms_checkable(project, subs), subs)
    overrides = _attempt(problems, read_overrides, project)
    impervious = _attempt(problems, read_impervious_grid, project)
    if subs is not None and storms is not None:
        outputs += output_lines(project, len(subs), storms)
        outputs += [f"storm {h.name!r}: rain per subcatchment from {h.areal.source}"
                    for h in storms if h.areal is not None and h.reduction is None]
        outputs += ["storm " + reduction_line(repr(h.name), h.reduction, project.units,
                                              source=False)
                    for h in storms if h.reduction is not None]
    if subs is not None:
        _attempt(problems, check_overlaps, project, subs)
        if storms is not None:
            _attempt(problems, warn_if_rain_scale_implausible, project, subs, storms)
    keyed_notes: list[str] = []
    codes_ok = soil is not None and _check_codes(problems, keyed_notes, soil, subs, project.soil,
                                                 project.where("soil"), project)
    if project.cover is not None and cover is not None:
        codes_ok &= _check_codes(problems, keyed_notes, cover, subs, project.cover,
                                 project.where("cover"), project)
    storm_notes = [*keyed_notes, *_resampling_notes(project, storms or ())]
    missing_cover = project.cover is not None and cover is None
    missing_cover |= (project.impervious is not None and project.impervious.path is not None
                      and impervious is None)
    if subs is None or missing_cover or storms is None or not codes_ok:
        return storm_notes
    inputs = _attempt(problems, align_polygon_layers, project,
                      Inputs(subs, soil, cover, storms, overrides, impervious=impervious))
    if inputs is None:
        return storm_notes
    if facts is not None:
        facts += [describe_polygon_layer(x, subs) for x in (inputs.soil, inputs.cover)
                  if isinstance(x, ClassPolygons)]
    overlaid = _attempt(problems, overlay_inputs, project, inputs)
    if overlaid is None:
        return storm_notes
    prepared = _attempt(problems, prepare_parameters, project, inputs, overlaid[0])
    _attempt(problems, check_named_ids, project, inputs)
    if prepared is not None:
        _attempt(problems, check_uncertainty_ranges, project, inputs, prepared[0])
    notes = [*overlaid[2], *(prepared[2] if prepared is not None else [])]
    return [*storm_notes, *(str(note) for note in notes)]


def _storms_checkable(project: Project, subs: gpd.GeoDataFrame | None) -> Project:
    """The project, less its areal storms when the subcatchment layer could not be read.

    Those storms (and design storms reduced for area) need the layer, whose own problem is
    already reported; the others are still checked.
    """
    if subs is not None:
        return project
    kept = tuple(s for s in project.storms
                 if s.get("kind") not in AREAL_KINDS and REDUCTION_KEY not in s)
    return dataclasses.replace(project, storms=kept)


def output_lines(project: Project, n_subcatchments: int,
                 storms: tuple[Hyetograph, ...]) -> list[str]:
    """Where a run of ``project`` writes its GeoPackage and its excess series."""
    gpkg = project.output
    rows = n_subcatchments * sum(len(h.resample(project.time_step_s)) for h in storms)
    lines = [f"output: {gpkg}"]
    if series_store(project.series, rows) == "geopackage":
        lines.append(f"excess series: {rows:,} rows in {gpkg.name}, table excess_series")
    else:
        parquet = series_path(gpkg)
        lines.append(f"excess series: {rows:,} rows in {parquet} (Parquet; read with "
                     f"pandas.read_parquet(\"{parquet.name}\"))")
    return lines


def _resampling_notes(project: Project, storms: tuple[Hyetograph, ...]) -> list[str]:
    """What the run's step will do to each storm (as the run reports it)."""
    return [note for h in storms
            if (note := resampling_note(h, project.time_step_s, units=project.units))]


def check_output_path(target: Path) -> None:
    """Stop where ``run`` would: the output is a folder, or a file stands where a folder must.

    Raises
    ------
    OutputError
        With the same line ``run`` prints.
    """
    target = Path(target)
    if target.is_dir():
        raise OutputError(str(target), "is a folder", "give a file path for the output")
    for path in target.parents:
        if path.exists():
            if not path.is_dir():
                raise OutputError(str(path), "is a file, not a folder, so the output cannot go "
                                  "under it", "choose another output path")
            return


def _check_codes(problems: list[str], notes: list[str], raster: ClassRaster | ClassPolygons,
                 subs: gpd.GeoDataFrame | None, source: Any, where: str, project: Project
                 ) -> bool:
    """Check a raster's codes; for a keyed raster, note what its attribute table supplied.

    A polygon layer's classes were checked as it was read.
    """
    if isinstance(raster, ClassPolygons):
        return True
    if source.keys is not None:
        notes.append(source.keys.summary())
    if source.unlisted_keys == "nodata":
        unknown = _attempt(problems, raster.unknown_codes, source.codes,
                           None if subs is None else bounds_in(subs, raster.crs))
        if unknown:
            notes.append(f"{raster.where}: keys {', '.join(map(str, unknown[:10]))}"
                         f"{' ...' if len(unknown) > 10 else ''} are not in "
                         f"{source.keys.where}; their cells count as nodata ({where}."
                         "unlisted_keys)")
        if subs is None:
            return unknown is not None
        return _attempt(problems, _extent_ok, raster, subs, project.max_nodata_fraction) is True
    return _attempt(problems, check_raster_codes, raster, subs, source.codes, where,
                    max_fraction=project.max_nodata_fraction,
                    table=source.attributes) is not None


def _extent_ok(raster: ClassRaster, subs: gpd.GeoDataFrame, max_fraction: float) -> bool:
    check_raster_extent(raster, subs, max_fraction)
    return True


def _attempt(problems: list[str], func: Callable[..., T], *args: Any, **kwargs: Any) -> T | None:
    try:
        return func(*args, **kwargs)
    except GisrunError as err:
        problems.append(str(err))
        return None
