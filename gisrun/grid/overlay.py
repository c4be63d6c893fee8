"""Exact overlay of subcatchment polygons on class rasters -> unit areas.

A *unit* is the part of one subcatchment on one soil class and one cover
class. Its area is exact at polygon edges: every raster cell contributes the
area of the cell the polygon covers, so edge cells count partly and polygons
smaller than a cell get their true area and the class under them.

Method
------
Polygon edges are cut at the grid's row lines; inside one row a straight edge
piece adds to each cell it crosses the exact area between the piece and the
cell's right side (x is linear in y, so this is a closed form), and adds its
whole height to every cell further right. A running sum along the row then
gives each cell's covered fraction exactly (the accumulation used by exact
area-coverage scan converters). Subcatchments are handled in spatially compact
chunks (along a Hilbert curve), each reading only its own class window. In a
chunk, a compiled kernel (:mod:`gisrun.grid.overlay_kernels`, through
:mod:`gisrun.grid.window_sums`) takes one polygon at a time: it walks the
rings' edges into a buffer the size of the polygon's bounding window, runs the
sums along each row over the cells the edges reached, and adds share x cell to
the polygon's sum of the cell's class; interior runs come out of the same sum.
Work grows with the boundary cells plus covered cells, memory with the chunk's
window and the largest polygon's. A polygon larger than a chunk on its own
stores only the cells an edge touches and counts interior cells as runs read
from the class raster in row bands (:mod:`gisrun.grid.sparse_sums`), so memory
does not grow with the raster. The two give the same areas up to the order of
float additions.

Two rasters (soil and cover) on different grids: the computation runs on the
finer grid (smaller cell); the coarser raster is sampled at each fine cell's
centre (nearest cell, never interpolated). When the grids share a CRS and the
coarse cell size and origin offset are whole multiples of the fine cell size,
each fine cell lies inside one coarse cell and the result is exact. Otherwise
the only error is that a fine cell straddling a coarse cell edge goes wholly
to the class at its centre: the area moved between classes is at most the
area of the fine cells cut by coarse cell edges, a share of about
``res_fine_x / res_coarse_x + res_fine_y / res_coarse_y`` of the area (each
subcatchment's total area stays exact).

Areas: polygons are transformed to the raster CRS (rasters are never resampled);
each subcatchment's unit areas measured on the grid are scaled to add up to its
ground area (:func:`gisrun.crs.ground_areas`; ``coverage.area_method``).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Literal

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from numpy.typing import NDArray
from pyproj import CRS

from ..crs import ground_areas
from ..errors import CRSError, InputError, RasterError
from ..options import NODATA_RULES
from .classes import ClassGrid
from .coverage import cell_coverage
from .fine_grid import NODATA_CLASS as _NODATA
from .fine_grid import OUTSIDE_CLASS as _OUTSIDE
from .fine_grid import UNSPECIFIED_COVER
from .fine_grid import FineGrid as _Grid
from .fine_grid import combined_table as _combined_table  # noqa: F401 - kept importable here
from .fine_grid import lookup_classes as _lookup  # noqa: F401 - kept importable here
from .fine_grid import note_alignment as _note_alignment  # noqa: F401 - kept importable here
from .overlay_kernels import chunk_starts
from .sparse_sums import painted_counts as _painted_counts  # noqa: F401 - kept importable here
from .sparse_sums import run_sums as _run_sums  # noqa: F401 - kept importable here
from .sparse_sums import sparse_chunk_sums as _chunk_sums
from .window_sums import window_sums

__all__ = ["compute_unit_areas", "UNSPECIFIED_COVER"]


def compute_unit_areas(subcatchments: gpd.GeoDataFrame, soil: ClassGrid,
                       cover: ClassGrid | None = None, *, soil_codes: Mapping[int, str],
                       cover_codes: Mapping[int, str] | None = None,
                       nodata_rule: Literal["error", "dominant", "omit"] = "error",
                       max_nodata_fraction: float = 0.0, chunk_cells: int = 4_000_000,
                       ) -> tuple[pd.DataFrame, pd.DataFrame, list[str]]:
    """Area of every subcatchment x soil class x cover class, exact at polygon edges.

    Parameters
    ----------
    subcatchments : geopandas.GeoDataFrame
        ``subcatchment_id`` and polygon geometry, with a CRS.
    soil, cover : ClassRaster
        Class rasters (``cover`` optional: then every unit's cover is ``"unspecified"``).
    soil_codes, cover_codes : mapping of int to str
        Raster code -> class label. Codes not in the table count as nodata.
    nodata_rule : {"error", "dominant", "omit"}
        What happens to nodata and outside-the-raster area: ``"dominant"`` adds
        it to the subcatchment's largest unit, ``"omit"`` and ``"error"`` leave it
        out (the units then sum to less than the subcatchment).
    max_nodata_fraction : float
        Largest allowed (nodata + outside) share of a subcatchment, 0-1; above
        it a ``RasterError`` names the subcatchments, whatever the rule.
    chunk_cells : int
        Raster cells read at once (bounds memory).

    Returns
    -------
    units : pandas.DataFrame
        ``subcatchment_id``, ``soil_class``, ``cover_class``, ``area_m2``.
    coverage : pandas.DataFrame
        ``subcatchment_id``, ``area_m2`` (ground area), ``covered_area_m2``,
        ``nodata_area_m2``, ``outside_area_m2``, ``nodata_fraction``,
        ``area_method`` (``"planar"`` or ``"ellipsoidal"``).
    notes : list of str
        What was done that a user should know (CRS transform, filled nodata).

    Raises
    ------
    RasterError
        A subcatchment above ``max_nodata_fraction``, or one wholly outside the
        rasters or on nodata, under any rule: nothing to model it with.
    CRSError
        Soil and cover rasters in different CRSs, or polygons without a CRS.
    InputError
        Unknown ``nodata_rule`` or a fraction outside 0-1.
    """
    _check_options(nodata_rule, max_nodata_fraction)
    notes: list[str] = []
    grid = _Grid.build(soil, cover, soil_codes, cover_codes, notes)
    ids = subcatchments["subcatchment_id"].astype(str).to_numpy()
    ground = ground_areas(subcatchments.geometry)
    geoms = _in_grid_crs(subcatchments.geometry, grid.crs, notes)
    sums = _class_sums(geoms, grid, chunk_cells)  # (poly, class, cell units) triples
    units, coverage = _finish(ids, ground.area_m2, sums, grid, nodata_rule,
                              max_nodata_fraction, notes)
    return units, coverage.assign(area_method=ground.method), notes


def _check_options(rule: str, fraction: float) -> None:
    if rule not in NODATA_RULES:
        raise InputError(f"nodata rule {rule!r}", "is not a rule",
                         f"use one of {list(NODATA_RULES)}")
    if not 0.0 <= fraction <= 1.0:
        raise InputError(f"max nodata fraction {fraction!r}", "is outside 0-1", "give a share 0-1")


def _to_grid_crs(geoms: gpd.GeoSeries, crs: CRS, notes: list[str]) -> NDArray[Any]:
    return shapely.orient_polygons(_in_grid_crs(geoms, crs, notes))


def _in_grid_crs(geoms: gpd.GeoSeries, crs: CRS, notes: list[str]) -> NDArray[Any]:
    """The polygons in the grid's CRS (the same objects when it is theirs already)."""
    if geoms.crs is None:
        raise CRSError("subcatchments", "have no CRS", "state the layer's CRS in the project file")
    if not CRS.from_user_input(geoms.crs).equals(crs):
        notes.append(f"subcatchments transformed from {CRS.from_user_input(geoms.crs).name} "
                     f"to the raster CRS {crs.name} for the overlay; unit areas scaled so each "
                     "subcatchment keeps its ground area")
        geoms = geoms.to_crs(crs)
    return geoms.to_numpy()


def _class_sums(geoms: NDArray[Any], grid: _Grid, chunk_cells: int) -> tuple[NDArray[Any], ...]:
    """(polygon, class, area in cell units or m2) for every non-zero pair.

    ``geoms`` are in the grid's CRS, rings in any orientation; they go to grid
    coordinates vertex by vertex as they are summed, with no moved copy kept.
    """
    t = grid.t
    b = shapely.bounds(geoms)
    xs, ys = (b[:, [0, 2]] - t.c) / t.a, (b[:, [1, 3]] - t.f) / t.e  # each exact per vertex
    box = np.column_stack([np.floor(ys.min(axis=1)), np.ceil(ys.max(axis=1)),
                           np.floor(xs.min(axis=1)), np.ceil(xs.max(axis=1))]).astype(np.int64)
    to_grid = (t.c, t.a, t.f, t.e)
    centres = shapely.points(xs.mean(axis=1), ys.mean(axis=1))  # box centres: the order only
    out: list[tuple[NDArray[Any], ...]] = []
    for idx in _compact_chunks(centres, box, chunk_cells):
        if idx.size == 0:  # no polygons at all
            local = np.zeros((0, grid.n_classes))
        elif idx.size == 1 and np.prod(np.diff(box[idx[0]].reshape(2, 2))) > chunk_cells:
            local = _sparse_sums(_grid_coords(geoms[idx], t), box[idx], grid, chunk_cells)
        else:
            local = window_sums(geoms[idx], box[idx], grid, to_grid)
        poly, cls = np.nonzero(local)
        out.append((idx[poly], cls, local[poly, cls]))
    return tuple(np.concatenate(parts) for parts in zip(*out, strict=True))


def _grid_coords(geoms: NDArray[Any], t: Any) -> NDArray[Any]:
    """Geometries moved to grid coordinates (column, row) of the transform ``t``."""
    return shapely.transform(geoms, lambda xy: np.column_stack(((xy[:, 0] - t.c) / t.a,
                                                                 (xy[:, 1] - t.f) / t.e)))


def _sparse_sums(px: NDArray[Any], box: NDArray[np.int64], grid: _Grid, chunk_cells: int
                 ) -> NDArray[np.float64]:
    r0, r1 = box[:, 0].min(), box[:, 1].max()
    c0, c1 = box[:, 2].min(), box[:, 3].max()
    cov = cell_coverage(px, origin=(float(c0), float(r0)))
    return _chunk_sums(cov, grid, len(px), (int(r0), int(r1), int(c0), int(c1)), chunk_cells)


def _compact_chunks(centres: NDArray[Any], box: NDArray[np.int64],
                    chunk_cells: int) -> list[NDArray[Any]]:
    """Polygons grouped along a Hilbert curve so that each group's window stays small.

    ``centres``: a point per polygon (its centroid, or its box's centre), in grid
    coordinates; ``box``: its (r0, r1, c0, c1). Consecutive polygons join a group while
    the group's joint window stays within ``chunk_cells``; a polygon larger than that on
    its own is a group of one.
    """
    hilbert = np.asarray(gpd.GeoSeries(centres).hilbert_distance())
    order = hilbert.argsort(kind="stable")
    return np.split(order, chunk_starts(np.ascontiguousarray(box[order], dtype=np.int64),
                                        chunk_cells))


def _finish(ids: NDArray[Any], own_m2: NDArray[np.float64], sums: tuple[NDArray[Any], ...],
            grid: _Grid, rule: str, max_fraction: float, notes: list[str]
            ) -> tuple[pd.DataFrame, pd.DataFrame]:
    poly, cls, area = sums
    area = area * grid.cell_area_m2
    total = np.bincount(poly, area, minlength=ids.size)
    scale = np.divide(own_m2, total, out=np.zeros_like(own_m2), where=total > 0)
    area = area * scale[poly]  # the grid's planar measure -> the ground area
    outside = np.bincount(poly, np.where(cls == _OUTSIDE, area, 0.0), minlength=ids.size)
    nodata = np.bincount(poly, np.where(cls == _NODATA, area, 0.0), minlength=ids.size)
    missing = outside + nodata
    fraction = np.divide(missing, own_m2, out=np.ones_like(own_m2), where=own_m2 > 0)
    coverage = pd.DataFrame({"subcatchment_id": ids, "area_m2": own_m2,
                             "covered_area_m2": own_m2 - missing, "nodata_area_m2": nodata,
                             "outside_area_m2": outside, "nodata_fraction": fraction})
    _check_fraction(ids, fraction, max_fraction, grid)
    keep = (cls >= 2) & (area > 1e-9 * own_m2[poly])
    poly, cls, area = poly[keep], cls[keep] - 2, area[keep]
    missing = np.where(missing > 1e-9 * own_m2, missing, 0.0)
    empty = np.setdiff1d(np.flatnonzero(missing > 0), poly)
    if empty.size:  # wholly outside or on nodata: nothing to model (it would get no rain)
        raise RasterError(grid.fine.where, f"subcatchment(s) {', '.join(map(str, ids[empty][:10]))}"
                          f" lie wholly outside the rasters or on nodata, so nodata rule {rule!r}"
                          " has no soil and cover to model them with", "extend the rasters over "
                          "them or remove them from the subcatchment layer")
    if rule == "dominant":
        area = _fill_dominant(poly, area, missing, ids, notes)
    elif missing.any():
        notes.append(f"{int(np.count_nonzero(missing))} subcatchment(s) have nodata or "
                     "outside-raster area left out of their units (see coverage)")
    labels = np.array(grid.labels, dtype=object).reshape(-1, 2)
    units = pd.DataFrame({"subcatchment_id": ids[poly], "soil_class": labels[cls, 0],
                          "cover_class": labels[cls, 1], "area_m2": area})
    units = units.sort_values(["subcatchment_id", "soil_class", "cover_class"], ignore_index=True)
    return units, coverage


def _check_fraction(ids: NDArray[Any], fraction: NDArray[np.float64], max_fraction: float,
                    grid: _Grid) -> None:
    over = fraction > max_fraction + 1e-9
    if not over.any():
        return
    worst = [f"{i} ({f:.1%})" for i, f in zip(ids[over][:10], fraction[over][:10], strict=True)]
    raise RasterError(f"{grid.fine.where}", f"nodata or outside-raster share above "
                      f"{max_fraction:.1%} in subcatchments {', '.join(worst)}",
                      "extend or fill the raster, fix the code table, or raise the nodata maximum")


def _fill_dominant(poly: NDArray[Any], area: NDArray[np.float64], missing: NDArray[np.float64],
                   ids: NDArray[Any], notes: list[str]) -> NDArray[np.float64]:
    """Give each subcatchment's missing area to its largest unit."""
    if poly.size == 0:
        return area
    order = np.lexsort((-area, poly))  # largest unit of each subcatchment first
    first = order[np.r_[True, poly[order][1:] != poly[order][:-1]]]
    area = area.copy()
    area[first] += missing[poly[first]]
    filled = np.intersect1d(poly[first], np.flatnonzero(missing > 0))
    if filled.size:
        notes.append(f"nodata or outside-raster area of {filled.size} subcatchment(s) given to "
                     f"their dominant unit (e.g. {', '.join(map(str, ids[filled][:5]))})")
    return area
