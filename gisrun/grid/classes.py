"""Class rasters as the grid code sees them: read through one door, looked up and lined up once.

A class raster (soil or cover codes) reaches the grid code as a :class:`ClassGrid`:
its georeferencing and a ``read_window`` method. ``gisrun.io.raster.ClassRaster``
is the file-backed one; tests pass arrays. The overlay
(:mod:`gisrun.grid.overlay`) and the cell values (:mod:`gisrun.grid.cells`)
share what is here:

- :func:`read_padded`: a window of a raster, cells beyond its edge masked;
- :class:`CodeLookup`: raster code -> class index (unknown codes and nodata
  to one index, cells beyond the edge to another);
- :func:`nesting` and :class:`CentreSampling`: how a coarser grid lies on a
  finer one, and the coarse cell under each fine cell's centre (nearest cell,
  never interpolated).

Examples
--------
>>> from affine import Affine
>>> nesting(Affine(5, 0, 0, 0, -5, 40), Affine(10, 0, 10, 0, -10, 40))
(2, 2, 0, 2)
>>> lookup = CodeLookup({1: "A", 4: "D"}, ["A", "D"], 255, first=0, nodata_index=2,
...                     outside_index=2)
>>> lookup.index(np.array([[1, 4, 255, 7]], np.uint8)).tolist()
[[0, 1, 2, 2]]
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import Any, Protocol

import numpy as np
from numpy.typing import NDArray
from pyproj import CRS

__all__ = ["ClassGrid", "read_padded", "CodeLookup", "nesting", "CentreSampling"]

#: Widest span of codes (highest - lowest) looked up in a dense table (4 MB of int32).
DENSE_TABLE_MAX = 1 << 20
#: Cells per block of the dense look-up's gather.
GATHER_BLOCK = 1 << 16
#: Tolerance, in cells, for calling a ratio of grid sizes or offsets a whole number.
WHOLE_TOLERANCE = 1e-6


class ClassGrid(Protocol):
    """What the overlay needs from a class raster (see ``gisrun.io.raster.ClassRaster``)."""

    crs: CRS
    transform: Any
    width: int
    height: int
    nodata: float | None
    where: str

    def read_window(self, window: Any) -> tuple[NDArray[Any], Any]:
        """Read ((row_start, row_stop), (col_start, col_stop)), clipped to the raster."""


def read_padded(raster: ClassGrid, rows: tuple[int, int], cols: tuple[int, int]
                ) -> np.ma.MaskedArray:
    """Rows ``rows[0]:rows[1]`` and columns ``cols[0]:cols[1]`` of a raster.

    The window may reach beyond the raster; those cells come back masked. Only
    the part inside the raster is read (through ``raster.read_window``).
    """
    (r0, r1), (c0, c1) = rows, cols
    shape = (r1 - r0, c1 - c0)
    rr0, rr1 = max(r0, 0), min(r1, raster.height)
    cc0, cc1 = max(c0, 0), min(c1, raster.width)
    if rr0 >= rr1 or cc0 >= cc1:
        return np.ma.masked_all(shape, dtype=np.int64)
    data, _ = raster.read_window(((rr0, rr1), (cc0, cc1)))
    if data.shape == shape:
        return np.ma.MaskedArray(data, mask=np.ma.nomask)
    out = np.ma.masked_all(shape, dtype=data.dtype)
    out[rr0 - r0:rr1 - r0, cc0 - c0:cc1 - c0] = data
    return out


class CodeLookup:
    """Raster code -> class index, the one look-up of every class raster.

    The labels get indices ``first``, ``first + 1``, ... in the order given. A
    code not in the table (or whose label is not among ``labels``) and the
    raster's nodata value get ``nodata_index``; masked cells (beyond the
    raster's edge) get ``outside_index``.

    Parameters
    ----------
    codes : mapping of int to str
        The code table (raster code -> class label).
    labels : sequence of str
        Class labels in index order.
    nodata : float or None
        The raster's nodata value (None or NaN: none).
    first, nodata_index, outside_index : int
        Where the indices start, and the indices of nodata and outside cells.
    """

    def __init__(self, codes: Mapping[int, str], labels: Sequence[str], nodata: float | None,
                 *, first: int, nodata_index: int, outside_index: int) -> None:
        self.labels = tuple(labels)
        pos = {label: first + i for i, label in enumerate(self.labels)}
        items = sorted((int(k), pos[v]) for k, v in codes.items() if v in pos)
        self.codes = np.array([k for k, _ in items], dtype=np.int64)
        self.idx = np.array([v for _, v in items], dtype=np.int32)
        self.nodata = nodata
        self.nodata_index, self.outside_index = nodata_index, outside_index

    def index(self, block: NDArray[Any]) -> NDArray[np.int32]:
        """Class index of every cell of ``block`` (a plain or masked array of codes)."""
        vals = np.asarray(block)
        if vals.dtype.kind in "iub" and vals.dtype.itemsize <= 2 and self.codes.size:
            out = self._small_int(vals)
            if self.nodata is not None and not np.isnan(self.nodata):
                out[vals == self.nodata] = self.nodata_index
        elif vals.dtype.kind in "iu" and self._dense is not None:
            out = self._dense_gather(vals)  # nodata is in its table
        else:
            out = self._search(vals)
            if self.nodata is not None and not np.isnan(self.nodata):
                out[vals == self.nodata] = self.nodata_index
        mask = np.ma.getmask(block)
        if mask is not np.ma.nomask:
            out[mask] = self.outside_index
        return out

    def dense_table(self) -> tuple[int, NDArray[np.int32]] | None:
        """(lowest code - 1, class index of every code from it to the highest + 1), or None.

        Integer codes outside that span are nodata, as at the table's two ends (what
        :meth:`index` gives them); None when the codes span more than
        :data:`DENSE_TABLE_MAX` values.
        """
        return self._dense

    @cached_property
    def _dense(self) -> tuple[int, NDArray[np.int32]] | None:
        """Dense code table, when the codes span at most :data:`DENSE_TABLE_MAX` values.

        (lowest code - 1, table over lowest - 1 .. highest + 1): one gather per cell, however
        many codes (map-unit keys run to thousands; a binary search would cost a step per
        doubling).
        """
        if not self.codes.size:
            return None
        low, high = int(self.codes[0]), int(self.codes[-1])
        if high - low > DENSE_TABLE_MAX or max(abs(low), abs(high)) > 1 << 62:
            return None  # (beyond 2**62 an offset from a 32-bit code could overflow)
        table = np.full(high - low + 3, self.nodata_index, dtype=np.int32)
        table[self.codes - low + 1] = self.idx
        nodata = self.nodata
        if nodata is not None and np.isfinite(nodata) and low <= nodata <= high:
            if float(nodata).is_integer():  # nodata wins over a code, as on the other paths
                table[int(nodata) - low + 1] = self.nodata_index
        return low - 1, table

    def _dense_gather(self, vals: NDArray[Any]) -> NDArray[np.int32]:
        """Codes outside the table's span land on its first or last entry (nodata).

        Offsets are computed as ``intp`` (what a gather indexes with, so no second copy) in
        blocks of :data:`GATHER_BLOCK` cells that stay in the CPU's cache (measured: a third
        faster than one pass over a 4000 x 4000 block); 64-bit codes are clipped to the span
        first, so no offset can wrap around.
        """
        start, table = self._dense
        if vals.dtype.itemsize >= 8:
            info = np.iinfo(vals.dtype)
            low, high = max(start, int(info.min)), min(start + table.size - 1, int(info.max))
            if low > high:
                return np.full(vals.shape, self.nodata_index, dtype=np.int32)
            vals = np.clip(vals, vals.dtype.type(low), vals.dtype.type(high))
        flat = np.ascontiguousarray(vals).reshape(-1)
        out = np.empty(flat.size, dtype=np.int32)
        offset = np.empty(min(GATHER_BLOCK, flat.size), dtype=np.intp)
        for i in range(0, flat.size, GATHER_BLOCK):  # blocks that stay in the CPU's cache
            part = flat[i:i + GATHER_BLOCK]
            np.subtract(part, start, out=offset[:part.size], dtype=np.intp)
            np.take(table, offset[:part.size], mode="clip", out=out[i:i + part.size])
        return out.reshape(vals.shape)

    def _small_int(self, vals: NDArray[Any]) -> NDArray[np.int32]:
        """One table over the whole range of a small integer type: a single gather."""
        info = np.iinfo(vals.dtype)
        lut = np.full(int(info.max) - int(info.min) + 1, self.nodata_index, dtype=np.int32)
        keep = (self.codes >= info.min) & (self.codes <= info.max)
        lut[self.codes[keep] - int(info.min)] = self.idx[keep]
        return lut[vals.astype(np.int64) - int(info.min)] if info.min else lut[vals]

    def _search(self, vals: NDArray[Any]) -> NDArray[np.int32]:
        """Binary search in the sorted codes; only exact matches count (1.5 is not 1)."""
        out = np.full(vals.shape, self.nodata_index, dtype=np.int32)
        if not self.codes.size:
            return out
        keys = self.codes.astype(vals.dtype) if vals.dtype.kind == "f" else self.codes
        pos = np.clip(np.searchsorted(keys, vals), 0, keys.size - 1)
        hit = keys[pos] == vals
        out[hit] = self.idx[pos[hit]]
        return out


def nesting(fine: Any, coarse: Any) -> tuple[int, int, int, int] | None:
    """How a coarse grid lies on a fine one, when it does so in whole fine cells.

    Parameters
    ----------
    fine, coarse : affine.Affine
        North-up transforms of the two grids (same CRS).

    Returns
    -------
    (rows, cols, row_offset, col_offset) or None
        Fine rows and columns per coarse cell, and the coarse origin's offset from
        the fine origin in fine rows and columns, when all four are whole numbers
        (within :data:`WHOLE_TOLERANCE`); None otherwise. Then every fine cell
        lies inside one coarse cell.
    """
    ratios = np.array([coarse.e / fine.e, coarse.a / fine.a,
                       (coarse.f - fine.f) / fine.e, (coarse.c - fine.c) / fine.a])
    whole = np.round(ratios)
    if not np.allclose(ratios, whole, rtol=0, atol=WHOLE_TOLERANCE):
        return None
    rows, cols, row_offset, col_offset = (int(v) for v in whole)
    return rows, cols, row_offset, col_offset


@dataclass(frozen=True)
class CentreSampling:
    """The cell of a coarser grid under the centre of each cell of a finer grid.

    Nearest cell, never interpolated. Indices may fall beyond the coarse
    raster; :func:`read_padded` masks those cells.

    Attributes
    ----------
    fine, coarse : affine.Affine
        Transforms of the two grids (same CRS, north-up).
    """

    fine: Any
    coarse: Any

    def indices(self, rows: tuple[int, int], cols: tuple[int, int]
                ) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
        """Coarse row of each fine row ``rows[0]:rows[1]``, coarse column of each fine column."""
        t, ct = self.fine, self.coarse
        xs = t.c + t.a * (np.arange(*cols) + 0.5)
        ys = t.f + t.e * (np.arange(*rows) + 0.5)
        coarse_cols = np.floor((xs - ct.c) / ct.a).astype(np.int64)
        coarse_rows = np.floor((ys - ct.f) / ct.e).astype(np.int64)
        return coarse_rows, coarse_cols

    def window(self, rows: tuple[int, int], cols: tuple[int, int]
               ) -> tuple[tuple[int, int], tuple[int, int]]:
        """The coarse ((r0, r1), (c0, c1)) that the fine cells rows x cols sample (may overhang)."""
        r, c = self.indices(rows, cols)
        return (int(r.min()), int(r.max()) + 1), (int(c.min()), int(c.max()) + 1)

    def gather(self, block: NDArray[Any], rows: tuple[int, int], cols: tuple[int, int]
               ) -> NDArray[Any]:
        """Values on the fine cells rows x cols, from ``block`` read over :meth:`window`."""
        r, c = self.indices(rows, cols)
        r0, c0 = int(r.min()), int(c.min())
        # Nothing to gather only when the indices are exactly r0, r0 + 1, ...: a grid offset by
        # half a cell puts centres on edges, where rounding may skip or repeat one.
        if (np.array_equal(r, np.arange(r0, r0 + block.shape[0]))
                and np.array_equal(c, np.arange(c0, c0 + block.shape[1]))):
            return block
        return block[np.ix_(r - r0, c - c0)]

    def sample(self, raster: ClassGrid, lookup: CodeLookup, rows: tuple[int, int],
               cols: tuple[int, int]) -> NDArray[np.int32]:
        """Class index of ``raster`` at the centres of the fine cells rows x cols."""
        window = self.window(rows, cols)
        return self.gather(lookup.index(read_padded(raster, *window)), rows, cols)
