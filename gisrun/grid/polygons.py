"""Exact overlay of subcatchments on soil and cover *polygon* layers -> the same unit table.

A soil or cover map may come as polygons (a soil survey's map units) instead of a
raster. The unit table (subcatchment x soil class x cover class, area) is then
made by polygon intersection, so a unit's area is exact to floating point:

- both layers polygons: each subcatchment is cut by the soil polygons
  (``shapely.intersection``, vectorised over the pairs an ``STRtree`` finds), and
  each piece by the cover polygons; a unit's area is the sum of its pieces'
  areas;
- one layer polygons, the other a raster: the subcatchments are cut by the
  polygons first, and the raster's exact cell coverage of each piece is taken
  with the raster overlay's own scan (:mod:`gisrun.grid.overlay`: partial cells
  at the piece's edges count by the share covered). Each piece lies on one
  polygon class, so every (polygon class, raster class) area is exact at both
  the polygon edges and the cell edges: no rasterisation of the polygons.

Ground a subcatchment has outside every polygon of the layer (a gap) counts as
*outside*, and a polygon whose class is empty (``None``, an unsurveyed area) as
*nodata*, exactly as cells beyond a raster's edge and nodata cells do; the
raster overlay's nodata rule, its maximum share and its scaling of each
subcatchment's units to the subcatchment's ground area then apply unchanged.
Areas are measured in the computation CRS (the raster's when a raster is
involved, which is never resampled; else the subcatchments'): planar area
times the square of the CRS's linear unit, or geodesic for a geographic CRS.

Memory: the workflow calls this once per chunk of subcatchments
(:mod:`gisrun.workflow.chunks`); only the layer's polygons whose bounding boxes
meet the chunk's are intersected.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from numpy.typing import NDArray
from pyproj import CRS

from ..crs import ground_areas, linear_unit_m
from ..errors import CRSError, RasterError
from .classes import ClassGrid
from .overlay import (
    _NODATA,
    _OUTSIDE,
    UNSPECIFIED_COVER,
    _check_options,
    _class_sums,
    _finish,
    _Grid,
    _to_grid_crs,
)
from .polygon_pieces import MAX_VERTICES, halved, intersections, polygonal

__all__ = ["ClassPolygons", "class_polygons", "polygon_unit_areas", "layer_overlaps",
           "layer_gaps", "OVERLAP_NOISE", "MAX_VERTICES"]

#: Overlaps smaller than this share of the smaller of two polygons are digitising noise
#: (slivers where neighbouring polygons' shared edges were snapped), not two classes
#: claiming the same ground (common practice: such slivers are cleaned, not mapped).
OVERLAP_NOISE = 1e-6
#: Class of ground in no polygon of a layer while the sums are made (then outside).
_GAP = -1


@dataclass(frozen=True)
class ClassPolygons:
    """A polygon layer of classes, as the overlay sees it (made by :func:`class_polygons`).

    Attributes
    ----------
    geometry : ndarray of shapely polygons
        Valid polygons or multipolygons, in ``crs``.
    labels : ndarray of object
        Class label of each feature (after the code table); None = nodata.
    feature_ids : ndarray of int64
        The features' ids in the file (named in messages).
    crs : pyproj.CRS
    where : str
        ``file:layer`` for messages.
    """

    geometry: NDArray[np.object_]
    labels: NDArray[np.object_]
    feature_ids: NDArray[np.int64]
    crs: CRS
    where: str
    bounds: NDArray[np.float64] = field(repr=False, default_factory=lambda: np.zeros((0, 4)))
    #: True once large polygons are cut into pieces of at most :data:`MAX_VERTICES` vertices.
    subdivided: bool = False

    @property
    def classes(self) -> list[str]:
        """The distinct class labels, sorted."""
        return sorted({str(v) for v in self.labels if v is not None})

    def to_crs(self, crs: CRS) -> ClassPolygons:
        """The same layer in another CRS (vertices transformed with pyproj)."""
        if CRS.from_user_input(crs).equals(self.crs):
            return self
        moved = gpd.GeoSeries(self.geometry, crs=self.crs).to_crs(crs).to_numpy()
        return class_polygons(moved, self.labels, self.feature_ids, crs, self.where,
                              subdivided=self.subdivided)

    def subdivide(self) -> ClassPolygons:
        """The same ground in pieces of at most :data:`MAX_VERTICES` vertices (same classes).

        A polygon of many vertices (a soil map unit traced along cell edges, a long valley
        floor) is cut in halves across its longer side, again and again, until every piece
        is small: each subcatchment is then intersected with a few small pieces instead of
        the whole outline (the cost of an intersection grows with both polygons' vertices).
        The pieces tile the polygon, so every area is unchanged to rounding.
        """
        if self.subdivided:
            return self
        geoms, owner = halved(self.geometry)
        return class_polygons(geoms, self.labels[owner], self.feature_ids[owner], self.crs,
                              self.where, subdivided=True)


def class_polygons(geometry: Any, labels: Any, feature_ids: Any, crs: Any, where: str, *,
                   subdivided: bool = False) -> ClassPolygons:
    """Build a :class:`ClassPolygons` (polygons made valid first: see the reader)."""
    geoms = np.asarray(geometry, dtype=object)
    return ClassPolygons(geoms, np.asarray(labels, dtype=object),
                         np.asarray(feature_ids, dtype=np.int64), CRS.from_user_input(crs),
                         where, shapely.bounds(geoms).reshape(-1, 4), subdivided)


def polygon_unit_areas(subcatchments: gpd.GeoDataFrame, soil: ClassGrid | ClassPolygons,
                       cover: ClassGrid | ClassPolygons | None = None, *,
                       soil_codes: dict[int, str] | None = None,
                       cover_codes: dict[int, str] | None = None,
                       nodata_rule: Literal["error", "dominant", "omit"] = "error",
                       max_nodata_fraction: float = 0.0, chunk_cells: int = 4_000_000,
                       ) -> tuple[pd.DataFrame, pd.DataFrame, list[str]]:
    """Unit areas when the soil or the cover (or both) is a polygon layer.

    Same arguments and results as :func:`gisrun.grid.overlay.compute_unit_areas`
    (``soil_codes``/``cover_codes`` are the code tables of a raster among the two;
    a polygon layer carries its labels). Gaps in a layer count as outside, polygons
    without a class as nodata.

    Raises
    ------
    RasterError
        As the raster overlay: nodata plus outside above the maximum, or a
        subcatchment with nothing to model it with.
    CRSError
        Subcatchments without a CRS.
    """
    _check_options(nodata_rule, max_nodata_fraction)
    if subcatchments.crs is None:
        raise CRSError("subcatchments", "have no CRS", "state the layer's CRS in the project file")
    notes: list[str] = []
    soil, cover = (x.subdivide() if isinstance(x, ClassPolygons) else x for x in (soil, cover))
    ids = subcatchments["subcatchment_id"].astype(str).to_numpy()
    ground = ground_areas(subcatchments.geometry)
    soil_labels = _labels(soil, soil_codes)
    cover_labels = [UNSPECIFIED_COVER] if cover is None else _labels(cover, cover_codes)
    raster = next((r for r in (soil, cover) if r is not None
                   and not isinstance(r, ClassPolygons)), None)
    if raster is None:
        sums = _vector_sums(subcatchments, soil, cover, soil_labels, cover_labels, notes)
    else:
        sums = _mixed_sums(subcatchments, soil, cover, raster, (soil_codes, cover_codes),
                           (soil_labels, cover_labels), chunk_cells, notes)
    first = soil if isinstance(soil, ClassPolygons) else cover
    layers = " and ".join(x.where for x in (soil, cover) if isinstance(x, ClassPolygons))
    sums = _note_gaps(sums, ids, ground.area_m2, layers, notes)
    shim = _Labels([(s, c) for s in soil_labels for c in cover_labels], first.where)
    try:
        units, coverage = _finish(ids, ground.area_m2, _summed(sums, len(shim.labels) + 2),
                                  shim, nodata_rule, max_nodata_fraction, notes)
    except RasterError as err:  # the same rule, told in a polygon layer's words
        raise RasterError(err.where, err.problem.replace("outside-raster", "outside-layer (gap)")
                          .replace("outside the rasters", "outside the layers (in gaps)"),
                          "draw polygons over the gaps, give unsurveyed polygons a class, or "
                          "raise the nodata maximum") from None
    return units, coverage.assign(area_method=ground.method), notes


def _note_gaps(sums: tuple[NDArray[Any], ...], ids: NDArray[Any], own_m2: NDArray[np.float64],
               where: str, notes: list[str]) -> tuple[NDArray[Any], ...]:
    """Say which subcatchments have ground in no polygon; the gaps then count as outside."""
    poly, cls, area = sums
    gap = np.bincount(poly[cls == _GAP], area[cls == _GAP], minlength=ids.size)
    found = gap > 1e-9 * own_m2
    if found.any():
        notes.append(f"{where}: {int(found.sum())} subcatchment(s) have ground in no polygon "
                     f"({gap[found].sum():.6g} m2 of gaps in all, e.g. "
                     f"{', '.join(map(str, ids[found][:5]))}); counted as outside under the "
                     "nodata rule (see coverage)")
    return poly, np.where(cls == _GAP, _OUTSIDE, cls), area


def _summed(sums: tuple[NDArray[Any], ...], n_classes: int) -> tuple[NDArray[Any], ...]:
    """One (subcatchment, class, m2) triple per pair: the pieces' areas added up."""
    poly, cls, area = sums
    key, inverse = np.unique(poly.astype(np.int64) * n_classes + cls, return_inverse=True)
    return key // n_classes, key % n_classes, np.bincount(inverse, area, minlength=key.size)


@dataclass(frozen=True)
class _Where:
    where: str


class _Labels:
    """What the overlay's finishing step reads from a grid: labels, unit area, a name."""

    cell_area_m2 = 1.0  # sums are in m2 already

    def __init__(self, labels: list[tuple[str, str]], where: str) -> None:
        self.labels, self.fine = labels, _Where(where)


def _labels(layer: ClassGrid | ClassPolygons, codes: dict[int, str] | None) -> list[str]:
    if isinstance(layer, ClassPolygons):
        return layer.classes
    return sorted(set((codes or {}).values()))


def _class_index(layer: ClassPolygons, labels: list[str]) -> NDArray[np.int64]:
    """Each feature's position in ``labels``; -1 for a feature without a class (nodata)."""
    pos = {label: i for i, label in enumerate(labels)}
    return np.array([-1 if v is None else pos[str(v)] for v in layer.labels], dtype=np.int64)


def _pieces(geoms: NDArray[np.object_], layer: ClassPolygons
            ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.object_]]:
    """(geometry index, feature index, intersection) for every pair that shares area."""
    if geoms.size == 0 or layer.geometry.size == 0:
        empty = np.zeros(0, np.int64)
        return empty, empty, np.zeros(0, dtype=object)
    b = shapely.bounds(geoms)
    lo, hi = np.nanmin(b[:, :2], axis=0), np.nanmax(b[:, 2:], axis=0)
    near = np.flatnonzero((layer.bounds[:, 0] <= hi[0]) & (layer.bounds[:, 2] >= lo[0])
                          & (layer.bounds[:, 1] <= hi[1]) & (layer.bounds[:, 3] >= lo[1]))
    tree = shapely.STRtree(layer.geometry[near])
    g, f = tree.query(geoms, predicate="intersects")
    cut = intersections(geoms[g], layer.geometry[near][f])
    keep = ~shapely.is_empty(cut) & (shapely.area(cut) > 0)
    return g[keep], near[f[keep]], cut[keep]


def _measure(geoms: NDArray[np.object_], crs: CRS) -> NDArray[np.float64]:
    """Area in m2 in the computation CRS (planar x unit squared; geodesic when geographic)."""
    if crs.is_geographic:
        return ground_areas(gpd.GeoSeries(geoms, crs=crs)).area_m2
    return np.asarray(shapely.area(geoms), dtype=np.float64) * linear_unit_m(crs) ** 2


def _in_crs(layer: ClassPolygons, crs: CRS, notes: list[str]) -> ClassPolygons:
    if layer.crs.equals(crs):
        return layer
    notes.append(f"{layer.where} transformed from {layer.crs.name} to {crs.name} for the "
                 "overlay")
    return layer.to_crs(crs)


def _vector_sums(subs: gpd.GeoDataFrame, soil: ClassPolygons, cover: ClassPolygons | None,
                 soil_labels: list[str], cover_labels: list[str], notes: list[str]
                 ) -> tuple[NDArray[Any], ...]:
    """(subcatchment, class, m2) triples when every class layer is polygons."""
    crs = CRS.from_user_input(subs.crs)
    geoms = subs.geometry.to_numpy()
    soil = _in_crs(soil, crs, notes)
    sub, feature, cut = _pieces(geoms, soil)
    soil_cls = _class_index(soil, soil_labels)[feature]
    area = _measure(cut, crs)
    parts = [_gaps(sub, area, _measure(geoms, crs), np.arange(geoms.size))]
    if cover is None:
        parts.append((sub, _combined(soil_cls, np.zeros_like(soil_cls), 1), area))
    else:
        cover = _in_crs(cover, crs, notes)
        piece, cfeature, cut2 = _pieces(cut, cover)
        area2 = _measure(cut2, crs)
        cover_cls = _class_index(cover, cover_labels)[cfeature]
        parts.append(_gaps(piece, area2, area, sub))  # cover gaps inside soil pieces
        parts.append((sub[piece], _combined(soil_cls[piece], cover_cls, len(cover_labels)),
                      area2))
    return tuple(np.concatenate(p) for p in zip(*parts, strict=True))


def _gaps(owner: NDArray[np.int64], cut_area: NDArray[np.float64],
          whole_area: NDArray[np.float64], whole_sub: NDArray[np.int64]
          ) -> tuple[NDArray[Any], ...]:
    """(subcatchment, gap, m2): the area of each whole its cut pieces leave uncovered.

    ``owner`` is each piece's whole (index into ``whole_area``); ``whole_sub`` each
    whole's subcatchment. Overlapping polygons can cover more than the whole: no gap.
    """
    covered = np.bincount(owner, cut_area, minlength=whole_area.size)
    gap = np.maximum(whole_area - covered, 0.0)
    return whole_sub, np.full(whole_area.size, _GAP, dtype=np.int64), gap


def _combined(soil_cls: NDArray[np.int64], cover_cls: NDArray[np.int64], n_cover: int
              ) -> NDArray[np.int64]:
    """Soil-major class index (2..), or nodata where either class is missing (-1)."""
    return np.where((soil_cls < 0) | (cover_cls < 0), _NODATA, soil_cls * n_cover + cover_cls + 2)


def _mixed_sums(subs: gpd.GeoDataFrame, soil: ClassGrid | ClassPolygons,
                cover: ClassGrid | ClassPolygons | None, raster: ClassGrid,
                codes: tuple[dict[int, str] | None, ...], labels: tuple[list[str], list[str]],
                chunk_cells: int, notes: list[str]) -> tuple[NDArray[Any], ...]:
    """(subcatchment, class, m2) triples when one class layer is polygons, the other a raster.

    The subcatchments are cut by the polygons; the raster's exact coverage of each piece
    (the raster overlay's scan, in the raster's CRS and cell areas) splits it by the
    raster's classes.
    """
    raster_is_soil = raster is soil
    polygons = cover if raster_is_soil else soil
    grid = _Grid.build(raster, None, codes[0 if raster_is_soil else 1] or {}, None, notes)
    geoms = _to_grid_crs(subs.geometry, grid.crs, notes)
    polygons = _in_crs(polygons, grid.crs, notes)
    sub, feature, cut = _pieces(geoms, polygons)
    layer_cls = _class_index(polygons, labels[1 if raster_is_soil else 0])[feature]
    parts = [_gaps(sub, _measure(cut, grid.crs), _measure(geoms, grid.crs),
                   np.arange(geoms.size))]
    if cut.size:
        piece, raster_cls, cells = _class_sums(shapely.orient_polygons(cut), grid, chunk_cells)
        r = raster_cls - 2
        n_cover = len(labels[1])
        combined = (_combined(r, layer_cls[piece], n_cover) if raster_is_soil
                    else _combined(layer_cls[piece], r, n_cover))
        combined = np.where(raster_cls == _OUTSIDE, _OUTSIDE,
                            np.where(raster_cls == _NODATA, _NODATA, combined))
        parts.append((sub[piece], combined, cells * grid.cell_area_m2))
    return tuple(np.concatenate(p) for p in zip(*parts, strict=True))


def layer_overlaps(layer: ClassPolygons) -> pd.DataFrame:
    """Every pair of the layer's polygons whose interiors share area beyond digitising noise.

    Returns
    -------
    DataFrame
        ``feature_id``, ``other_id``, ``overlap_area_m2`` (in the layer's CRS,
        geodesic when geographic) and ``overlap_fraction`` (of the smaller of the
        two), largest area first; shares at or below :data:`OVERLAP_NOISE` left out.
    """
    geoms = layer.geometry
    tree = shapely.STRtree(geoms)
    i, j = tree.query(geoms, predicate="intersects")
    keep = i < j
    i, j = i[keep], j[keep]
    shared = polygonal(shapely.intersection(geoms[i], geoms[j]))
    area = _measure(shared, layer.crs) if i.size else np.zeros(0)
    own = _measure(geoms, layer.crs)
    smaller = np.minimum(own[i], own[j])
    share = np.divide(area, smaller, out=np.zeros_like(area), where=smaller > 0)
    ids = layer.feature_ids
    out = pd.DataFrame({"feature_id": ids[i], "other_id": ids[j], "overlap_area_m2": area,
                        "overlap_fraction": share})
    out = out[out["overlap_fraction"] > OVERLAP_NOISE]
    return out.sort_values("overlap_area_m2", ascending=False, ignore_index=True)


def layer_gaps(subcatchments: gpd.GeoDataFrame, layer: ClassPolygons) -> NDArray[np.float64]:
    """Area (m2, in the subcatchments' CRS) of each subcatchment in no polygon of the layer."""
    crs = CRS.from_user_input(subcatchments.crs)
    geoms = subcatchments.geometry.to_numpy()
    sub, _, cut = _pieces(geoms, layer.to_crs(crs))
    whole = _measure(geoms, crs)
    gap = _gaps(sub, _measure(cut, crs), whole, np.arange(geoms.size))[2]
    return np.where(gap > 1e-9 * whole, gap, 0.0)  # rounding of the pieces' areas is no gap
