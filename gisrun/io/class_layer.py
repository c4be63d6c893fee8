"""Read a soil or cover polygon layer: polygons, their class (or key) field, and feature ids.

Any polygon layer pyogrio reads works (GeoPackage with a layer choice, shapefile,
GeoJSON, FlatGeobuf). Checks here are about the file: the layer, the field and its
type, geometry types, coordinates and validity. What the field's values mean (a
class label, or a code looked up in the project's code table) is decided by the
workflow (:mod:`gisrun.workflow.polygon_inputs`).
"""

from __future__ import annotations

import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import shapely
from pyogrio.errors import DataLayerError, DataSourceError

from ..crs import checked_crs
from ..errors import GisrunWarning, VectorError
from .vector import _check_coordinates, _check_field, _check_layer, _polygonal_part

__all__ = ["read_class_layer"]

#: Field types a class or key can be held in (pyogrio's numpy dtypes, by kind).
_FIELD_KINDS = {"O": "text", "U": "text", "i": "whole number", "u": "whole number",
                "f": "number"}


def read_class_layer(path: str | Path, *, field: str, layer: str | None = None,
                     crs: object = None) -> tuple[gpd.GeoDataFrame, str]:
    """Read a polygon layer with one class field.

    Parameters
    ----------
    path : str or Path
        Vector file.
    field : str
        Attribute holding each polygon's class or key.
    layer : str, optional
        Layer name (first layer when omitted).
    crs : object, optional
        CRS to use only when the file has none.

    Returns
    -------
    (GeoDataFrame, str)
        Columns ``feature_id`` (the file's feature ids), ``value`` (the field,
        unchanged) and valid polygon ``geometry``; and ``file:layer`` for messages.

    Raises
    ------
    VectorError
        Missing or unreadable file, unknown layer or field, a field of a type that
        cannot hold a class, no features, non-polygon geometries or bad coordinates.
    CRSError
        No CRS in the file and none stated.

    Warns
    -----
    GisrunWarning
        Features without geometry (left out) and invalid polygons (repaired).
    """
    name = Path(path).name
    layer_name = _check_layer(path, layer)
    here = f"{name}:{layer_name}"
    info = pyogrio.read_info(path, layer=layer_name)
    fields = [str(f) for f in info["fields"]]
    _check_field(here, field, fields)
    dtype = np.dtype(info["dtypes"][fields.index(field)])
    if dtype.kind not in _FIELD_KINDS:
        raise VectorError(f"{here}:{field}", f"is a {dtype} field, which cannot hold a class",
                          "give a text or whole-number field with each polygon's class or key")
    try:
        gdf = pyogrio.read_dataframe(path, layer=layer_name, columns=[field], fid_as_index=True)
    except (DataSourceError, DataLayerError) as err:
        raise VectorError(here, f"cannot be read ({err})", "check the file") from None
    gdf = gdf.set_crs(checked_crs(gdf.crs, here, stated=crs), allow_override=True)
    gdf = _with_geometry(gdf, here)
    fids = np.asarray(gdf.index, dtype=np.int64)
    out = gpd.GeoDataFrame({"feature_id": fids, "value": gdf[field].to_numpy()},
                           geometry=_checked_polygons(gdf.geometry.to_numpy(), fids, here,
                                                      gdf.crs), crs=gdf.crs)
    return out, here


def _with_geometry(gdf: gpd.GeoDataFrame, here: str) -> gpd.GeoDataFrame:
    """Leave out features without geometry (with a warning); stop on an empty layer."""
    geoms = gdf.geometry.to_numpy()
    missing = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if missing.all():
        raise VectorError(here, "has no features with a polygon", "check the layer")
    if missing.any():
        warnings.warn(f"{here}: {int(missing.sum())} feature(s) without geometry left out "
                      f"(feature ids {gdf.index[missing][:10].tolist()})", GisrunWarning,
                      stacklevel=3)
    return gdf[~missing]


def _checked_polygons(geoms: np.ndarray, fids: np.ndarray, here: str, crs: object
                      ) -> np.ndarray:
    """Polygons only, finite coordinates, invalid ones repaired (with a warning)."""
    bad = ~np.isin(shapely.get_type_id(geoms), [3, 6])  # Polygon, MultiPolygon
    if bad.any():
        types = sorted({g.geom_type for g in geoms[bad]})
        raise VectorError(f"{here}:fid={fids[bad][0]}", f"{types} geometries are not polygons "
                          f"(feature ids {fids[bad][:10].tolist()})", "give a polygon layer")
    _check_coordinates(geoms, fids, here, crs)
    invalid = ~shapely.is_valid(geoms)
    if invalid.any():
        geoms = geoms.copy()
        geoms[invalid] = [_polygonal_part(g) for g in shapely.make_valid(geoms[invalid])]
        warnings.warn(f"{here}: repaired {int(invalid.sum())} invalid polygon(s) with "
                      f"make_valid, keeping their polygonal parts (feature ids "
                      f"{fids[invalid][:20].tolist()}); check them", GisrunWarning, stacklevel=3)
    return geoms
