"""Geometry helpers of the polygon overlay: polygonal intersections and cutting large polygons.

Kept apart from :mod:`gisrun.grid.polygons` so each module stays short to read.
"""

from __future__ import annotations

import numpy as np
import shapely
from numpy.typing import NDArray

__all__ = ["MAX_VERTICES", "halved", "intersections", "polygonal"]

#: Largest number of vertices of a polygon piece in the overlay (``ClassPolygons.subdivide``):
#: 256 measured best on ``benchmarks/bench_polygons.py`` (traced soil and cover maps: pieces of
#: 64, 256, 1024 and uncut polygons gave 0.81, 0.84, 1.23 and 2.78 s with soil polygons alone,
#: 3.0, 2.7, 4.4 and 13.5 s with both layers as polygons).
MAX_VERTICES = 256
#: Most halvings of one polygon (2^20 pieces at the most).
_MAX_HALVINGS = 20


def halved(geoms: NDArray[np.object_]) -> tuple[NDArray[np.object_], NDArray[np.int64]]:
    """Pieces of at most MAX_VERTICES vertices, and the polygon each came from."""
    done_g, done_i = [], []
    todo_g, todo_i = geoms, np.arange(geoms.size)
    for _ in range(_MAX_HALVINGS):
        small = shapely.get_num_coordinates(todo_g) <= MAX_VERTICES
        done_g.append(todo_g[small])
        done_i.append(todo_i[small])
        todo_g, todo_i = todo_g[~small], todo_i[~small]
        if not todo_g.size:
            break
        x0, y0, x1, y1 = shapely.bounds(todo_g).T
        wide = (x1 - x0) >= (y1 - y0)
        xm, ym = np.where(wide, (x0 + x1) / 2, x1), np.where(wide, y1, (y0 + y1) / 2)
        first = shapely.box(x0, y0, xm, ym)
        second = shapely.box(np.where(wide, xm, x0), np.where(wide, y0, ym), x1, y1)
        cut = polygonal(shapely.intersection(np.concatenate([todo_g, todo_g]),
                                              np.concatenate([first, second])))
        keep = ~shapely.is_empty(cut) & (shapely.area(cut) > 0)
        todo_g, todo_i = cut[keep], np.concatenate([todo_i, todo_i])[keep]
    done_g.append(todo_g)
    done_i.append(todo_i)
    return np.concatenate(done_g), np.concatenate(done_i)


def intersections(a: NDArray[np.object_], b: NDArray[np.object_]) -> NDArray[np.object_]:
    """Polygonal part of ``a & b``, pair by pair.

    A piece wholly inside the other is taken as it is (a cheap prepared test instead of an
    overlay of both outlines).
    """
    shapely.prepare(a)
    inside = shapely.contains(a, b)
    cut = b.copy()
    rest = ~inside
    cut[rest] = polygonal(shapely.intersection(a[rest], b[rest]))
    return cut


def polygonal(geoms: NDArray[np.object_]) -> NDArray[np.object_]:
    """Only the polygonal part of each intersection (shared edges and corners dropped)."""
    mixed = np.flatnonzero(shapely.get_type_id(geoms) == 7)  # GeometryCollection
    if mixed.size:
        parts, index = shapely.get_parts(geoms[mixed], return_index=True)
        areal = np.isin(shapely.get_type_id(parts), [3, 6])
        geoms = geoms.copy()
        for k, i in enumerate(mixed):
            keep = parts[areal & (index == k)]
            geoms[i] = shapely.union_all(keep) if keep.size else shapely.Polygon()
    return geoms
