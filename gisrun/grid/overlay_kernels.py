"""Compiled kernels of the exact overlay: polygon edges walked through the cells, class sums.

:func:`polygon_class_sums` does, one polygon at a time and in a buffer the size of the
polygon's bounding window, what :func:`gisrun.grid.coverage.cell_increments` and a running sum
do for many polygons at once with whole-array numpy calls:

1. Every ring edge is cut at the row lines. A straight piece of height ``dy`` (signed: the
   ring's direction) from ``x_a`` to ``x_b`` in one row covers, in cell ``c``, the area
   ``dy * (E(c + 1) - E(c))`` between itself and the cell's right side, where ``E(u)`` is the
   mean over the piece of ``max(u - x, 0)``: the signed-area (Green's theorem) contribution of
   the piece to the region right of it, cut into cells. ``E`` is linear beyond the piece and
   quadratic across it, so its second difference is non-zero only in the cells the piece
   crosses and the next one. Those second differences are added into the buffer, with the
   same floating-point operations, in the same order, as ``cell_increments`` makes them.
2. A running sum along each buffer row, over the span of cells the increments reached, gives
   every cell's covered share: the second differences summed once give the first differences
   ``dy * (E(c + 1) - E(c))`` added up over all pieces, i.e. the covered area; left of the
   span it is 0 and right of it back to 0 (a closed ring adds up to nothing along a row).
   Interior runs come out of the same sum as 1.
3. Each share (rounded to 0 or 1 when a cell touched by no increment is within 1e-9 of it, left
   out when within 1e-12 of 0, as ``cell_coverage`` does) is added to the polygon's sum of the
   class of its cell, row by row, left to right.

The buffer is cleared span by span as it is read, so one buffer (grown to the largest window)
serves every polygon; nothing grows with the number of polygons but the sums. The helpers are
inlined into the kernel (``inline="always"``): called as functions, every call passed the
buffers with reference counting, a quarter of the time (measured).
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["polygon_class_sums", "chunk_starts"]


@numba.njit(cache=True, nogil=True, inline="always")
def _mean_excess(v: float, width: float) -> float:  # pragma: no cover - compiled
    """Mean of max(v - s, 0) for s uniform on [0, width] (width may be 0)."""
    if v >= width:
        return v - width / 2
    if v > 0.0:
        return v * v / (2 * width)
    return 0.0


@numba.njit(cache=True, nogil=True, inline="always")
def _add_piece(row: int, dy: float, xmin: float, xmax: float, buf: NDArray[np.float64],
               touched: NDArray[np.bool_], lo: NDArray[np.int64], hi: NDArray[np.int64],
               base: tuple[int, int, int]) -> None:  # pragma: no cover - compiled
    """Second differences of one row piece, added into the buffer (row, col relative to base)."""
    r_base, c_base, width = base
    cmin = np.floor(xmin)
    n = int(np.floor(xmax) - cmin) + 2  # crossed cells and the next one
    r = row - r_base
    c = int(cmin) - c_base
    at = r * width + c
    if n == 2:  # closed form of the general case below for a piece within one column
        v = cmin - xmin
        half = (xmax - xmin) / 2
        buf[at] += dy * ((v + 1) - half)
        buf[at + 1] += dy * (half - v)
    else:
        w = xmax - xmin
        e_here = 0.0
        e_before = 0.0
        for j in range(n):
            e_next = _mean_excess(((cmin + j) - xmin) + 1, w)
            buf[at + j] += dy * (e_next - 2 * e_here + e_before)
            e_before = e_here
            e_here = e_next
    touched[at:at + n] = True
    lo[r] = min(lo[r], c)
    hi[r] = max(hi[r], c + n - 1)


@numba.njit(cache=True, nogil=True, inline="always")
def _add_edge(x0: float, y0: float, x1: float, y1: float, buf: NDArray[np.float64],
              touched: NDArray[np.bool_], lo: NDArray[np.int64], hi: NDArray[np.int64],
              base: tuple[int, int, int]) -> None:  # pragma: no cover - compiled
    """One edge cut at the row lines; each piece's increments added (``coverage._row_pieces``)."""
    if y0 == y1:
        return  # a horizontal edge covers nothing
    ylo, yhi = min(y0, y1), max(y0, y1)
    rlo = int(np.floor(ylo))
    slope = (x1 - x0) / (y1 - y0)
    left, right = min(x0, x1), max(x0, x1)
    sign = 1.0 if y1 > y0 else -1.0
    for row in range(rlo, int(np.ceil(yhi))):
        a, b = max(ylo, float(row)), min(yhi, float(row + 1))
        xa, xb = x0 + (a - y0) * slope, x0 + (b - y0) * slope
        xmin = min(max(min(xa, xb), left), right)
        xmax = min(max(max(xa, xb), left), right)
        _add_piece(row, (b - a) * sign, xmin, xmax, buf, touched, lo, hi, base)


@numba.njit(cache=True, nogil=True, inline="always")
def _sum_rows(p: int, n_rows: int, buf: NDArray[np.float64], touched: NDArray[np.bool_],
              lo: NDArray[np.int64], hi: NDArray[np.int64], base: tuple[int, int, int, int, int],
              classes: tuple[NDArray[np.integer], NDArray[np.int32], tuple[int, int, int, int]],
              row_area: NDArray[np.float64], sums: NDArray[np.float64]
              ) -> None:  # pragma: no cover - compiled
    """Running sums along the buffer's rows -> shares -> polygon p's class sums; buffer cleared.

    ``base``: window row and column of the buffer's first cell, buffer width, window height
    and width (cells beyond the window add nothing).
    """
    r_base, c_base, width, height, n_col = base
    codes, table, (low, outside, r_in, c_in) = classes  # see polygon_class_sums
    n_r, n_c = codes.shape
    weighted = row_area.size > 0
    for r in range(n_rows):
        if hi[r] < lo[r]:
            continue  # a row no edge reaches (between the parts of a multipolygon)
        wr = r_base + r
        running = 0.0
        for c in range(lo[r], hi[r] + 1):
            at = r * width + c
            running += buf[at]
            share = running
            if not touched[at]:
                whole = np.floor(running + 0.5)  # 0 or 1 except in rows a horizontal edge cuts
                if abs(running - whole) < 1e-9:
                    share = whole
            buf[at] = 0.0
            touched[at] = False
            wc = c_base + c
            if abs(share) > 1e-12 and 0 <= wr < height and 0 <= wc < n_col:
                i, j = wr - r_in, wc - c_in
                k = outside
                if 0 <= i < n_r and 0 <= j < n_c:  # codes beyond the table: its end entries
                    k = table[min(max(codes[i, j] - low, 0), table.size - 1)]
                sums[p, k] += share * row_area[wr] if weighted else share
        lo[r] = width
        hi[r] = -1


@numba.njit(cache=True, nogil=True)
def polygon_class_sums(xy: NDArray[np.float64], ring_start: NDArray[np.int64],
                       exterior: NDArray[np.bool_], poly_ring: NDArray[np.int64],
                       to_grid: tuple[float, float, float, float],
                       window: tuple[int, int, int, int],
                       classes: tuple[NDArray[np.integer], NDArray[np.int32],
                                      tuple[int, int, int, int]],
                       row_area: NDArray[np.float64], n_cls: int
                       ) -> NDArray[np.float64]:  # pragma: no cover - compiled
    """Covered area (cell units, or x ``row_area``) of every polygon on every class.

    Each polygon is measured in grid coordinates taken from the corner of its own bounding
    cells (exactly: a whole number is subtracted), so its areas do not depend on the other
    polygons or on the window it is summed in.

    Parameters
    ----------
    xy : ndarray, shape (n_vertices, 2)
        Ring vertices in map coordinates, each ring closed (first vertex repeated).
    ring_start : ndarray of int64, shape (n_rings + 1,)
        Ring ``k`` is ``xy[ring_start[k]:ring_start[k + 1]]``.
    exterior : ndarray of bool, shape (n_rings,)
        Whether ring ``k`` is an exterior (else a hole); rings may run either way.
    poly_ring : ndarray of int64, shape (n_poly + 1,)
        Polygon ``i`` has rings ``poly_ring[i]:poly_ring[i + 1]``.
    to_grid : (c, a, f, e)
        Map to grid: column ``(x - c) / a``, row ``(y - f) / e``.
    window : (col, row, height, width)
        The window's first grid cell and size; cells beyond it add nothing.
    classes : (codes, table, look)
        The class of window cell (wr, wc) is ``table[codes[wr - r, wc - c] - lowest]`` where
        ``look`` = (lowest, outside, r, c), an index beyond the table held to its ends; cells
        of the window beyond ``codes`` are class ``outside``. (Class indices themselves:
        ``table`` = 0, 1, ...; ``lowest`` 0.)
    row_area : ndarray of float64
        Area of a cell of each window row, or empty for cell units.
    n_cls : int

    Returns
    -------
    ndarray, shape (n_poly, n_cls)
    """
    c0, a0, f0, e0 = to_grid
    sums = np.zeros((poly_ring.size - 1, n_cls))
    gx, gy = (xy[:, 0] - c0) / a0, (xy[:, 1] - f0) / e0
    buf, touched = np.zeros(0), np.zeros(0, dtype=np.bool_)
    lo, hi = np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    for p in range(poly_ring.size - 1):
        v0, v1 = ring_start[poly_ring[p]], ring_start[poly_ring[p + 1]]
        if v1 == v0:
            continue
        r_base, c_base = np.floor(gy[v0:v1].min()), np.floor(gx[v0:v1].min())
        n_rows = int(np.ceil(gy[v0:v1].max()) - r_base)
        width = int(np.floor(gx[v0:v1].max()) - c_base) + 2
        if n_rows * width > buf.size:
            buf, touched = np.zeros(n_rows * width), np.zeros(n_rows * width, dtype=np.bool_)
        if n_rows > lo.size:
            lo, hi = np.zeros(n_rows, dtype=np.int64), np.full(n_rows, -1, dtype=np.int64)
        lo[:n_rows] = width
        for k in range(poly_ring[p], poly_ring[p + 1]):
            _add_ring(gx, gy, ring_start[k], ring_start[k + 1], exterior[k], (c_base, r_base),
                      buf, touched, lo, hi, width)
        base = (int(r_base) - window[1], int(c_base) - window[0], width, window[2], window[3])
        _sum_rows(p, n_rows, buf, touched, lo, hi, base, classes, row_area, sums)
    return sums


@numba.njit(cache=True, nogil=True, inline="always")
def _add_ring(gx: NDArray[np.float64], gy: NDArray[np.float64], v0: int, v1: int,
              exterior: bool, corner: tuple[float, float], buf: NDArray[np.float64],
              touched: NDArray[np.bool_], lo: NDArray[np.int64], hi: NDArray[np.int64],
              width: int) -> None:  # pragma: no cover - compiled
    """One ring's edges, exteriors clockwise and holes anticlockwise in grid coordinates.

    ``corner``: (col, row) subtracted from the vertices (whole numbers). The direction is read
    from the sign of the ring's area (shoelace sum, positive anticlockwise).
    """
    cx, cy = corner
    twice_area = 0.0
    for v in range(v0, v1 - 1):
        twice_area += (gx[v] - cx) * (gy[v + 1] - cy) - (gx[v + 1] - cx) * (gy[v] - cy)
    turn = twice_area > 0 if exterior else twice_area < 0
    base = (0, 0, width)
    for v in range(v0, v1 - 1):
        x0, y0, x1, y1 = gx[v] - cx, gy[v] - cy, gx[v + 1] - cx, gy[v + 1] - cy
        if turn:
            _add_edge(x1, y1, x0, y0, buf, touched, lo, hi, base)
        else:
            _add_edge(x0, y0, x1, y1, buf, touched, lo, hi, base)


@numba.njit(cache=True, nogil=True)
def chunk_starts(box: NDArray[np.int64], chunk_cells: int) -> NDArray[np.int64]:  # pragma: no cover
    """Where each group of consecutive boxes starts, a group's joint window at most chunk_cells.

    ``box``: (r0, r1, c0, c1) per item, in the order to group them. A box larger than
    ``chunk_cells`` on its own makes a group of one.
    """
    starts = np.zeros(box.shape[0], dtype=np.int64)
    n = 0
    big = 1 << 62
    r0, r1, c0, c1 = big, -big, big, -big
    for i in range(box.shape[0]):
        nr0, nr1 = min(r0, box[i, 0]), max(r1, box[i, 1])
        nc0, nc1 = min(c0, box[i, 2]), max(c1, box[i, 3])
        if i > 0 and (nr1 - nr0) * (nc1 - nc0) > chunk_cells:
            starts[n] = i
            n += 1
            nr0, nr1, nc0, nc1 = box[i, 0], box[i, 1], box[i, 2], box[i, 3]
        r0, r1, c0, c1 = nr0, nr1, nc0, nc1
    return starts[:n]
