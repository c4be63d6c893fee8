"""One CRS funnel and one area rule.

Every coordinate reference system that enters gisrun goes through
:func:`checked_crs`, and every polygon area in square metres comes from
:func:`polygon_area_m2`: planar area times the square of the CRS's linear unit
for a projected CRS, geodesic area on the CRS's ellipsoid for a geographic
one (never planar area in degrees).

Examples
--------
>>> import geopandas as gpd
>>> from shapely.geometry import box
>>> gs = gpd.GeoSeries([box(0, 0, 100, 50)], crs="EPSG:32617")
>>> polygon_area_m2(gs).tolist()
[5000.0]
>>> feet = gpd.GeoSeries([box(0, 0, 1000, 1000)], crs="EPSG:2236")  # US survey feet
>>> round(float(polygon_area_m2(feet)[0]))
92903
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely
from numpy.typing import NDArray
from pyproj import CRS
from pyproj.exceptions import CRSError as _PyprojCRSError

from .errors import CRSError

__all__ = [
    "checked_crs",
    "polygon_area_m2",
    "linear_unit_m",
    "geodesic_cell_area_m2",
    "CellCoverage",
    "cell_coverage",
]


def checked_crs(crs_like: object, where: str, *, stated: object = None) -> CRS:
    """Normalise a CRS once, or stop if there is none.

    Parameters
    ----------
    crs_like : object
        The CRS found in the data (anything ``pyproj.CRS.from_user_input``
        accepts, a rasterio CRS, or ``None``).
    where : str
        File or layer the CRS belongs to, used in error messages.
    stated : object, optional
        The CRS the user stated, used only when ``crs_like`` is ``None``.

    Returns
    -------
    pyproj.CRS

    Raises
    ------
    CRSError
        If there is no CRS and none is stated, or the CRS cannot be understood.
    """
    if crs_like is None and stated is None:
        raise CRSError(where, "has no CRS", "state the layer's CRS in the project file (crs = ...)")
    given = crs_like if crs_like is not None else stated
    if hasattr(given, "to_wkt") and not isinstance(given, CRS):
        given = given.to_wkt()  # rasterio and other CRS objects
    try:
        return CRS.from_user_input(given)
    except _PyprojCRSError as err:
        raise CRSError(where, f"CRS {given!r} is not understood ({err})",
                       "give an EPSG code such as 'EPSG:32617' or a WKT string") from None


def linear_unit_m(crs: CRS) -> float:
    """Return the length of one unit of a projected CRS's x axis in metres."""
    return float(crs.axis_info[0].unit_conversion_factor)


def polygon_area_m2(geoms: object) -> NDArray[np.float64]:
    """Area of each polygon in square metres, decided by its CRS.

    Parameters
    ----------
    geoms : geopandas.GeoSeries
        Polygons with a CRS.

    Returns
    -------
    ndarray of float64
        Projected CRS: planar area times the x-axis unit factor squared.
        Geographic CRS: geodesic area on the CRS's ellipsoid (pyproj ``Geod``).

    Raises
    ------
    CRSError
        If the series has no CRS.
    """
    crs = getattr(geoms, "crs", None)
    if crs is None:
        raise CRSError("polygons", "have no CRS", "set a CRS before computing areas")
    crs = CRS.from_user_input(crs)
    if crs.is_geographic:  # never planar area in degrees
        geod = crs.get_geod()
        return np.abs(np.array([geod.geometry_area_perimeter(g)[0] if g is not None else 0.0
                                for g in geoms], dtype=np.float64))
    return np.asarray(geoms.area, dtype=np.float64) * linear_unit_m(crs) ** 2


def geodesic_cell_area_m2(crs: CRS, west: float, east: float,
                          north: NDArray[np.float64], south: NDArray[np.float64]
                          ) -> NDArray[np.float64]:
    """Geodesic area of longitude-latitude cells spanning ``west``-``east`` per row.

    Parameters
    ----------
    crs : pyproj.CRS
        A geographic CRS (its ellipsoid is used).
    west, east : float
        Longitude bounds of one cell, degrees.
    north, south : ndarray
        Latitude bounds of each row's cells, degrees.

    Returns
    -------
    ndarray of float64
        Area of one cell in each row, m2.
    """
    geod = crs.get_geod()
    out = np.empty(len(north), dtype=np.float64)
    for i, (n, s) in enumerate(zip(north, south, strict=True)):
        area, _ = geod.polygon_area_perimeter([west, east, east, west], [s, s, n, n])
        out[i] = abs(area)
    return out


@dataclass(frozen=True)
class CellCoverage:
    """Exact cover of grid cells by polygons, stored sparsely.

    Grid coordinates: column ``x`` and row ``y`` run along the cell index, cell
    ``(row, col)`` spans ``[col, col + 1] x [row, row + 1]``. Arrays are sorted
    by row.

    Attributes
    ----------
    poly, row, col, fraction : ndarray
        Cells touched by a polygon edge and the share of each covered by the
        polygon (0-1; area in cell units).
    run_poly, run_row, run_start, run_stop, run_weight : ndarray
        Runs of cells ``run_start <= col < run_stop`` touched by no edge, and
        the share of each covered: 1 inside a polygon, a fraction in rows
        that a horizontal edge cuts.
    """

    poly: NDArray[np.int64]
    row: NDArray[np.int64]
    col: NDArray[np.int64]
    fraction: NDArray[np.float64]
    run_poly: NDArray[np.int64]
    run_row: NDArray[np.int64]
    run_start: NDArray[np.int64]
    run_stop: NDArray[np.int64]
    run_weight: NDArray[np.float64]


def cell_coverage(geoms: NDArray[Any], origin: tuple[float, float] = (0.0, 0.0)) -> CellCoverage:
    """Exact area of every grid cell covered by each polygon (grid coordinates).

    Each edge is cut at the row lines. Within a row, a straight piece from
    ``x_a`` to ``x_b`` with signed height ``dy`` covers, in cell ``c``, the area
    ``dy * (E(c + 1) - E(c))`` to its right, where ``E(u)`` is the mean of
    ``max(u - x, 0)`` along the piece (x is linear, so ``E`` is piecewise
    quadratic). The second difference of that sequence is non-zero only in the
    cells the piece crosses and the next one, so the pieces are stored there
    and a running sum along each row recovers every cell's cover exactly.

    Parameters
    ----------
    geoms : ndarray of shapely (Multi)Polygons
        Polygons in grid coordinates (column, row).
    origin : tuple of float
        (col, row) subtracted from every coordinate; returned rows and columns
        are relative to it.

    Returns
    -------
    CellCoverage

    Examples
    --------
    >>> from shapely import box
    >>> cov = cell_coverage(np.array([box(0.5, 0, 4, 1)]))  # x 0.5-4 over row 0
    >>> cov.col.tolist(), cov.fraction.tolist()  # half of cell 0; cell 1 touched by no edge
    ([0, 1], [0.5, 1.0])
    >>> cov.run_start.tolist(), cov.run_stop.tolist()  # cells 2 and 3 wholly inside
    ([2], [4])
    """
    x0, y0, x1, y1, poly = _edges(geoms, origin)
    piece_poly, row, dy, xmin, xmax = _row_pieces(x0, y0, x1, y1, poly)
    p, r, c, acc = _cell_increments(piece_poly, row, dy, xmin, xmax)
    return _running_sums(p, r, c, acc, n_poly=len(geoms))


def _edges(geoms: NDArray[Any], origin: tuple[float, float]) -> tuple[NDArray[Any], ...]:
    geoms = shapely.orient_polygons(np.asarray(geoms, dtype=object), exterior_cw=True)
    parts, part_poly = shapely.get_parts(geoms, return_index=True)
    rings, ring_part = shapely.get_rings(parts, return_index=True)
    xy, ring_of = shapely.get_coordinates(rings, return_index=True)
    xy = xy - np.asarray(origin, dtype=np.float64)
    same = ring_of[1:] == ring_of[:-1]
    a, b = xy[:-1][same], xy[1:][same]
    poly = part_poly[ring_part[ring_of[:-1][same]]]
    return a[:, 0], a[:, 1], b[:, 0], b[:, 1], poly.astype(np.int64)


def _row_pieces(x0: NDArray[Any], y0: NDArray[Any], x1: NDArray[Any], y1: NDArray[Any],
                poly: NDArray[Any]) -> tuple[NDArray[Any], ...]:
    keep = y0 != y1  # horizontal edges cover nothing
    x0, y0, x1, y1, poly = x0[keep], y0[keep], x1[keep], y1[keep], poly[keep]
    ylo, yhi = np.minimum(y0, y1), np.maximum(y0, y1)
    rlo = np.floor(ylo).astype(np.int64)
    n = np.ceil(yhi).astype(np.int64) - rlo
    edge, k = _expand(n)
    row = rlo[edge] + k
    lo, hi = np.maximum(ylo[edge], row), np.minimum(yhi[edge], row + 1)
    slope = (x1 - x0) / (y1 - y0)
    ex0, ey0 = x0[edge], y0[edge]
    xa, xb = ex0 + (lo - ey0) * slope[edge], ex0 + (hi - ey0) * slope[edge]
    left, right = np.minimum(x0, x1)[edge], np.maximum(x0, x1)[edge]
    xmin = np.clip(np.minimum(xa, xb), left, right)
    xmax = np.clip(np.maximum(xa, xb), left, right)
    dy = (hi - lo) * np.sign(y1 - y0)[edge]
    return poly[edge], row, dy, xmin, xmax


def _expand(n: NDArray[np.int64]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Item index repeated n times, and 0..n-1 within each item."""
    owner = np.repeat(np.arange(n.size), n)
    starts = np.cumsum(n) - n
    return owner, np.arange(owner.size) - starts[owner]


def _cell_increments(poly: NDArray[Any], row: NDArray[Any], dy: NDArray[Any],
                     xmin: NDArray[Any], xmax: NDArray[Any]) -> tuple[NDArray[Any], ...]:
    cmin = np.floor(xmin).astype(np.int64)
    n = np.floor(xmax).astype(np.int64) - cmin + 2  # crossed cells and the next one
    piece, k = _expand(n)
    col = cmin[piece] + k
    lo, width = xmin[piece], (xmax - xmin)[piece]
    v = (col - lo).astype(np.float64)  # u - xmin for u = col
    second = _mean_excess(v + 1, width) - 2 * _mean_excess(v, width) + _mean_excess(v - 1, width)
    return poly[piece], row[piece], col, dy[piece] * second


def _mean_excess(v: NDArray[np.float64], width: NDArray[np.float64]) -> NDArray[np.float64]:
    """Mean of max(v - s, 0) for s uniform on [0, width] (width may be 0)."""
    inside = (v > 0) & (v < width)
    quad = np.divide(v * v, 2 * width, out=np.zeros_like(v), where=inside)
    return np.where(v >= width, v - width / 2, quad)


def _running_sums(p: NDArray[Any], r: NDArray[Any], c: NDArray[Any], acc: NDArray[Any],
                  n_poly: int) -> CellCoverage:
    if p.size == 0:
        e = np.zeros(0, np.int64)
        return CellCoverage(e, e, e, np.zeros(0), e, e, e, e, np.zeros(0))
    r0, c0 = r.min(), c.min()
    n_col = int(c.max() - c0 + 1)
    n_group = int(r.max() - r0 + 1) * max(n_poly, 1)
    group = (r - r0) * n_poly + p
    if n_group * n_col < 2**62:
        key = group * n_col + (c - c0)
        order = np.argsort(key, kind="stable")  # edges arrive nearly sorted by row
        key = key[order]
        first = np.flatnonzero(np.r_[True, key[1:] != key[:-1]])
        acc = np.add.reduceat(acc[order], first)
        key = key[first]
        group, c = key // n_col, key % n_col + c0
        p, r = group % n_poly, group // n_poly + r0
    else:
        order = np.lexsort((c, p, r))
        first = np.flatnonzero(np.r_[True, (np.diff(group[order]) != 0) | (np.diff(c[order]) != 0)])
        acc = np.add.reduceat(acc[order], first)
        p, r, c, group = p[order][first], r[order][first], c[order][first], group[order][first]
    running = np.cumsum(acc)
    start = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
    before = np.r_[0.0, running][start]  # running sum before each group
    cover = running - np.repeat(before, np.diff(np.r_[start, group.size]))
    nxt_same = np.r_[group[1:] == group[:-1], False]
    gap_stop = np.r_[c[1:], 0]
    whole = np.round(cover)  # 0 or 1 except in rows a horizontal edge cuts
    weight = np.where(np.abs(cover - whole) < 1e-9, whole, cover)
    run = nxt_same & (gap_stop > c + 1) & (np.abs(weight) > 1e-12)
    touched = np.abs(cover) > 1e-12
    return CellCoverage(p[touched], r[touched], c[touched], cover[touched],
                        p[run], r[run], c[run] + 1, gap_stop[run], weight[run])
