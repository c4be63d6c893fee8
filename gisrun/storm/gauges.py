"""Areal weights of rain gauges over subcatchment polygons, and filling a gauge's gaps (SI).

Two published weightings, both as a matrix ``W`` (subcatchments x gauges, rows adding up to 1)
that :func:`gisrun.storm.weighted_mean` applies to the gauges' depths:

- **Thiessen polygons** (Thiessen 1911): each gauge stands for the area nearer to it than to any
  other gauge (its Voronoi cell, ``shapely.voronoi_polygons``); a subcatchment's weight of a
  gauge is the share of the polygon's area inside that gauge's cell, by exact polygon
  intersection (``shapely.intersection``), not by counting cells of a grid.
- **Inverse-distance weighting** (Shepard 1968): weight ``d^-p / sum(d^-p)`` with ``d`` the
  distance from the subcatchment polygon's centroid to each gauge and ``p`` the stated power
  (2 by default, Shepard's choice); a gauge on the centroid takes the whole weight.

Coordinates must be planar (a projected CRS, metres or feet alike: only ratios of areas and of
distances matter). :func:`fill_gaps` fills a gauge's missing steps from the gauges that have
them, by the same weighting seen from the gauge's own location: Thiessen takes the nearest gauge
with data (the Thiessen estimate at a point), inverse distance the inverse-distance mean.

References
----------
.. [1] Thiessen, A. H. (1911), Precipitation averages for large areas, Monthly Weather Review
   39(7), 1082-1084.
.. [2] Shepard, D. (1968), A two-dimensional interpolation function for irregularly-spaced
   data, Proceedings of the 1968 23rd ACM National Conference, 517-524.

Rainfall feeds planning-level runoff estimates only; defer to local codes, agency methods and a
licensed engineer.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import shapely
from numpy.typing import NDArray

from ..errors import StormError
from .timing import FloatArray

__all__ = ["thiessen_cells", "thiessen_weights", "inverse_distance_weights", "fill_gaps",
           "gauge_weights"]

Geometries = NDArray[np.object_]


def thiessen_cells(gauges: Geometries, ids: Sequence[str], extent: shapely.Geometry
                   ) -> Geometries:
    """Each gauge's Thiessen (Voronoi) cell, clipped to a box around ``extent``, gauge order.

    Raises
    ------
    StormError
        If two gauges stand at the same place (their cells are not defined).
    """
    xy = shapely.get_coordinates(gauges)
    _check_distinct(xy, ids)
    minx, miny, maxx, maxy = shapely.bounds(shapely.union_all([extent, *gauges]))
    pad = max(maxx - minx, maxy - miny, 1.0)
    frame = shapely.box(minx - pad, miny - pad, maxx + pad, maxy + pad)
    if len(gauges) == 1:
        return np.array([frame], dtype=object)
    parts = shapely.get_parts(shapely.voronoi_polygons(shapely.multipoints(xy), extend_to=frame))
    cell_of, gauge_of = shapely.STRtree(parts).query(gauges, predicate="within")[::-1]
    cells = np.empty(len(gauges), dtype=object)
    cells[gauge_of] = shapely.intersection(parts[cell_of], frame)
    return cells


def thiessen_weights(gauges: Geometries, ids: Sequence[str], polygons: Geometries
                     ) -> FloatArray:
    """Thiessen weights (subcatchments x gauges): area share of each polygon in each cell.

    Raises
    ------
    StormError
        If two gauges share a place, or a polygon has no area.
    """
    cells = thiessen_cells(gauges, ids, shapely.union_all(shapely.envelope(polygons)))
    shares = np.zeros((len(polygons), len(gauges)))
    tree = shapely.STRtree(polygons)
    for g, cell in enumerate(cells):
        rows = tree.query(cell, predicate="intersects")
        if rows.size:
            shares[rows, g] = shapely.area(shapely.intersection(polygons[rows], cell))
    total = shares.sum(axis=1)
    if np.any(total <= 0):
        raise StormError("subcatchments", f"polygon {int(np.argmax(total <= 0)) + 1} has no "
                         "area to weigh gauges over", "repair or remove empty polygons")
    return shares / total[:, None]


def inverse_distance_weights(gauges: Geometries, polygons: Geometries, power: float
                             ) -> FloatArray:
    """Inverse-distance weights (subcatchments x gauges) from each polygon's centroid."""
    centre = shapely.get_coordinates(shapely.centroid(polygons))
    return _idw(_distances(centre, shapely.get_coordinates(gauges)), power)


def gauge_weights(weighting: str, gauges: Geometries, ids: Sequence[str], polygons: Geometries,
                  power: float) -> FloatArray:
    """``thiessen_weights`` or ``inverse_distance_weights`` by the weighting's name."""
    if weighting == "thiessen":
        return thiessen_weights(gauges, ids, polygons)
    return inverse_distance_weights(gauges, polygons, power)


def fill_gaps(depth_m: FloatArray, gauges: Geometries, ids: Sequence[str], weighting: str,
              power: float) -> tuple[FloatArray, list[str]]:
    """Fill NaN steps of each gauge from the gauges with data, by the same weighting.

    Parameters
    ----------
    depth_m : ndarray, shape (steps, gauges)
        Depth per step and gauge, NaN where missing.

    Returns
    -------
    filled : ndarray
        ``depth_m`` with every NaN filled.
    notes : list of str
        One per gauge filled: how many steps, from what.

    Raises
    ------
    StormError
        If no gauge has data in some step.
    """
    missing = np.isnan(depth_m)
    none = np.flatnonzero(missing.all(axis=1))
    if none.size:
        raise StormError("gauge records", f"no gauge has rain in step {none[0] + 1}",
                         "give at least one gauge's rain in every step")
    xy = shapely.get_coordinates(gauges)
    dist = _distances(xy, xy)
    filled, notes = depth_m.copy(), []
    for g in np.flatnonzero(missing.any(axis=0)):
        steps = np.flatnonzero(missing[:, g])
        have = ~missing[steps]
        have[:, g] = False
        if weighting == "thiessen":
            near = np.where(have, dist[g][None, :], np.inf)
            filled[steps, g] = depth_m[steps, np.argmin(near, axis=1)]
            how = "the nearest gauge with data (Thiessen)"
        else:
            w = _idw(np.where(have, dist[g][None, :], np.inf), power)
            filled[steps, g] = (w * np.nan_to_num(depth_m[steps])).sum(axis=1)
            how = f"the inverse-distance mean of the others (power {power:g})"
        notes.append(f"gauge {ids[g]!r}: {steps.size} missing step(s) filled from {how}")
    return filled, notes


def _distances(a: FloatArray, b: FloatArray) -> FloatArray:
    return np.hypot(a[:, None, 0] - b[None, :, 0], a[:, None, 1] - b[None, :, 1])


def _idw(dist: FloatArray, power: float) -> FloatArray:
    """Shepard weights per row of distances (inf: left out); a gauge at d = 0 takes it all.

    Distances are divided by the row's nearest before the power, so the weights cannot all
    underflow to zero (metres to the power 400, or km to the power 100, would) nor overflow:
    the nearest gauge weighs 1 and the others less, the same ratios as ``d^-p``.
    """
    on = dist == 0.0
    near = dist.min(axis=1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(on, 0.0, (dist / near) ** -power)
    w = np.where(on.any(axis=1, keepdims=True), on.astype(float), w)
    return w / w.sum(axis=1, keepdims=True)


def _check_distinct(xy: FloatArray, ids: Sequence[str]) -> None:
    _, first, inverse = np.unique(xy, axis=0, return_index=True, return_inverse=True)
    inverse = np.asarray(inverse).reshape(-1)
    same = np.flatnonzero(first[inverse] != np.arange(len(xy)))
    if same.size:
        k = int(same[0])
        raise StormError("gauges", f"gauges {ids[int(first[inverse[k]])]!r} and {ids[k]!r} stand "
                         "at the same place", "give each gauge its own location, or merge them")
