"""Exact coverage of grid cells by polygons (partial cells at polygon edges).

:func:`cell_coverage` works in grid coordinates (column, row); callers move
polygons there first. It is the one source of cell fractions for the overlay
and the cell rasters.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely
from numpy.typing import NDArray

__all__ = ["CellCoverage", "cell_coverage", "cell_increments"]


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
    p, r, c, acc = cell_increments(geoms, origin)
    return _running_sums(p, r, c, acc, n_poly=len(geoms))


def cell_increments(geoms: NDArray[Any], origin: tuple[float, float] = (0.0, 0.0), *,
                    to_grid: tuple[float, float, float, float] | None = None
                    ) -> tuple[NDArray[Any], ...]:
    """The increments of :func:`cell_coverage` before they are summed (grid coordinates).

    Parameters
    ----------
    geoms, origin
        As for :func:`cell_coverage`.
    to_grid : (c, a, f, e), optional
        When given, ``geoms`` are in map coordinates and each vertex goes to grid
        coordinates ``((x - c) / a, (y - f) / e)`` here (no moved copy of the
        polygons is made), and rings may come in either orientation: each
        ring's is read (``shapely.is_ccw``) and its edges turned when needed.

    Returns
    -------
    poly, row, col : ndarray of int
        Polygon index, row and column (relative to ``origin``) of each increment;
        grouped by polygon, in the order of the polygons.
    increment : ndarray of float
        Added up per cell in the order given, then run along each row of each
        polygon, they give the covered share of every cell of the row.
    """
    x0, y0, x1, y1, poly = _edges(geoms, origin, to_grid)
    return _cell_increments(*_row_pieces(x0, y0, x1, y1, poly))


def _edges(geoms: NDArray[Any], origin: tuple[float, float],
           to_grid: tuple[float, float, float, float] | None = None) -> tuple[NDArray[Any], ...]:
    geoms = np.asarray(geoms, dtype=object)
    if to_grid is None:
        geoms = shapely.orient_polygons(geoms, exterior_cw=True)
    parts, part_poly = shapely.get_parts(geoms, return_index=True)
    rings, ring_part = shapely.get_rings(parts, return_index=True)
    xy, ring_of = shapely.get_coordinates(rings, return_index=True)
    if to_grid is not None:
        c, a, f, e = to_grid
        xy = np.column_stack(((xy[:, 0] - c) / a, (xy[:, 1] - f) / e))
    xy = xy - np.asarray(origin, dtype=np.float64)
    same = ring_of[1:] == ring_of[:-1]
    a, b = xy[:-1][same], xy[1:][same]
    ring = ring_of[:-1][same]
    if to_grid is not None:
        turn = _turned_rings(rings, ring_part, flips=to_grid[1] * to_grid[3] < 0)[ring]
        if turn.any():
            a, b = np.where(turn[:, None], b, a), np.where(turn[:, None], a, b)
    poly = part_poly[ring_part[ring]]
    return a[:, 0], a[:, 1], b[:, 0], b[:, 1], poly.astype(np.int64)


def _turned_rings(rings: NDArray[Any], ring_part: NDArray[Any], flips: bool
                  ) -> NDArray[np.bool_]:
    """Rings that run the wrong way in grid coordinates (exteriors must run clockwise).

    ``flips``: the map-to-grid transform mirrors the plane (one axis reversed),
    which turns every ring's direction.
    """
    ccw = shapely.is_ccw(rings) != flips
    exterior = np.r_[True, ring_part[1:] != ring_part[:-1]]  # the first ring of each part
    return np.where(exterior, ccw, ~ccw)


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
    acc = np.empty(col.size)
    # Most pieces stay in one column: then the second difference below is, in closed form,
    # dy * (cmin + 1 - mid) in that column and dy * (mid - cmin) in the next (mid: the piece's
    # mean x), written with the same v and half-width as the general case.
    one = np.flatnonzero(n == 2)
    first = (np.cumsum(n) - n)[one]
    v = cmin[one] - xmin[one]
    half = (xmax[one] - xmin[one]) / 2
    acc[first] = dy[one] * ((v + 1) - half)
    acc[first + 1] = dy[one] * (half - v)
    # Pieces over several columns: E at col + 1 for each of their cells; E(col) and E(col - 1)
    # are the previous cells' values (0 before the piece: E vanishes left of xmin).
    many = np.flatnonzero(n[piece] > 2)
    pm = piece[many]
    lo, width = xmin[pm], xmax[pm] - xmin[pm]
    e_next = _mean_excess((col[many] - lo).astype(np.float64) + 1, width)
    start = np.r_[True, pm[1:] != pm[:-1]]
    e_here = np.r_[0.0, e_next[:-1]]
    e_here[start] = 0.0
    e_before = np.r_[0.0, e_here[:-1]]
    e_before[start] = 0.0
    acc[many] = dy[pm] * (e_next - 2 * e_here + e_before)
    return poly[piece], row[piece], col, acc


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
