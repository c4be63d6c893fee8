"""Compiled kernels of :mod:`gisrun.storm.mix`: sources kept by series, columns made from them.

A :class:`gisrun.storm.mix.SourceMix` keeps each source's series together, ``(sources,
steps)``: a subcatchment's column is then a sum of a few whole rows, ``low + sum_p w_p (x_p -
low)``, which runs over contiguous memory, step after step, and vectorises. Two kernels:

- :func:`gather_block`: a block of a rain stack as it is read, ``(steps, height * width)``,
  into the kept sources (its used cells, by series, as depths: each stored value widened to
  float64 and multiplied by the stack's factor, as ``RainStack.read_steps`` makes them), taking
  each step's smallest used depth and telling whether every used depth is finite and >= 0;
- :func:`mix_columns`: the columns of some subcatchments (rows of the weights, picked by
  position: a chunk's subcatchments need no weights of their own), each straight into its row
  of the result (a subcatchment of one to four sources has its own loop without an
  accumulator).

Same bits as scipy: for each subcatchment and step the sum runs over its CSR row in storage
order, starting from 0, ``acc = acc + w * (x - low)`` with one rounding for the difference,
one for the product and one for the sum (numba without ``fastmath`` fuses none of them), then
``acc + low``: what :func:`gisrun.storm.areal.weighted_mean` gives through scipy's CSR times
dense product (``csr_matvecs``). ``tests/test_mix.py`` checks equality to the bit.
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["gather_block", "mix_columns"]

#: Cells of the stack moved together in :func:`gather_block`: each cell's steps are copied in
#: turn, and the next cells' values sit in the lines the first cell's reads brought into cache
#: (16 cells: two lines of a row; 4 to 32 measured alike here, whole 8 x 8 tiles slower).
_CELLS_AT_ONCE = 16


@numba.njit(cache=True, nogil=True)
def gather_block(block: NDArray[np.floating], cells: NDArray[np.int64], first: int,
                 factor: float, kept: NDArray[np.float64], low: NDArray[np.float64]) -> bool:
    """``kept[c, first + j] = float64(block[j, cells[c]]) * factor``, and step minima.

    Parameters
    ----------
    block : ndarray, shape (steps, height * width)
        A block of the rain stack as stored (float32 or float64), C order.
    cells : ndarray of int64
        The used cells (columns of ``block``), in the order of the kept rows.
    first : int
        The block's first step in the stack.
    factor : float
        Stored value -> depth (``RainStack.to_depth_m``; 1.0 for a block of depths, which it
        leaves unchanged to the bit).
    kept : ndarray, shape (len(cells), steps of the stack)
        The kept sources, C order; the block's columns are written.
    low : ndarray, shape (steps of the block,)
        Filled with each step's smallest used value (+inf when no cell is used).

    Returns
    -------
    bool
        Whether every used value is finite and >= 0 (``low`` is meaningful only then; the
        caller names the first bad value with :func:`gisrun.storm.gridded_kernels.scan_block`).

    Notes
    -----
    Two passes: the copy, each kept row written in order; then the check and the minima over
    the kept rows just written, step by step across a row (no NaN can reach a minimum
    unnoticed: a NaN fails the check).
    """
    k = block.shape[0]
    n = cells.size
    for c0 in range(0, n, _CELLS_AT_ONCE):
        for c in range(c0, min(n, c0 + _CELLS_AT_ONCE)):
            cell = cells[c]
            row = kept[c]
            for j in range(k):
                row[first + j] = np.float64(block[j, cell]) * factor
    low[:] = np.inf
    bad = np.zeros(k, dtype=np.bool_)
    for c in range(n):
        row = kept[c]
        for j in range(k):
            v = row[first + j]
            low[j] = v if v < low[j] else low[j]
            bad[j] |= ~((v >= 0.0) & (v < np.inf))
    return not bad.any()


@numba.njit(cache=True, nogil=True)
def mix_columns(rows: NDArray[np.int64], indptr: NDArray[np.int64],
                indices: NDArray[np.int64], weight: NDArray[np.float64],
                kept: NDArray[np.float64], low: NDArray[np.float64],
                out: NDArray[np.float64]) -> None:
    """``out[s, j] = low[j] + sum_p weight[p] (kept[indices[p], j] - low[j])``, row ``rows[s]``.

    The sum runs over CSR row ``rows[s]`` of the weights.

    Parameters
    ----------
    rows : ndarray of int64
        The CSR rows (subcatchments) wanted, in the order of ``out``'s rows.
    indptr, indices, weight : ndarray
        The CSR weights (subcatchments x sources).
    kept : ndarray, shape (sources, steps)
        Each source's series, C order.
    low : ndarray, shape (steps,)
    out : ndarray, shape (subcatchments, steps)
        C order (the transpose of a Fortran-ordered ``(steps, subcatchments)``).
    """
    k = kept.shape[1]
    acc = np.empty(k)
    for s in range(rows.size):
        p, stop = indptr[rows[s]], indptr[rows[s] + 1]
        o = out[s]
        if stop - p == 1:
            w0, x0 = weight[p], kept[indices[p]]
            for j in range(k):
                lo = low[j]
                o[j] = (0.0 + w0 * (x0[j] - lo)) + lo
        elif stop - p == 2:
            w0, x0, w1, x1 = weight[p], kept[indices[p]], weight[p + 1], kept[indices[p + 1]]
            for j in range(k):
                lo = low[j]
                o[j] = ((0.0 + w0 * (x0[j] - lo)) + w1 * (x1[j] - lo)) + lo
        elif stop - p == 3:
            w0, x0, w1, x1 = weight[p], kept[indices[p]], weight[p + 1], kept[indices[p + 1]]
            w2, x2 = weight[p + 2], kept[indices[p + 2]]
            for j in range(k):
                lo = low[j]
                o[j] = (((0.0 + w0 * (x0[j] - lo)) + w1 * (x1[j] - lo))
                        + w2 * (x2[j] - lo)) + lo
        elif stop - p == 4:
            w0, x0, w1, x1 = weight[p], kept[indices[p]], weight[p + 1], kept[indices[p + 1]]
            w2, x2, w3, x3 = weight[p + 2], kept[indices[p + 2]], weight[p + 3], kept[
                indices[p + 3]]
            for j in range(k):
                lo = low[j]
                o[j] = ((((0.0 + w0 * (x0[j] - lo)) + w1 * (x1[j] - lo))
                         + w2 * (x2[j] - lo)) + w3 * (x3[j] - lo)) + lo
        else:
            acc[:] = 0.0
            for q in range(p, stop):
                w, x = weight[q], kept[indices[q]]
                for j in range(k):
                    acc[j] += w * (x[j] - low[j])
            for j in range(k):
                o[j] = acc[j] + low[j]
