"""Soil and cover polygon layers as run inputs: read, classes checked, aligned, described.

A ``[soil]`` or ``[cover]`` table with ``class_field`` names a polygon layer
instead of a raster. Its field holds each polygon's class label, or, when the
table has ``codes``, a whole-number code looked up there (as a raster's cells
are). An empty value marks an unsurveyed polygon (nodata). The layer is
reprojected once to the overlay's CRS (the raster's when the other input is a
raster, else the subcatchments'), and two polygons claiming the same ground
stop the run: the overlay would count that ground twice.
"""

from __future__ import annotations

import dataclasses
import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import CRS

from ..errors import GisrunWarning, InputError, ParameterError, VectorError
from ..grid.polygons import (
    OVERLAP_NOISE,
    ClassPolygons,
    class_polygons,
    layer_gaps,
    layer_overlaps,
)
from ..io.class_layer import read_class_layer
from ..model import Inputs
from ..options import did_you_mean
from ..parameters.soils import valid_soil_labels
from ..parameters.tables import cover_table
from ..project import CoverSource, Project, SoilSource

__all__ = ["read_class_polygons", "align_polygon_layers", "check_layer_overlaps",
           "describe_polygon_layer", "class_layer_sources"]


def read_class_polygons(project: Project, section: str) -> ClassPolygons:
    """Read the ``[soil]`` or ``[cover]`` polygon layer and turn its field into class labels.

    Raises
    ------
    VectorError
        From the reader, or values that are not codes of the code table.
    ParameterError
        A class the parameter tables do not know.
    """
    source: SoilSource | CoverSource = getattr(project, section)
    frame, here = read_class_layer(source.path, field=source.class_field, layer=source.layer,
                                   crs=source.crs)
    where = f"{here}:{source.class_field}"
    if source.codes:
        table = (f"{source.attributes.name} ({project.where(section, 'attributes')})"
                 if source.attributes is not None else project.where(section, "codes"))
        labels = _coded_labels(frame["value"].to_numpy(), source.codes, where, table,
                               unlisted_nodata=source.unlisted_keys == "nodata")
    else:
        labels = _plain_labels(frame["value"].to_numpy())
    valid = (valid_soil_labels(project.soil.classification) if section == "soil"
             else list(cover_table().index))
    _check_labels(labels, valid, where, f"{section} class", project.where(section))
    return class_polygons(frame.geometry.to_numpy(), labels, frame["feature_id"].to_numpy(),
                          frame.crs, here)


def _is_null(raw: np.ndarray) -> np.ndarray:
    text = np.array([str(v).strip() if v is not None else "" for v in raw], dtype=object)
    return np.asarray(pd.isna(pd.Series(raw, dtype=object)), bool) | (text == "")


def _plain_labels(raw: np.ndarray) -> np.ndarray:
    """The field's values as labels (12.0 -> "12"); None where empty."""
    null = _is_null(raw)
    out = np.empty(raw.size, dtype=object)
    for i, v in enumerate(raw):
        if not null[i]:
            out[i] = str(int(v)) if isinstance(v, float) and v.is_integer() else str(v).strip()
    return out


def _coded_labels(raw: np.ndarray, codes: dict[int, str], where: str, table: str, *,
                  unlisted_nodata: bool = False) -> np.ndarray:
    """Each value looked up in the code (or attribute) table; None where empty.

    With ``unlisted_nodata`` a code the table does not list is nodata (with a warning).
    """
    null = _is_null(raw)
    numbers = pd.to_numeric(pd.Series(raw, dtype=object).where(~null), errors="coerce")
    values = numbers.to_numpy(dtype=np.float64)
    bad = ~null & ~(np.isfinite(values) & (np.mod(values, 1.0) == 0))
    if bad.any():
        raise VectorError(where, f"holds {raw[bad][0]!r}, not a whole-number code of {table}",
                          f"give whole-number codes, or remove {table} so that the field's "
                          "values are the class names")
    known = np.isin(values, np.array(sorted(codes), dtype=np.float64))
    unknown = sorted({int(v) for v in values[~null & ~known]})
    if unknown and unlisted_nodata:
        warnings.warn(f"{where}: codes {', '.join(map(str, unknown[:10]))} are not in {table}; "
                      "their polygons count as nodata (unlisted_keys)", GisrunWarning,
                      stacklevel=3)
        null = null | ~known
    elif unknown:
        raise VectorError(where, f"holds codes {', '.join(map(str, unknown[:10]))} that "
                          f"{table} does not list", "add each code and its class to that "
                          "table in the project file")
    return np.array([None if n else codes[int(v)] for n, v in zip(null, values, strict=True)],
                    dtype=object)


def _check_labels(labels: np.ndarray, valid: list[str], where: str, kind: str, table: str
                  ) -> None:
    for label in dict.fromkeys(v for v in labels if v is not None):
        if label not in valid:
            near = did_you_mean(label, valid)
            raise ParameterError(where, f"holds {label!r}, not a {kind} gisrun knows",
                                 f"{near + ' ' if near.startswith('did') else ''}use one of "
                                 f"{', '.join(valid)}, or map codes to them in {table[:-1]}"
                                 ".codes]")


def align_polygon_layers(project: Project, inputs: Inputs) -> Inputs:
    """Move polygon layers to the overlay's CRS once, and stop on overlapping polygons.

    The overlay's CRS is the raster's when the other class input is a raster (rasters are
    never resampled), else the subcatchments'.

    Raises
    ------
    VectorError
        Two polygons of a layer overlap near the subcatchments (:func:`check_layer_overlaps`).
    """
    layers = {k: getattr(inputs, k) for k in ("soil", "cover")
              if isinstance(getattr(inputs, k), ClassPolygons)}
    if not layers:
        return inputs
    if project.impervious is not None and project.impervious.path is not None:
        first = project.where(next(iter(layers)))
        raise InputError(project.where("impervious", "path"), "an impervious-share grid is "
                         f"measured on the class rasters' cells, and {first} is a polygon "
                         "layer", "use soil and cover rasters with the grid, or leave the "
                         "grid out (the cover table's percent is then used)")
    rasters = [r for r in (inputs.soil, inputs.cover)
               if r is not None and not isinstance(r, ClassPolygons)]
    target = CRS.from_user_input(rasters[0].crs if rasters else inputs.subcatchments.crs)
    moved = {}
    for key, layer in layers.items():
        near = _near(layer, inputs.subcatchments)
        check_layer_overlaps(near)
        if not layer.crs.equals(target):
            warnings.warn(f"{layer.where}: polygons transformed from {layer.crs.name} to "
                          f"{target.name} for the overlay", GisrunWarning, stacklevel=2)
        moved[key] = near.to_crs(target).subdivide()  # once, not in every chunk
    return dataclasses.replace(inputs, **moved)


def _near(layer: ClassPolygons, subs: gpd.GeoDataFrame) -> ClassPolygons:
    """The layer's polygons whose bounding boxes meet the subcatchments' (in the layer's CRS)."""
    box = shapely.box(*subs.geometry.to_crs(layer.crs).total_bounds)
    keep = shapely.intersects(shapely.box(*layer.bounds.T), box)
    return class_polygons(layer.geometry[keep], layer.labels[keep], layer.feature_ids[keep],
                          layer.crs, layer.where)


def check_layer_overlaps(layer: ClassPolygons) -> None:
    """Stop when two polygons of a class layer claim the same ground.

    Slivers up to :data:`gisrun.grid.polygons.OVERLAP_NOISE` of the smaller polygon are
    digitising noise and pass.

    Raises
    ------
    VectorError
        Naming the layer, the two feature ids and the area they share.
    """
    found = layer_overlaps(layer)
    if len(found):
        top = found.iloc[0]
        a, b = int(top["feature_id"]), int(top["other_id"])
        more = f"; {len(found) - 1} more overlapping pair(s)" if len(found) > 1 else ""
        raise VectorError(f"{layer.where}:fid={a},{b}", f"features {a} and {b} overlap by "
                          f"{top['overlap_area_m2']:.4g} m2 ({top['overlap_fraction']:.2%} of "
                          f"the smaller), so that ground would be counted twice{more}",
                          "give each piece of ground one polygon (clip or dissolve the "
                          f"overlaps; slivers below {OVERLAP_NOISE:g} of a polygon pass)")


def describe_polygon_layer(layer: ClassPolygons, subs: gpd.GeoDataFrame | None = None) -> str:
    """One line for ``gisrun check``: features, classes, overlaps, gaps under the subcatchments."""
    _, first = np.unique(layer.feature_ids, return_index=True)  # features, not their pieces
    counts = pd.Series([str(v) if v is not None else "(no class)" for v in layer.labels[first]])
    classes = ", ".join(f"{k} ({n})" for k, n in counts.value_counts().sort_index().items())
    text = (f"{layer.where}: {first.size} polygon(s) near the subcatchments; classes "
            f"{classes}; no overlapping polygons")
    if subs is not None and len(subs):
        gap = layer_gaps(subs, layer)
        n = int(np.count_nonzero(gap > 0))
        text += ("; no gaps under the subcatchments" if n == 0 else
                 f"; gaps (ground in no polygon, which the nodata rule treats as outside): "
                 f"{gap.sum():.6g} m2 in {n} subcatchment(s)")
    return text


def class_layer_sources(project: Project, params: pd.DataFrame) -> pd.DataFrame:
    """``parameter_sources`` rows saying which unit classes came from a polygon layer.

    One row per soil x cover x surface (``parameter`` ``soil_class`` or ``cover_class``),
    with its count of unit parts; empty when no class input is a polygon layer.
    """
    keys = ["soil_class", "cover_class", "surface"]
    rows = []
    for section in ("soil", "cover"):
        source: SoilSource | CoverSource | None = getattr(project, section)
        if source is None or not source.is_polygons or params.empty:
            continue
        named = source.path.name + (f":{source.layer}" if source.layer else "")
        via = f" through [{section}.codes]" if source.codes else ""
        text = (f"{section} class from polygon layer {named}, field {source.class_field}{via} "
                "(unit areas by exact polygon intersection)")
        counts = params.groupby(keys, sort=True).size().reset_index(name="unit_parts")
        rows.append(counts.assign(parameter=f"{section}_class", source=text))
    if not rows:
        return pd.DataFrame()
    return pd.concat(rows, ignore_index=True)[["parameter", "source", *keys, "unit_parts"]]
