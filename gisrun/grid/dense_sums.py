"""Area per (polygon, class) of compact polygons, each on dense spans of cells.

Each polygon gets a block the size of the cells its edge increments reach
(:func:`gisrun.grid.coverage.cell_increments`: its bounding box and the column
right of it). The increments are added into the block (one ``np.bincount``, in
their own order, as :func:`~gisrun.grid.coverage.cell_coverage` adds them), a
running sum along each block row gives every cell's covered share, and one
more ``np.bincount`` adds share x cell area by (polygon, class). Nothing is
sorted: the work grows with the block cells, which for compact polygons are
about 1.5-2 times the covered cells.

The shares are the ones :func:`~gisrun.grid.coverage.cell_coverage` gives: a
cell an edge touches keeps its running sum; a cell no edge touches takes the
sum rounded to 0 or 1 when within 1e-9 of it (otherwise the fraction of a row
that a horizontal edge cuts); shares within 1e-12 of 0 are left out. Only the
order of the additions differs from the sparse path
(:mod:`gisrun.grid.sparse_sums`).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from .coverage import cell_increments
from .fine_grid import FineGrid

__all__ = ["dense_eligible", "dense_chunk_sums", "BLOCK_FACTOR", "BLOCK_MARGIN_CELLS",
           "EDGE_SHARE"]

#: A polygon takes the dense path when its block is at most this many times its area ...
BLOCK_FACTOR = 4.0
#: ... plus this many cells (so that polygons of a few cells always do), and when its edges
#: (perimeter in cells plus vertices) come to at least this share of its area: below it the
#: sparse path, whose work grows with edge cells and runs, measured faster (8000^2 cells,
#: 10,000 polygons of 6,400 cells: sparse 0.23 s, dense 0.30 s per 600 polygons; 100,000
#: curved polygons of 640 cells and 95 vertices: 0.9 s each per 6,000).
BLOCK_MARGIN_CELLS = 64.0
EDGE_SHARE = 0.25


def dense_eligible(area_cells: NDArray[np.float64], box: NDArray[np.int64], chunk_cells: int,
                   edge_cells: NDArray[np.float64]) -> NDArray[np.bool_]:
    """Which polygons take the dense path.

    ``area_cells``: areas in cells; ``box``: boxes (r0, r1, c0, c1) in cells;
    ``edge_cells``: perimeter in cells plus the number of vertices.
    """
    block = (box[:, 1] - box[:, 0] + 1) * (box[:, 3] - box[:, 2] + 2)
    return ((block <= BLOCK_FACTOR * area_cells + BLOCK_MARGIN_CELLS) & (block <= chunk_cells)
            & (edge_cells >= EDGE_SHARE * area_cells))


def dense_chunk_sums(px: NDArray[Any], box: NDArray[np.int64], grid: FineGrid,
                     chunk_cells: int, *, to_grid: tuple[float, float, float, float] | None = None
                     ) -> NDArray[np.float64]:
    """Covered area (cell units, or m2 on a geographic grid) per (polygon, class).

    Parameters
    ----------
    px : ndarray of shapely Polygons
        The polygons, in grid coordinates (column, row), or in map coordinates
        with ``to_grid`` (as for :func:`gisrun.grid.coverage.cell_increments`).
    box : ndarray of int, shape (n, 4)
        Their boxes (r0, r1, c0, c1) in whole cells.
    grid : FineGrid
    chunk_cells : int
        Block cells handled at once (bounds memory); the class window of all
        the polygons is read once.
    """
    r0, r1 = int(box[:, 0].min()), int(box[:, 1].max())
    c0, c1 = int(box[:, 2].min()), int(box[:, 3].max())
    cls = grid.classes(r0, r1, c0, c1).ravel()
    area = grid.row_weights(r0, r1)
    sums = np.zeros((len(px), grid.n_classes))
    block = (box[:, 1] - box[:, 0] + 1) * (box[:, 3] - box[:, 2] + 2)
    budget = max(chunk_cells // 4, int(block.max()))
    batch = np.cumsum(block) // budget  # consecutive polygons, about `budget` block cells each
    for b in np.unique(batch):
        idx = np.flatnonzero(batch == b)
        sums[idx] = _batch_sums(px[idx], (r0, r1, c0, c1), cls, area, grid.n_classes, to_grid)
    return sums


def _batch_sums(px: NDArray[Any], win: tuple[int, int, int, int], cls: NDArray[Any],
                area: NDArray[np.float64] | None, n_cls: int,
                to_grid: tuple[float, float, float, float] | None) -> NDArray[np.float64]:
    r0, r1, c0, c1 = win
    p, r, c, acc = cell_increments(px, origin=(float(c0), float(r0)), to_grid=to_grid)
    if p.size == 0:
        return np.zeros((len(px), n_cls))
    rows = _Rows.of(p, r, c)
    cover, touched = rows.cover(acc)
    whole = np.round(cover)
    weight = np.where(touched | (np.abs(cover - whole) >= 1e-9), cover, whole)
    weight[np.abs(weight) <= 1e-12] = 0.0  # adds nothing: the sums are those of the kept cells
    flat, row_w = rows.window_cells(r1 - r0, c1 - c0, weight)
    if area is not None:
        weight *= np.repeat(area[row_w], rows.length)
    key = np.repeat(rows.polys[rows.poly] * n_cls, rows.length) + cls[flat]
    return np.bincount(key, weight, minlength=len(px) * n_cls).reshape(len(px), n_cls)


class _Rows:
    """Per polygon and row, the span of cells its increments reach, laid end to end.

    Left of a span a polygon's running sum is 0 and right of it the sum is back
    to 0 (the increments of a closed ring add up to nothing along a row), so
    the spans hold every cell it covers.
    """

    def __init__(self, polys: NDArray[np.int64], poly: NDArray[np.int64],
                 index: NDArray[np.int64], col0: NDArray[np.int64],
                 length: NDArray[np.int64], pos: NDArray[np.int64]) -> None:
        self.polys = polys  # the polygons (local indices) that have increments
        self.poly, self.index, self.col0, self.length = poly, index, col0, length  # per span
        self.start = np.cumsum(length) - length  # first cell of each span
        self.size = int(length.sum())
        self.pos = pos  # cell of each increment

    @classmethod
    def of(cls, p: NDArray[np.int64], r: NDArray[np.int64], c: NDArray[np.int64]) -> _Rows:
        """Spans that hold every increment (increments come grouped by polygon)."""
        if np.any(p[1:] < p[:-1]):
            raise ValueError("cell increments must come grouped by polygon")
        begin = np.flatnonzero(np.r_[True, p[1:] != p[:-1]])
        row0, row1 = np.minimum.reduceat(r, begin), np.maximum.reduceat(r, begin)
        height = row1 - row0 + 1
        first = np.cumsum(height) - height  # first span of each polygon
        slot = np.repeat(np.arange(begin.size), np.diff(np.r_[begin, p.size]))
        span = first[slot] + (r - row0[slot])  # span of each increment
        n = int(height.sum())
        lo = np.full(n, np.iinfo(np.int64).max)
        hi = np.full(n, -1, dtype=np.int64)
        np.minimum.at(lo, span, c)
        np.maximum.at(hi, span, c)
        length = np.maximum(hi - lo + 1, 0)  # 0: a row between the parts of a multipolygon
        lo = np.where(length > 0, lo, 0)
        poly = np.repeat(np.arange(begin.size), height)
        index = row0[poly] + np.arange(n) - first[poly]  # window row of each span
        start = np.cumsum(length) - length
        return cls(p[begin], poly, index, lo, length, start[span] + (c - lo[span]))

    def cover(self, acc: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
        """Covered share of every span cell, and whether an increment touched it."""
        running = np.cumsum(np.bincount(self.pos, acc, minlength=self.size))
        touched = np.zeros(self.size, dtype=bool)
        touched[self.pos] = True
        before = np.r_[0.0, running][self.start]  # running sum before each span
        return running - np.repeat(before, self.length), touched

    def window_cells(self, height: int, width: int, weight: NDArray[np.float64]
                     ) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
        """Window cell (flat index) of every span cell, and window row of every span.

        Span cells beyond the window (the column right of a polygon at the window's
        right edge) get weight 0 here and a valid index.
        """
        rows = np.clip(self.index, 0, height - 1)
        weight[np.repeat(rows != self.index, self.length)] = 0.0
        over = np.maximum(self.col0 + self.length - width, 0)  # cells beyond the right edge
        for j in range(1, int(over.max(initial=0)) + 1):
            weight[(self.start + self.length - j)[over >= j]] = 0.0
        shift = rows * width + np.minimum(self.col0, width - 1) - self.start
        flat = np.arange(self.size) + np.repeat(shift, self.length)
        return np.minimum(flat, np.repeat(rows * width + width - 1, self.length)), rows
