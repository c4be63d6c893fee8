"""Compiled kernels of :mod:`gisrun.storm.gridded`: a block of rain grids to areal means.

The areal rain of a block of steps is ``min + W (x - min)`` per step (see
:func:`gisrun.storm.areal.weighted_mean`), with ``W`` the CSR weights (subcatchments x used
cells) and ``min`` the smallest value of the used cells in the step. The plain numpy/scipy way
gathers the used cells into a ``(cells, steps)`` copy of the block, checks it, takes each
step's minimum, subtracts it, multiplies by ``W`` and adds the minimum back: five passes over
arrays the size of the block or of the result. Here:

- :func:`scan_block` reads the block as it comes, ``(steps, height * width)``, one step's row
  at a time: checks every used cell (finite, >= 0) and takes the step's minimum;
- :func:`plan_tiles` (once per run of blocks) cuts the subcatchments into tiles whose cells
  fit a small buffer (:data:`TILE_BYTES`), walking them in the order of their first cell so that
  a tile's cells lie close together on the grid, whatever the layer's order;
- :func:`tile_means` copies a tile's cells, minus each step's minimum, into that buffer (cells
  x steps, a few rows of the block at a time) and writes each subcatchment's means straight
  into its row of the result, all its steps at once. No array the size of the block or of
  the result is made besides the result itself.

Same bits as scipy: for each subcatchment the sum runs over its CSR row in storage order,
starting from 0, ``acc += w * (x - min)`` with one rounding for the product and one for the sum
(numba without ``fastmath`` does not fuse them), then ``acc + min``; scipy's CSR times dense
product (``csr_matvecs``) does exactly these operations in this order, and ``x - min`` is the
same subtraction. ``tests/test_gridded_kernels.py`` checks equality to the bit. Which tile a
subcatchment falls in changes only when its row is computed, never how.
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["scan_block", "plan_tiles", "tile_means", "TILE_BYTES", "BLOCK_OK", "BLOCK_NODATA",
           "BLOCK_NEGATIVE"]

#: Bytes of the buffer holding one tile's cells for every step of a block: 256 kB, so that
#: the buffer stays in a core's level-2 cache and the lines written while one step's row of the
#: block is copied stay in level 1 (measured: 64 kB to 2 MB, 256 kB fastest); a tile takes at
#: least one subcatchment, whatever its number of cells.
TILE_BYTES = 2**18
#: What :func:`scan_block` found: every used cell finite and >= 0; a value that is not
#: finite (nodata); a negative value (and none that is not finite).
BLOCK_OK, BLOCK_NODATA, BLOCK_NEGATIVE = 0, 1, 2
#: Bit pattern of +inf: finite doubles >= +0.0 are exactly the int64 patterns in [0, this).
_INF_BITS = 0x7FF0000000000000


@numba.njit(cache=True, nogil=True)
def scan_block(block: NDArray[np.float64], cells: NDArray[np.int64], low: NDArray[np.float64]
               ) -> tuple[int, int, int]:
    """Check the used cells of each step and put each step's smallest value in ``low``.

    Parameters
    ----------
    block : ndarray, shape (steps, height * width)
        Rain of a block of steps, C order.
    cells : ndarray of int64
        The used cells (columns of ``block``), in the weights' column order.
    low : ndarray, shape (steps,)
        Filled with each step's smallest value over ``cells`` (0 when there are none).

    Returns
    -------
    (status, step, column)
        :data:`BLOCK_OK`; :data:`BLOCK_NODATA` and the first (by step, then by column of
        ``cells``) value that is not finite; or :data:`BLOCK_NEGATIVE` and the first negative
        value when every value is finite. ``low`` is meaningful only with :data:`BLOCK_OK`.
    """
    # Fast pass on the bits: finite doubles >= +0.0 order as their int64 patterns, so a
    # step whose patterns all lie in [0, _INF_BITS) is valid and its smallest pattern is its
    # minimum. Anything else (nodata, a negative value, -0.0) goes to the exact pass.
    bits = block.view(np.int64)
    low_bits = low.view(np.int64)
    for j in range(bits.shape[0]):
        row = bits[j]
        lo, hi = _INF_BITS, 0
        for c in range(cells.size):
            b = row[cells[c]]
            lo = min(lo, b)
            hi = max(hi, b)
        if lo < 0 or hi >= _INF_BITS:
            return _scan_exact(block, cells, low)
        low_bits[j] = lo if cells.size else 0
    return BLOCK_OK, -1, -1


@numba.njit(cache=True, nogil=True)
def _scan_exact(block: NDArray[np.float64], cells: NDArray[np.int64], low: NDArray[np.float64]
                ) -> tuple[int, int, int]:
    status, bad_step, bad_col = BLOCK_OK, -1, -1
    for j in range(block.shape[0]):
        row = block[j]
        lo = np.inf
        for c in range(cells.size):
            v = row[cells[c]]
            if v >= 0.0 and v < np.inf:
                lo = min(lo, v)
            elif not np.isfinite(v):
                return BLOCK_NODATA, j, c
            elif status == BLOCK_OK:
                status, bad_step, bad_col = BLOCK_NEGATIVE, j, c
        low[j] = lo if cells.size else 0.0
    return status, bad_step, bad_col


@numba.njit(cache=True, nogil=True)
def plan_tiles(indptr: NDArray[np.int64], indices: NDArray[np.int64], cells: NDArray[np.int64],
               tile_cells: int) -> tuple[NDArray[np.int64], ...]:
    """Tiles of subcatchments with at most ``tile_cells`` cells each (or one subcatchment).

    Parameters
    ----------
    indptr, indices : ndarray
        The CSR weights' structure (subcatchments x used cells).
    cells : ndarray of int64
        The block column (grid cell) of each column of the weights.
    tile_cells : int
        Most cells a tile may hold (a subcatchment with more makes a tile of its own).

    Returns
    -------
    order : ndarray, (subcatchments,)
        Subcatchments by their first column (stable); tiles take them in this order.
    tile_start : ndarray, (tiles + 1,)
        Tile ``t`` is ``order[tile_start[t]:tile_start[t + 1]]``.
    slot : ndarray, (nonzeros,)
        Each nonzero's row in its tile's buffer.
    cols_start : ndarray, (tiles + 1,)
    cols : ndarray
        Tile ``t``'s block columns, buffer row by buffer row:
        ``cols[cols_start[t]:cols_start[t + 1]]``.
    """
    n, n_cells = indptr.size - 1, cells.size
    order = _by_first_column(indptr, indices, n_cells)
    owner = np.full(n_cells, -1, dtype=np.int64)  # the tile holding each column, if any
    row_of = np.empty(n_cells, dtype=np.int64)  # its place in ``cols``
    slot = np.empty(indices.size, dtype=np.int64)
    cols = np.empty(indices.size, dtype=np.int64)
    tile_start = np.empty(n + 1, dtype=np.int64)
    cols_start = np.empty(n + 1, dtype=np.int64)
    tiles, used, i = 0, 0, 0
    while i < n:
        tile_start[tiles], cols_start[tiles] = i, used
        while i < n:
            s = order[i]
            taken = _take_columns(indptr[s], indptr[s + 1], indices, tiles, used, owner, row_of,
                                  cols)
            if taken - cols_start[tiles] > tile_cells and i > tile_start[tiles]:
                for p in range(indptr[s], indptr[s + 1]):  # left for the next tile
                    if row_of[indices[p]] >= used:
                        owner[indices[p]] = -1
                break
            for p in range(indptr[s], indptr[s + 1]):
                slot[p] = row_of[indices[p]] - cols_start[tiles]
            used = taken
            i += 1
        tiles += 1
    tile_start[tiles], cols_start[tiles] = n, used
    return order, tile_start[:tiles + 1], slot, cols_start[:tiles + 1], cells[cols[:used]]


@numba.njit(cache=True, nogil=True)
def _take_columns(p0: int, p1: int, indices: NDArray[np.int64], tile: int, used: int,
                  owner: NDArray[np.int64], row_of: NDArray[np.int64], cols: NDArray[np.int64]
                  ) -> int:
    """Put the columns of nonzeros ``p0:p1`` not yet in ``tile`` after ``cols[:used]``."""
    for p in range(p0, p1):
        c = indices[p]
        if owner[c] != tile:
            owner[c], row_of[c], cols[used] = tile, used, c
            used += 1
    return used


@numba.njit(cache=True, nogil=True)
def _by_first_column(indptr: NDArray[np.int64], indices: NDArray[np.int64], n_cells: int
                     ) -> NDArray[np.int64]:
    """Rows in the order of their smallest column (a stable counting sort; empty rows last)."""
    n = indptr.size - 1
    first = np.full(n, n_cells, dtype=np.int64)
    for s in range(n):
        for p in range(indptr[s], indptr[s + 1]):
            first[s] = min(first[s], indices[p])
    count = np.zeros(n_cells + 2, dtype=np.int64)
    for s in range(n):
        count[first[s] + 1] += 1
    for c in range(n_cells + 1):
        count[c + 1] += count[c]
    order = np.empty(n, dtype=np.int64)
    for s in range(n):
        order[count[first[s]]] = s
        count[first[s]] += 1
    return order


@numba.njit(cache=True, nogil=True)
def tile_means(order: NDArray[np.int64], tile_start: NDArray[np.int64],
               cols_start: NDArray[np.int64], cols: NDArray[np.int64], indptr: NDArray[np.int64],
               slot: NDArray[np.int64], weight: NDArray[np.float64], block: NDArray[np.float64],
               low: NDArray[np.float64], out: NDArray[np.float64]) -> None:
    """Each subcatchment's mean ``low + sum w (x - low)`` of each step, into ``out``.

    Parameters
    ----------
    order, tile_start, cols_start, cols, slot
        The tiles of :func:`plan_tiles`.
    indptr, weight : ndarray
        The CSR weights' row pointers and nonzeros.
    block : ndarray, shape (steps, height * width)
        Rain of a block of steps, C order, checked by :func:`scan_block`.
    low : ndarray, shape (steps,)
        Each step's smallest value over the used cells (:func:`scan_block`).
    out : ndarray, shape (subcatchments, steps)
        Filled with the means; any strides (a block's columns of the run's result).
    """
    k = block.shape[0]
    widest = 0
    for t in range(tile_start.size - 1):
        widest = max(widest, cols_start[t + 1] - cols_start[t])
    buf = np.empty((widest, k))
    acc = np.empty(k)
    for t in range(tile_start.size - 1):
        _fill(block, cols[cols_start[t]:cols_start[t + 1]], low, buf)
        for i in range(tile_start[t], tile_start[t + 1]):
            s = order[i]
            acc[:] = 0.0
            for p in range(indptr[s], indptr[s + 1]):
                w = weight[p]
                x = buf[slot[p]]
                for j in range(k):
                    acc[j] += w * x[j]
            for j in range(k):
                out[s, j] = acc[j] + low[j]


@numba.njit(cache=True, nogil=True)
def _fill(block: NDArray[np.float64], cols: NDArray[np.int64], low: NDArray[np.float64],
          buf: NDArray[np.float64]) -> None:
    """``buf[r, j] = block[j, cols[r]] - low[j]``, one row of the block at a time."""
    for j in range(block.shape[0]):
        row = block[j]
        lo = low[j]
        for r in range(cols.size):
            buf[r, j] = row[cols[r]] - lo
