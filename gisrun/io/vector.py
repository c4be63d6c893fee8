"""Read the subcatchment polygons and check ids, geometry and CRS.

Any vector format pyogrio reads works (GeoPackage with a layer choice,
shapefile, GeoJSON, FlatGeobuf). The result has a ``subcatchment_id`` column
of strings, the geometry, and the attribute fields asked for.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import shapely
from pyogrio.errors import DataLayerError, DataSourceError
from pyproj import CRS

from ..crs import checked_crs
from ..errors import GisrunWarning, VectorError
from ..options import did_you_mean

__all__ = ["read_subcatchments"]

_POLYGONAL = {"Polygon", "MultiPolygon"}


def read_subcatchments(path: str | Path, *, id_field: str, layer: str | None = None,
                       crs: object = None, where: str | None = None,
                       keep_fields: Sequence[str] = ()) -> gpd.GeoDataFrame:
    """Read and check a subcatchment polygon layer.

    Parameters
    ----------
    path : str or Path
        Vector file.
    id_field : str
        Attribute holding each subcatchment's unique id.
    layer : str, optional
        Layer name (first layer when omitted).
    crs : object, optional
        CRS to use only when the file has none.
    where : str, optional
        Attribute filter (SQL ``WHERE`` clause) applied while reading.
    keep_fields : sequence of str
        Other attributes to keep, unchanged.

    Returns
    -------
    geopandas.GeoDataFrame
        Columns ``subcatchment_id`` (str), ``geometry`` and ``keep_fields``.

    Raises
    ------
    VectorError
        Missing or unreadable file, unknown layer, missing field, empty layer,
        null/empty/duplicate ids, non-polygon or zero-area geometries.
    CRSError
        No CRS in the file and none stated.

    Warns
    -----
    GisrunWarning
        When invalid polygons were repaired (names the ids).
    """
    name = str(path)
    layer_name = _check_layer(path, layer)
    here = f"{name}:{layer_name}"
    fields = [str(f) for f in pyogrio.read_info(path, layer=layer_name)["fields"]]
    for field in (id_field, *keep_fields):
        _check_field(here, field, fields)
    try:
        gdf = pyogrio.read_dataframe(path, layer=layer_name, where=where,
                                     columns=list(dict.fromkeys([id_field, *keep_fields])))
    except (DataSourceError, DataLayerError) as err:
        raise VectorError(here, f"cannot be read ({err})", "check the file and the where filter") \
            from None
    if len(gdf) == 0:
        raise VectorError(here, "has no features" + (f" matching {where!r}" if where else ""),
                          "check the layer and filter")
    gdf = gdf.set_crs(checked_crs(gdf.crs, here, stated=crs), allow_override=True)
    ids = _checked_ids(gdf[id_field], f"{here}:{id_field}")
    out = gpd.GeoDataFrame({"subcatchment_id": ids}, geometry=gdf.geometry.values, crs=gdf.crs)
    for field in keep_fields:
        if field != "subcatchment_id":
            out[field] = gdf[field].to_numpy()
    out["geometry"] = _checked_geometry(out, here)
    return out


def _check_layer(path: str | Path, layer: str | None) -> str:
    name = str(path)
    if not Path(path).exists():
        raise VectorError(name, "file not found", "check the path in the project file")
    try:
        layers = [str(row[0]) for row in pyogrio.list_layers(path)]
    except (DataSourceError, DataLayerError, OSError) as err:
        raise VectorError(name, f"cannot be read as a vector file ({err})",
                          "give a GeoPackage, shapefile, GeoJSON or FlatGeobuf") from None
    if not layers:
        raise VectorError(name, "has no layers", "give a file with a polygon layer")
    if layer is None:
        return layers[0]
    if layer not in layers:
        raise VectorError(f"{name}:{layer}", "no such layer", did_you_mean(layer, layers))
    return layer


def _check_field(here: str, field: str, fields: list[str]) -> None:
    if field in fields:
        return
    raise VectorError(f"{here}:{field}", "no such field", did_you_mean(field, fields))


def _checked_ids(values: object, here: str) -> np.ndarray:
    raw = np.asarray(values, dtype=object)
    null = np.array([v is None or (isinstance(v, float) and np.isnan(v)) for v in raw])
    if null.any():
        rows = np.flatnonzero(null)[:5].tolist()
        raise VectorError(here, f"{null.sum()} feature(s) have no id (rows {rows})",
                          "give every subcatchment an id")
    ids = np.array([_id_text(v) for v in raw], dtype=object)
    empty = ids == ""
    if empty.any():
        rows = np.flatnonzero(empty)[:5].tolist()
        raise VectorError(here, f"{empty.sum()} feature(s) have an empty id (rows {rows})",
                          "give every subcatchment an id")
    uniq, counts = np.unique(ids.astype(str), return_counts=True)
    dup = uniq[counts > 1]
    if dup.size:
        raise VectorError(here, f"duplicate ids {dup[:10].tolist()}", "make the ids unique")
    return ids


def _id_text(value: object) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))  # 12.0 read from a float column -> "12"
    return str(value).strip()


def _checked_geometry(gdf: gpd.GeoDataFrame, here: str) -> gpd.GeoSeries:
    geoms = gdf.geometry.to_numpy()
    ids = gdf["subcatchment_id"].to_numpy()
    missing = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if missing.any():
        raise VectorError(f"{here}:id={ids[missing][0]}",
                          f"empty or missing geometry (ids {ids[missing][:10].tolist()})",
                          "remove these features or draw their polygons")
    kinds = shapely.get_type_id(geoms)
    bad = ~np.isin(kinds, [3, 6])  # Polygon, MultiPolygon
    if bad.any():
        types = sorted({g.geom_type for g in geoms[bad]})
        raise VectorError(f"{here}:id={ids[bad][0]}",
                          f"{types} geometries are not polygons (ids {ids[bad][:10].tolist()})",
                          "give a polygon layer")
    _check_coordinates(geoms, ids, here, gdf.crs)
    geoms = _repaired(geoms, ids, here)
    zero = shapely.area(geoms) <= 0
    if zero.any():
        raise VectorError(f"{here}:id={ids[zero][0]}",
                          f"polygons with zero area (ids {ids[zero][:10].tolist()})",
                          "fix or remove these polygons")
    return gpd.GeoSeries(geoms, index=gdf.index, crs=gdf.crs)


#: Farther than this from a projected CRS's origin (in its units, metres or feet) is off the
#: Earth: its circumference is about 4.0e7 m, 1.3e8 ft.
_FARTHEST_PROJECTED = 1e9


def _check_coordinates(geoms: np.ndarray, ids: np.ndarray, here: str, crs: object) -> None:
    """Stop on NaN or infinite vertices, and on coordinates no place on Earth has in the CRS.

    A layer of metres labelled with a geographic CRS (UTM coordinates marked EPSG:4326) has
    "longitudes" in the hundreds of thousands; the label, not the data, is usually wrong.
    """
    xy, index = shapely.get_coordinates(geoms, return_index=True)
    bad = ~np.isfinite(xy).all(axis=1)
    if bad.any():
        raise VectorError(f"{here}:id={ids[index[bad][0]]}", "has NaN or infinite vertex "
                          f"coordinates (ids {list(dict.fromkeys(ids[index[bad]]))[:10]})",
                          "fix or redraw these polygons")
    geographic = crs is not None and CRS.from_user_input(crs).is_geographic
    if geographic:
        bad = (np.abs(xy[:, 0]) > 360.0) | (np.abs(xy[:, 1]) > 90.0 + 1e-9)
        problem = "has coordinates outside longitude -360..360 / latitude -90..90"
        fix = ("the layer is labelled with a geographic CRS but holds other coordinates: "
               "assign its true CRS (e.g. ogr2ogr -a_srs EPSG:32617) or reproject it")
    else:
        bad = (np.abs(xy) > _FARTHEST_PROJECTED).any(axis=1)
        problem = f"has coordinates beyond {_FARTHEST_PROJECTED:g} CRS units, off the Earth"
        fix = "check the layer's CRS and the polygons' coordinates"
    if bad.any():
        x, y = xy[bad][0]
        raise VectorError(f"{here}:id={ids[index[bad][0]]}", f"{problem} (e.g. {x:g}, {y:g})",
                          fix)


def _repaired(geoms: np.ndarray, ids: np.ndarray, here: str) -> np.ndarray:
    invalid = ~shapely.is_valid(geoms)
    if not invalid.any():
        return geoms
    geoms = geoms.copy()
    for i in np.flatnonzero(invalid):
        geoms[i] = _polygonal_part(shapely.make_valid(geoms[i]))
    warnings.warn(f"{here}: repaired invalid polygons (ids {ids[invalid][:20].tolist()}); "
                  "check them, only their polygonal parts were kept",
                  GisrunWarning, stacklevel=3)
    return geoms


def _polygonal_part(geom: shapely.Geometry) -> shapely.Geometry:
    if geom.geom_type in _POLYGONAL:
        return geom
    parts = [g for g in shapely.get_parts(geom) if g.geom_type in _POLYGONAL]
    if not parts:
        return shapely.Polygon()
    return shapely.union_all(parts)
