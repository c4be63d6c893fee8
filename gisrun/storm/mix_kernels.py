"""Compiled kernels of :mod:`gisrun.storm.mix`: sources kept by series, columns made from them.

A :class:`gisrun.storm.mix.SourceMix` keeps each source's series together, ``(sources,
steps)``: a subcatchment's column is then a sum of a few whole rows, ``low + sum_p w_p (x_p -
low)``, which runs over contiguous memory, step after step, and vectorises. Two kernels:

- :func:`gather_block`: a block of a rain stack as it is read, ``(steps, height * width)``,
  into the kept sources (its used cells, by series), taking each step's smallest used value and
  telling whether every used value is finite and >= 0, in one pass over the block;
- :func:`mix_columns`: the columns of some subcatchments, each straight into its row of the
  result (a subcatchment of one to four sources has its own loop without an accumulator).

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

#: Cells of the stack moved per pass over a block's steps in :func:`gather_block`: 32 cells of
#: a kept row are 32 lines being written while the block's rows are read (common practice for
#: a cache-blocked transpose; 16 to 128 measured alike here).
_CELLS_AT_ONCE = 32


@numba.njit(cache=True, nogil=True)
def gather_block(block: NDArray[np.float64], cells: NDArray[np.int64], first: int,
                 kept: NDArray[np.float64], low: NDArray[np.float64]) -> bool:
    """``kept[c, first + j] = block[j, cells[c]]`` and each step's smallest used value.

    Parameters
    ----------
    block : ndarray, shape (steps, height * width)
        A block of the rain stack, C order.
    cells : ndarray of int64
        The used cells (columns of ``block``), in the order of the kept rows.
    first : int
        The block's first step in the stack.
    kept : ndarray, shape (len(cells), steps of the stack)
        The kept sources, C order; the block's columns are written.
    low : ndarray, shape (steps of the block,)
        Filled with each step's smallest used value (+inf when no cell is used).

    Returns
    -------
    bool
        Whether every used value is finite and >= 0 (``low`` is meaningful only then; the
        caller names the first bad value with :func:`gisrun.storm.gridded_kernels.scan_block`).
    """
    k = block.shape[0]
    n = cells.size
    low[:] = np.inf
    good = True
    for c0 in range(0, n, _CELLS_AT_ONCE):
        c1 = min(n, c0 + _CELLS_AT_ONCE)
        for j in range(k):
            row = block[j]
            lo = low[j]
            for c in range(c0, c1):
                v = row[cells[c]]
                kept[c, first + j] = v
                good &= v >= 0.0 and v < np.inf
                lo = min(lo, v)
            low[j] = lo
    return good


@numba.njit(cache=True, nogil=True)
def mix_columns(indptr: NDArray[np.int64], indices: NDArray[np.int64],
                weight: NDArray[np.float64], kept: NDArray[np.float64],
                low: NDArray[np.float64], out: NDArray[np.float64]) -> None:
    """``out[s, j] = low[j] + sum_p weight[p] (kept[indices[p], j] - low[j])`` per CSR row ``s``.

    Parameters
    ----------
    indptr, indices, weight : ndarray
        The rows' CSR weights (subcatchments x sources).
    kept : ndarray, shape (sources, steps)
        Each source's series, C order.
    low : ndarray, shape (steps,)
    out : ndarray, shape (subcatchments, steps)
        C order (the transpose of a Fortran-ordered ``(steps, subcatchments)``).
    """
    k = kept.shape[1]
    acc = np.empty(k)
    for s in range(indptr.size - 1):
        p, stop = indptr[s], indptr[s + 1]
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
