"""Read a project's inputs: the glue between the project file and the readers in :mod:`gisrun.io`.

Every reader checks its own file; this module adds the checks that need two
inputs at once (raster codes under the subcatchments, storm names that would
share a layer). The checksums that trace a result to its inputs are in
:mod:`gisrun.workflow.checksums`.
"""

from __future__ import annotations

import dataclasses
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import CRS, Transformer

from ..config.storms import storms_from_config
from ..errors import GisrunWarning, RasterError, StormError
from ..io.raster import ClassRaster, read_class_raster
from ..io.tables import read_parameter_overrides
from ..io.vector import read_subcatchments
from ..model import Inputs
from ..present.layers import layer_name, storm_layer_name
from ..project import Project
from ..storm import Hyetograph, check_step_count

__all__ = [
    "read_inputs",
    "read_subcatchment_layer",
    "read_soil",
    "read_cover",
    "read_storms",
    "read_overrides",
    "check_raster_codes",
    "check_inputs_codes",
    "check_storm_names",
]


#: Longest storm name: its output files add a prefix and suffix, and file names stop at 255.
MAX_STORM_NAME = 100


def read_subcatchment_layer(project: Project) -> gpd.GeoDataFrame:
    """Read the subcatchment polygons with the fields the run needs."""
    src = project.subcatchments
    keep = tuple(dict.fromkeys(
        f for f in (src.method_field, project.rain_scale_field, *src.parameter_fields) if f))
    return read_subcatchments(src.path, id_field=src.id_field, layer=src.layer, crs=src.crs,
                              keep_fields=keep)


def read_soil(project: Project) -> ClassRaster:
    """Open the soil raster and check it against the project's code table."""
    return read_class_raster(project.soil.path, codes=project.soil.codes,
                             where=f"{project.soil.path} ({project.where('soil', 'path')})",
                             crs=project.soil.crs)


def read_cover(project: Project) -> ClassRaster | None:
    """Open the land-cover raster, if the project names one."""
    if project.cover is None:
        return None
    return read_class_raster(project.cover.path, codes=project.cover.codes,
                             where=f"{project.cover.path} ({project.where('cover', 'path')})",
                             crs=project.cover.crs)


def read_storms(project: Project) -> tuple[Hyetograph, ...]:
    """Build every storm of the project (design storms and hyetograph files).

    Raises
    ------
    StormError
        A storm cannot be built, or two storms would write the same layer.
    """
    where = f"{project.path.name}:[[storms]]"
    storms = tuple(storms_from_config(list(project.storms), base_dir=project.base_dir,
                                      units=project.units, where=where))
    check_storm_names([h.name for h in storms], where)
    for i, h in enumerate(storms, start=1):  # before anything is resampled onto the run's step
        check_step_count(float(h.time_s[-1]), project.time_step_s, f"{where} {i} ({h.name})",
                         "shorten the storm or lengthen "
                         f"{project.where('project', 'time_step_min')}")
    return storms


def check_storm_names(names: list[str], where: str) -> None:
    """Stop when two storm names give the same output layer or file name.

    Raises
    ------
    StormError
        Naming both storms.
    """
    for name in names:  # file names of maps and rasters are built from it; most systems
        if len(layer_name(name)) > MAX_STORM_NAME:  # stop file names at 255 bytes
            raise StormError(where, f"storm name {name[:40]!r}... is {len(name)} characters "
                             "long, too long for the file names of its outputs",
                             f"give it a name of at most {MAX_STORM_NAME} characters")
    for naming in (storm_layer_name, layer_name):
        seen: dict[str, str] = {}
        for name in names:
            key = naming(name)
            if key in seen:
                raise StormError(where, f"storms {seen[key]!r} and {name!r} would both be "
                                 f"written as {key!r}", "give the storms names that differ "
                                 "in letters or digits")
            seen[key] = name


def read_overrides(project: Project) -> pd.DataFrame | None:
    """Read the user's parameter override table, if any."""
    return read_parameter_overrides(project.overrides) if project.overrides else None


def read_inputs(project: Project) -> Inputs:
    """Read and check every input file named by the project.

    Warnings raised while reading are passed on and their text kept in ``Inputs.notes``.

    Raises
    ------
    GisrunError
        The first problem found, naming the file, field or value.
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GisrunWarning)
        inputs = Inputs(
            subcatchments=read_subcatchment_layer(project),
            soil=read_soil(project),
            cover=read_cover(project),
            storms=read_storms(project),
            overrides=read_overrides(project),
        )
    for w in caught:  # pass them on, and keep their text with the inputs for the run table
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    notes = tuple(str(w.message) for w in caught if issubclass(w.category, GisrunWarning))
    return dataclasses.replace(inputs, notes=notes)


def check_raster_codes(raster: ClassRaster, subs: gpd.GeoDataFrame | None,
                       codes: dict[int, str], where: str, *,
                       max_fraction: float | None = None) -> bool:
    """Raise if the raster holds, under the subcatchments, codes missing from ``codes``.

    With ``subs`` None the whole raster is scanned. With ``max_fraction`` the raster's
    extent is checked first (:func:`check_raster_extent`).

    Raises
    ------
    RasterError
        Listing the unknown codes and the project file table to add them to.
    """
    bounds = None if subs is None else _bounds_in(subs, raster.crs)
    if subs is not None and max_fraction is not None:
        check_raster_extent(raster, subs, max_fraction)
    unknown = raster.unknown_codes(codes, bounds)
    if len(unknown):
        listed = ", ".join(str(int(c)) for c in sorted(unknown)[:10])
        raise RasterError(
            Path(raster.path).name, f"holds codes {listed} that {where}.codes does not list",
            "add each code and its class to that table in the project file",
        )
    return True


def check_raster_extent(raster: ClassRaster, subs: gpd.GeoDataFrame, max_fraction: float
                        ) -> None:
    """Stop, naming this raster, when it leaves more than ``max_fraction`` of a polygon uncovered.

    The overlay sees the soil and cover rasters' missing cells together; this check tells
    which raster falls short, so a cover raster that covers half the area is not reported as
    a soil problem.

    Raises
    ------
    RasterError
        Naming the raster, the subcatchments and how much of each it covers.
    """
    geoms = subs.geometry
    if geoms.crs is not None and CRS.from_user_input(geoms.crs) != CRS.from_user_input(raster.crs):
        geoms = geoms.to_crs(raster.crs)
    with warnings.catch_warnings():  # a ratio of planar areas, also in degrees
        warnings.simplefilter("ignore", UserWarning)
        area = geoms.area.to_numpy()
        inside = geoms.intersection(shapely.box(*raster.bounds)).area.to_numpy()
    outside = np.divide(area - inside, area, out=np.zeros_like(area), where=area > 0)
    over = outside > max_fraction + 1e-9
    if over.any():
        ids = subs["subcatchment_id"].to_numpy()[over][:10]
        shares = ", ".join(f"{i} ({1 - f:.0%})" for i, f in zip(ids, outside[over], strict=False))
        raise RasterError(raster.where or Path(raster.path).name,
                          f"covers only part of subcatchments {shares}, more than "
                          f"{max_fraction:.0%} of their area lies outside this raster",
                          "extend this raster over every subcatchment, or raise [nodata] "
                          "max_fraction")


def _bounds_in(subs: gpd.GeoDataFrame, crs: CRS) -> tuple[float, float, float, float]:
    """The polygons' bounds in another CRS (densified edges, so the box still covers them)."""
    bounds = tuple(float(v) for v in subs.total_bounds)
    if CRS.from_user_input(subs.crs) == CRS.from_user_input(crs):
        return bounds
    transformer = Transformer.from_crs(subs.crs, crs, always_xy=True)
    return tuple(transformer.transform_bounds(*bounds, densify_pts=21))


def check_inputs_codes(project: Project, inputs: Inputs) -> None:
    """Check both rasters' codes under the subcatchments (see :func:`check_raster_codes`)."""
    check_raster_codes(inputs.soil, inputs.subcatchments, project.soil.codes,
                       project.where("soil"), max_fraction=project.max_nodata_fraction)
    if inputs.cover is not None and project.cover is not None:
        check_raster_codes(inputs.cover, inputs.subcatchments, project.cover.codes,
                           project.where("cover"), max_fraction=project.max_nodata_fraction)
