"""Compiled kernel of :mod:`gisrun.storm.gridded`: find the first bad value of a rain block.

:func:`gisrun.storm.mix_kernels.gather_block` keeps a block's used cells and says whether all
of them are finite and >= 0. When one is not, :func:`scan_block` finds which comes first (by
step, then by used cell), so the error names the same value and the same cell whatever the
block size; on a good block it also gives each step's smallest used value, which the tests
compare with numpy's.
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["scan_block", "BLOCK_OK", "BLOCK_NODATA", "BLOCK_NEGATIVE"]

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
