"""Area per (polygon, class) from sparse cell coverage: edge cells one by one, interiors as runs.

The overlay's path for polygons whose bounding box is large next to their area (long thin or
sprawling shapes) or larger than a chunk; compact polygons take :mod:`gisrun.grid.dense_sums`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from .fine_grid import FineGrid

__all__ = ["sparse_chunk_sums", "run_sums", "painted_counts"]


def sparse_chunk_sums(cov: Any, grid: FineGrid, n_poly: int, win: tuple[int, int, int, int],
                chunk_cells: int) -> NDArray[np.float64]:
    """Covered area per (polygon, class) in one window, read in row bands."""
    r0, r1, c0, c1 = win
    width, n_cls = c1 - c0, grid.n_classes
    sums = np.zeros(n_poly * n_cls)
    band = max(1, chunk_cells // max(width, 1))
    for a in range(0, r1 - r0, band):
        b = min(a + band, r1 - r0)
        cls = grid.classes(r0 + a, r0 + b, c0, c1).ravel()
        area = grid.row_weights(r0 + a, r0 + b)
        e0, e1 = np.searchsorted(cov.row, [a, b])
        col = cov.col[e0:e1]
        ok = (col >= 0) & (col < width)
        rows = cov.row[e0:e1][ok] - a
        w = cov.fraction[e0:e1][ok] * (area[rows] if area is not None else 1.0)
        flat = rows * width + col[ok]
        sums += np.bincount(cov.poly[e0:e1][ok] * n_cls + cls[flat], w, minlength=sums.size)
        sums += run_sums(cov, a, b, width, cls, area, n_cls, sums.size)
    return sums.reshape(n_poly, n_cls)


def run_sums(cov: Any, a: int, b: int, width: int, cls: NDArray[np.intp],
              area: NDArray[np.float64] | None, n_cls: int, size: int) -> NDArray[np.float64]:
    """Area per (polygon, class) of the interior runs in rows a:b of a window."""
    s0, s1 = np.searchsorted(cov.run_row, [a, b])
    rows = cov.run_row[s0:s1] - a
    start = np.clip(cov.run_start[s0:s1], 0, width)
    n = np.clip(cov.run_stop[s0:s1], 0, width) - start
    poly, weight = cov.run_poly[s0:s1], cov.run_weight[s0:s1]
    whole = (weight == 1) & (n > 0)
    out = np.zeros(size)
    if area is None and whole.any():
        flat0 = rows[whole] * width + start[whole]
        painted = painted_counts(flat0, n[whole], poly[whole], cls, n_cls, size)
        if painted is not None:
            out += painted
            poly, rows, start, n, weight = (v[~whole] for v in (poly, rows, start, n, weight))
    owner = np.repeat(np.arange(n.size), n)
    flat = np.arange(owner.size) + np.repeat(rows * width + start - (np.cumsum(n) - n), n)
    w = weight * (area[rows] if area is not None else 1.0)
    return out + np.bincount(poly[owner] * n_cls + cls[flat], w[owner], minlength=size)


def painted_counts(flat0: NDArray[np.int64], n: NDArray[np.int64], poly: NDArray[np.int64],
                    cls: NDArray[np.intp], n_cls: int, size: int) -> NDArray[np.float64] | None:
    """Cell counts per (polygon, class) by painting runs into a label raster.

    Each run adds its label (polygon + 1) at its first cell and takes it off after
    its last; a running sum then labels every cell. Returns None when runs
    overlap (overlapping subcatchments), which the caller counts cell by cell.
    """
    mark = np.zeros(cls.size + 1, dtype=np.int32)
    np.add.at(mark, flat0, (poly + 1).astype(np.int32))
    np.add.at(mark, flat0 + n, -(poly + 1).astype(np.int32))
    label = np.cumsum(mark[:-1], dtype=np.int32)
    if np.count_nonzero(label) != n.sum():
        return None
    counts = np.bincount(label * n_cls + cls, minlength=size + n_cls)
    return counts[n_cls:].astype(np.float64)  # label 0: cells in no run
