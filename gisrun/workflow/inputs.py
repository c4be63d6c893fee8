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

from ..crs import ground_areas, is_web_mercator
from ..errors import GisrunWarning, RasterError, VectorError
from ..io.raster import ClassRaster, read_class_raster, read_value_raster
from ..io.tables import read_parameter_overrides
from ..io.vector import read_subcatchments
from ..model import Inputs
from ..parameters.tables import UNSPECIFIED_COVER_STANDS_FOR, cover_table
from ..project import Project
from ..storm import Hyetograph
from ..storm.plausibility import warn_if_implausible
from .polygon_inputs import ClassPolygons, align_polygon_layers, read_class_polygons
from .storms import check_storm_names, read_storms

__all__ = [
    "read_inputs",
    "read_subcatchment_layer",
    "read_soil",
    "read_cover",
    "read_impervious_grid",
    "no_cover_note",
    "read_storms",
    "read_overrides",
    "check_raster_codes",
    "check_inputs_codes",
    "check_storm_names",
    "warn_if_rain_scale_implausible",
    "subcatchment_overlaps",
    "check_overlaps",
    "bounds_in",
]



def read_subcatchment_layer(project: Project) -> gpd.GeoDataFrame:
    """Read the subcatchment polygons with the fields the run needs."""
    src = project.subcatchments
    disconnected = project.impervious.disconnected_field if project.impervious else None
    keep = tuple(dict.fromkeys(
        f for f in (src.method_field, project.rain_scale_field, disconnected,
                    *src.parameter_fields) if f))
    subs = read_subcatchments(src.path, id_field=src.id_field, layer=src.layer, crs=src.crs,
                              keep_fields=keep)
    if subs.crs is not None and is_web_mercator(subs.crs):
        warnings.warn(f"{src.path.name}: the subcatchments are in Web Mercator, whose planar "
                      "areas are 1/cos^2(latitude) times the ground (1.7 at 40 degrees); gisrun "
                      "measures them on the ellipsoid, but reproject the layer to a local "
                      "projected CRS (such as UTM) for maps and edits", GisrunWarning,
                      stacklevel=2)
    return subs


def read_soil(project: Project) -> ClassRaster | ClassPolygons:
    """Open the soil raster (or read the polygon layer) and check it against the code table."""
    if project.soil.is_polygons:
        return read_class_polygons(project, "soil")
    return read_class_raster(project.soil.path, codes=project.soil.codes,
                             where=f"{project.soil.path} ({project.where('soil', 'path')})",
                             crs=project.soil.crs)


def read_cover(project: Project) -> ClassRaster | ClassPolygons | None:
    """Open the land-cover raster (or read the polygon layer), if the project names one.

    Warns
    -----
    GisrunWarning
        When there is none: every unit is then priced as the shipped cover
        ``open_space_good`` (fully pervious), which the user should know.
    """
    if project.cover is None:
        warnings.warn(no_cover_note(project), GisrunWarning, stacklevel=2)
        return None
    if project.cover.is_polygons:
        return read_class_polygons(project, "cover")
    return read_class_raster(project.cover.path, codes=project.cover.codes,
                             where=f"{project.cover.path} ({project.where('cover', 'path')})",
                             crs=project.cover.crs)


def read_impervious_grid(project: Project) -> ClassRaster | None:
    """Open the impervious-share grid, if the project names one (values are read in the overlay)."""
    source = project.impervious
    if source is None or source.path is None:
        return None
    return read_value_raster(source.path, crs=source.crs,
                             where=f"{source.path} ({project.where('impervious', 'path')})")


def no_cover_note(project: Project) -> str:
    """What a run without a land-cover raster assumes for every unit."""
    stands_for = cover_table().loc[UNSPECIFIED_COVER_STANDS_FOR]
    storage_mm = stands_for["pervious_depression_storage_m"] * 1000.0
    return (f"{project.where('cover')}: no land-cover raster, so every unit is priced as fully "
            f"pervious open space in good condition ({UNSPECIFIED_COVER_STANDS_FOR}: no "
            f"impervious share, TR-55 curve numbers {stands_for['cn_A']:.0f}/"
            f"{stands_for['cn_B']:.0f}/{stands_for['cn_C']:.0f}/{stands_for['cn_D']:.0f} for "
            f"groups A-D) with {storage_mm:g} mm depression storage; add a [cover] table "
            f"with a land-cover raster so roofs, roads and other covers are priced as such")


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
        subcatchments = read_subcatchment_layer(project)
        inputs = align_polygon_layers(project, Inputs(
            subcatchments=subcatchments,
            soil=read_soil(project),
            cover=read_cover(project),
            storms=read_storms(project, subcatchments),
            overrides=read_overrides(project),
            impervious=read_impervious_grid(project),
        ))
        warn_if_rain_scale_implausible(project, inputs.subcatchments, inputs.storms)
        check_overlaps(project, inputs.subcatchments)
        for source in (project.soil, project.cover):
            if source is not None and source.keys is not None:  # what the table supplied
                warnings.warn(source.keys.summary(), GisrunWarning, stacklevel=2)
    for w in caught:  # pass them on, and keep their text with the inputs for the run table
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    notes = tuple(str(w.message) for w in caught if issubclass(w.category, GisrunWarning))
    return dataclasses.replace(inputs, notes=notes)


def warn_if_rain_scale_implausible(project: Project, subs: gpd.GeoDataFrame,
                                   storms: tuple[Hyetograph, ...]) -> None:
    """Warn (``GisrunWarning``) if the largest rain scale factor makes a storm implausible.

    Uses the storm plausibility limits of the storm reader
    (:func:`gisrun.storm.plausibility.warn_if_implausible`). Factors that are not
    non-negative numbers are left to :func:`gisrun.workflow.steps.rain_scale_for_units`,
    which stops on them.
    """
    field_name = project.rain_scale_field
    if not field_name or field_name not in subs.columns or len(subs) == 0:
        return
    factor = pd.to_numeric(subs[field_name], errors="coerce").to_numpy(dtype=np.float64)
    factor = np.where(np.isfinite(factor) & (factor >= 0), factor, -1.0)
    largest = int(np.argmax(factor))
    if factor[largest] <= 1.0:
        return
    sid = subs["subcatchment_id"].iloc[largest]
    for storm in storms:
        warn_if_implausible(storm.scaled(float(factor[largest])),
                            f"{project.subcatchments.path.name}:{field_name}:id={sid} "
                            f"(rain scale {factor[largest]:g} x storm {storm.name!r})",
                            project.units)


#: Overlaps smaller than this share of the smaller polygon are rounding, not overlaps.
_OVERLAP_NOISE = 1e-9
#: Overlapping pairs named one by one; the rest are counted in one more warning.
_OVERLAPS_LISTED = 20


def subcatchment_overlaps(subs: gpd.GeoDataFrame) -> pd.DataFrame:
    """Every pair of subcatchments whose interiors overlap, with the ground area they share.

    Returns
    -------
    DataFrame
        ``subcatchment_id``, ``other_id``, ``overlap_area_m2`` (ground area,
        :func:`gisrun.crs.ground_areas`) and ``overlap_fraction`` (of the smaller
        of the two), largest share first; none for a valid coverage (not searched).
    """
    geoms = subs.geometry.to_numpy()
    tree = None if shapely.coverage_is_valid(geoms) else shapely.STRtree(geoms)  # 4 s, not 30
    pairs = np.concatenate([tree.query(geoms, predicate=p) for p in ("overlaps", "contains")]
                           if tree is not None else [np.zeros((2, 0), np.intp)], axis=1)
    pairs = np.unique(np.sort(pairs, axis=0), axis=1)
    i, j = pairs[:, pairs[0] != pairs[1]]
    area = np.zeros(0)
    share = np.zeros(0)
    if len(i):
        shared = gpd.GeoSeries(shapely.intersection(geoms[i], geoms[j]), crs=subs.crs)
        area = ground_areas(shared).area_m2
        own = ground_areas(subs.geometry).area_m2
        smaller = np.minimum(own[i], own[j])
        share = np.divide(area, smaller, out=np.zeros_like(area), where=smaller > 0)
    ids = subs["subcatchment_id"].to_numpy(dtype=object)
    out = pd.DataFrame({"subcatchment_id": ids[i], "other_id": ids[j],
                        "overlap_area_m2": area, "overlap_fraction": share})
    out = out[out["overlap_fraction"] > _OVERLAP_NOISE]
    return out.sort_values("overlap_fraction", ascending=False, ignore_index=True)


def check_overlaps(project: Project, subs: gpd.GeoDataFrame) -> pd.DataFrame:
    """Warn about every overlapping pair; stop above ``[subcatchments] max_overlap_fraction``.

    Returns
    -------
    DataFrame
        :func:`subcatchment_overlaps`.

    Raises
    ------
    VectorError
        Naming the pair that shares the largest part of the smaller polygon.
    """
    found = subcatchment_overlaps(subs)
    name = project.subcatchments.path.name
    limit = project.subcatchments.max_overlap_fraction
    for row in found.head(_OVERLAPS_LISTED).itertuples():
        warnings.warn(f"{name}: subcatchments {row.subcatchment_id} and {row.other_id} overlap "
                      f"by {row.overlap_area_m2:.4g} m2 ({row.overlap_fraction:.2%} of the "
                      "smaller); the rain on that area is counted in both", GisrunWarning,
                      stacklevel=2)
    if len(found) > _OVERLAPS_LISTED:
        warnings.warn(f"{name}: {len(found) - _OVERLAPS_LISTED} more pairs of subcatchments "
                      f"overlap, {found['overlap_area_m2'].iloc[_OVERLAPS_LISTED:].sum():.4g} m2 "
                      "in all", GisrunWarning, stacklevel=2)
    if len(found) and found["overlap_fraction"].iloc[0] > limit:
        top = found.iloc[0]
        raise VectorError(f"{name}:id={top['subcatchment_id']},{top['other_id']}",
                          f"these subcatchments overlap by {top['overlap_area_m2']:.4g} m2 "
                          f"({top['overlap_fraction']:.2%} of the smaller), above "
                          f"{project.where('subcatchments', 'max_overlap_fraction')} = {limit:g}",
                          "fix the polygons so that they do not overlap, or raise "
                          "max_overlap_fraction")
    return found


def check_raster_codes(raster: ClassRaster, subs: gpd.GeoDataFrame | None,
                       codes: dict[int, str], where: str, *,
                       max_fraction: float | None = None, table: Path | None = None) -> bool:
    """Raise if the raster holds, under the subcatchments, codes missing from ``codes``.

    With ``subs`` None the whole raster is scanned. With ``max_fraction`` the raster's
    extent is checked first (:func:`check_raster_extent`).

    Raises
    ------
    RasterError
        Listing the unknown codes and the project file table to add them to.
    """
    bounds = None if subs is None else bounds_in(subs, raster.crs)
    if subs is not None and max_fraction is not None:
        check_raster_extent(raster, subs, max_fraction)
    unknown = raster.unknown_codes(codes, bounds)
    if len(unknown) and table is not None:
        listed = ", ".join(str(int(c)) for c in sorted(unknown)[:10])
        more = f" and {len(unknown) - 10} more" if len(unknown) > 10 else ""
        raise RasterError(
            Path(raster.path).name, f"holds keys {listed}{more} that its attribute table "
            f"{table.name} does not list", f"add rows for them to the table, or set {where}."
            "unlisted_keys = \"nodata\" to count their cells as nodata")
    if len(unknown):
        listed = ", ".join(str(int(c)) for c in sorted(unknown)[:10])
        raise RasterError(
            Path(raster.path).name, f"holds codes {listed} that {where}.codes does not list",
            "add each code and its class to that table in the project file",
        )
    return True


def _warn_unlisted(raster: ClassRaster, subs: gpd.GeoDataFrame, source: object, where: str
                   ) -> None:
    unknown = raster.unknown_codes(source.codes, bounds_in(subs, raster.crs))
    if unknown:
        listed = ", ".join(str(k) for k in unknown[:10]) + (" ..." if len(unknown) > 10 else "")
        warnings.warn(f"{Path(raster.path).name}: keys {listed} are not in "
                      f"{source.attributes.name}; their cells count as nodata "
                      f"({where}.unlisted_keys)", GisrunWarning, stacklevel=3)


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


def bounds_in(subs: gpd.GeoDataFrame, crs: CRS) -> tuple[float, float, float, float]:
    """The polygons' bounds in another CRS (densified edges, so the box still covers them)."""
    bounds = tuple(float(v) for v in subs.total_bounds)
    if CRS.from_user_input(subs.crs) == CRS.from_user_input(crs):
        return bounds
    transformer = Transformer.from_crs(subs.crs, crs, always_xy=True)
    return tuple(transformer.transform_bounds(*bounds, densify_pts=21))


def check_inputs_codes(project: Project, inputs: Inputs) -> None:
    """Check both rasters' codes under the subcatchments (see :func:`check_raster_codes`).

    A keyed raster whose ``unlisted_keys`` is ``"nodata"`` has only its extent checked:
    its unlisted keys count as nodata in the overlay (a polygon layer's, as it was read).
    """
    pairs = ((inputs.soil, project.soil, "soil"), (inputs.cover, project.cover, "cover"))
    sources = [(r, s, k) for r, s, k in pairs
               if r is not None and s is not None and not isinstance(r, ClassPolygons)]
    for raster, source, section in sources:
        if source.unlisted_keys == "nodata":
            check_raster_extent(raster, inputs.subcatchments, project.max_nodata_fraction)
            _warn_unlisted(raster, inputs.subcatchments, source, project.where(section))
            continue
        check_raster_codes(raster, inputs.subcatchments, source.codes, project.where(section),
                           max_fraction=project.max_nodata_fraction, table=source.attributes)
