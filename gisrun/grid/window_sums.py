"""Area per (polygon, class) of polygons that share one class window, by the compiled kernel.

The overlay's path for every chunk of polygons whose joint window fits in a chunk (all but a
polygon larger than a chunk on its own, which :mod:`gisrun.grid.sparse_sums` reads in row
bands). The window is read once: for one raster of 8- or 16-bit codes, its codes and the table
from code to class (``FineGrid.class_source``), so no class window is made; otherwise the
classes. The rings' vertices go to :func:`gisrun.grid.overlay_kernels.polygon_class_sums` as
one coordinate array with ring and polygon offsets, and each polygon is summed in a buffer the
size of its own bounding window, so nothing is held per edge or per cell.

The shares are :func:`gisrun.grid.coverage.cell_coverage`'s, made with the same formulas; each
polygon is measured from the corner of its own cells and its rows are summed one by one (there:
from the window's corner, many polygons' rows in one running sum), so a share may differ in its
last bits: unit areas move by at most about 1e-15 of their subcatchment's area (measured on the
demo and the benchmark sets), and no longer depend on which polygons are summed together.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import shapely
from numpy.typing import NDArray

from .fine_grid import FineGrid
from .overlay_kernels import polygon_class_sums

__all__ = ["window_sums", "ring_arrays"]


def window_sums(geoms: NDArray[Any], box: NDArray[np.int64], grid: FineGrid,
                to_grid: tuple[float, float, float, float]) -> NDArray[np.float64]:
    """Covered area (cell units, or m2 on a geographic grid) per (polygon, class).

    Parameters
    ----------
    geoms : ndarray of shapely (Multi)Polygons
        The polygons in map coordinates (the grid's CRS), rings in any orientation.
    box : ndarray of int, shape (n, 4)
        Their boxes (r0, r1, c0, c1) in whole grid cells; the window read is their union.
    grid : FineGrid
    to_grid : (c, a, f, e)
        Map to grid coordinates: column ``(x - c) / a``, row ``(y - f) / e``
        (``(0, 1, 0, 1)`` for polygons in grid coordinates already).

    Returns
    -------
    ndarray, shape (n, grid.n_classes)
    """
    r0, r1 = int(box[:, 0].min()), int(box[:, 1].max())
    c0, c1 = int(box[:, 2].min()), int(box[:, 3].max())
    codes, table, look = grid.class_source(r0, r1, c0, c1)
    area = grid.row_weights(r0, r1)
    xy, ring_start, exterior, poly_ring = ring_arrays(geoms)
    return polygon_class_sums(xy, ring_start, exterior, poly_ring,
                              tuple(float(v) for v in to_grid), (c0, r0, r1 - r0, c1 - c0),
                              (np.ascontiguousarray(codes), table, look),
                              np.zeros(0) if area is None else np.asarray(area, np.float64),
                              grid.n_classes)


def ring_arrays(geoms: NDArray[Any]) -> tuple[NDArray[Any], ...]:
    """The polygons' rings as one vertex array with offsets, for the compiled kernel.

    Returns
    -------
    xy : ndarray, shape (n_vertices, 2)
        Every ring's vertices (closed), rings in order of polygon.
    ring_start : ndarray of int64, shape (n_rings + 1,)
    exterior : ndarray of bool, shape (n_rings,)
        Whether each ring is an exterior (the first ring of each part) or a hole.
    poly_ring : ndarray of int64, shape (n_polygons + 1,)
        Polygon ``i`` has rings ``poly_ring[i]:poly_ring[i + 1]``.
    """
    geoms = np.asarray(geoms, dtype=object)
    kinds = shapely.get_type_id(geoms)
    if np.all((kinds == 3) | (kinds == 6)):  # (multi)polygons: no ring objects made
        kind, xy, offsets = shapely.to_ragged_array(geoms)
        ring_start, part_ring = offsets[0], offsets[1]
        poly_part = offsets[2] if len(offsets) > 2 else np.arange(part_ring.size)
        poly_ring = part_ring[poly_part]
    else:  # empty or missing entries among them
        parts, part_poly = shapely.get_parts(geoms, return_index=True)
        rings, ring_part = shapely.get_rings(parts, return_index=True)
        xy = shapely.get_coordinates(rings)
        ring_start = np.r_[0, np.cumsum(shapely.get_num_coordinates(rings))]
        part_ring = np.searchsorted(ring_part, np.arange(parts.size + 1))
        poly_ring = part_ring[np.searchsorted(part_poly, np.arange(geoms.size + 1))]
    exterior = np.zeros(ring_start.size - 1, dtype=bool)
    exterior[part_ring[:-1][part_ring[:-1] < exterior.size]] = True
    return (np.ascontiguousarray(xy, dtype=np.float64), np.asarray(ring_start, np.int64),
            exterior, np.asarray(poly_ring, np.int64))
