"""The overlay's computation grid: the finer of the soil and cover rasters, and its classes.

Class indices on the grid: 0 outside the rasters, 1 nodata, then one per (soil class x cover
class) pair, soil-major. The coarser raster is sampled at each fine cell's centre
(:class:`gisrun.grid.classes.CentreSampling`); :mod:`gisrun.grid.overlay` says when that is exact.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import NDArray
from pyproj import CRS

from ..crs import geodesic_cell_area_m2, linear_unit_m
from ..errors import CRSError, InputError
from .classes import CentreSampling, ClassGrid, CodeLookup, nesting, read_padded

__all__ = ["FineGrid", "UNSPECIFIED_COVER", "OUTSIDE_CLASS", "NODATA_CLASS", "lookup_classes",
           "combined_table", "note_alignment"]

UNSPECIFIED_COVER = "unspecified"
OUTSIDE_CLASS, NODATA_CLASS = 0, 1  # class indices before the real (soil x cover) classes


class FineGrid:
    """The computation grid (the finer raster) and how to read classes on it."""

    def __init__(self, fine: ClassGrid, coarse: ClassGrid | None, fine_lut: CodeLookup,
                 coarse_lut: CodeLookup | None, fine_is_soil: bool, labels: list[tuple[str, str]]):
        self.fine, self.coarse, self.fine_lut, self.coarse_lut = fine, coarse, fine_lut, coarse_lut
        self.fine_is_soil, self.labels = fine_is_soil, labels
        self.crs = CRS.from_user_input(fine.crs)
        self.t = fine.transform
        self.n_classes = 2 + len(labels)
        self._sampling = None if coarse is None else CentreSampling(fine.transform,
                                                                    coarse.transform)
        self._combined = None if coarse_lut is None else combined_table(
            fine_lut, coarse_lut, fine_is_soil)
        self._tables: dict[str, tuple[int, NDArray[np.int32]]] = {}

    @classmethod
    def build(cls, soil: ClassGrid, cover: ClassGrid | None, soil_codes: Mapping[int, str],
              cover_codes: Mapping[int, str] | None, notes: list[str]) -> FineGrid:
        """The finer of the soil and cover grids, with both code tables."""
        soil_lut = lookup_classes(soil_codes, soil.nodata)
        if cover is None:
            labels = [(s, UNSPECIFIED_COVER) for s in soil_lut.labels]
            return cls(soil, None, soil_lut, None, True, labels)
        if cover_codes is None:
            raise InputError(f"{cover.where}", "cover raster given without a code table",
                             "add the cover codes")
        if not CRS.from_user_input(soil.crs).equals(CRS.from_user_input(cover.crs)):
            raise CRSError(f"{cover.where}", f"CRS differs from the soil raster {soil.where}",
                           "warp one raster to the other's CRS with nearest neighbour first")
        cover_lut = lookup_classes(cover_codes, cover.nodata)
        labels = [(s, c) for s in soil_lut.labels for c in cover_lut.labels]
        soil_cell = abs(soil.transform.a * soil.transform.e)
        fine_is_soil = soil_cell <= abs(cover.transform.a * cover.transform.e)
        fine, coarse = (soil, cover) if fine_is_soil else (cover, soil)
        note_alignment(fine, coarse, notes)
        luts = (soil_lut, cover_lut) if fine_is_soil else (cover_lut, soil_lut)
        return cls(fine, coarse, luts[0], luts[1], fine_is_soil, labels)

    def classes(self, r0: int, r1: int, c0: int, c1: int) -> NDArray[np.int32]:
        """Class index of fine cells rows r0:r1, cols c0:c1 (0 outside, 1 nodata)."""
        fine = self.fine_lut.index(read_padded(self.fine, (r0, r1), (c0, c1)))
        if self.coarse is None:
            return fine
        coarse = self._sampling.sample(self.coarse, self.coarse_lut, (r0, r1), (c0, c1))
        # one look-up in the (fine class x coarse class) table instead of arithmetic and masks
        flat = fine * np.int32(len(self.coarse_lut.labels) + 2)
        flat += coarse
        return self._combined[flat]

    def class_source(self, r0: int, r1: int, c0: int, c1: int
                     ) -> tuple[NDArray[np.integer], NDArray[np.int32], tuple[int, int, int, int]]:
        """Classes of rows r0:r1, cols c0:c1 as (codes, table, look) for the overlay kernel.

        One raster of integer codes of up to 32 bits (with a dense table): its codes as read
        (only the part inside the raster) with the table from code to class, ``look`` =
        (lowest code, outside class, window row and column of the codes' first cell):
        ``table[code - lowest]`` is what :meth:`classes` gives the cell, a quarter or half of
        its memory and no pass over the window. Otherwise :meth:`classes` itself, with the
        identity table.
        """
        rr0, rr1 = max(r0, 0), min(r1, self.fine.height)
        cc0, cc1 = max(c0, 0), min(c1, self.fine.width)
        if self.coarse is None and rr0 < rr1 and cc0 < cc1:
            codes, _ = self.fine.read_window(((rr0, rr1), (cc0, cc1)))
            found = self._code_table(codes.dtype)
            if found is not None and not np.ma.is_masked(codes):
                low, table = found
                return np.asarray(codes), table, (low, OUTSIDE_CLASS, rr0 - r0, cc0 - c0)
        table = np.arange(self.n_classes, dtype=np.int32)
        return self.classes(r0, r1, c0, c1), table, (0, OUTSIDE_CLASS, 0, 0)

    def _code_table(self, dtype: np.dtype) -> tuple[int, NDArray[np.int32]] | None:
        """(lowest code, class of every code from it on) for codes of this type, or None.

        8 and 16 bits: every value of the type (built once). 32 bits: the look-up's dense table
        (its ends are nodata, and the kernel holds codes beyond them to the ends, as
        :meth:`CodeLookup.index` does). Otherwise None.
        """
        if dtype.kind not in "iu" or dtype.itemsize > 4:
            return None
        if dtype.itemsize == 4:
            return self.fine_lut.dense_table()
        if dtype.str not in self._tables:
            info = np.iinfo(dtype)
            every = np.arange(int(info.min), int(info.max) + 1).astype(dtype)
            self._tables[dtype.str] = (int(info.min), self.fine_lut.index(every))
        return self._tables[dtype.str]

    def row_weights(self, r0: int, r1: int) -> NDArray[np.float64] | None:
        """Cell area per row in m2 for a geographic grid; None for a projected one."""
        if not self.crs.is_geographic:
            return None
        t = self.t
        edges = t.f + t.e * np.arange(r0, r1 + 1)
        lat = np.clip(edges, -90.0, 90.0)
        return geodesic_cell_area_m2(self.crs, t.c, t.c + t.a, lat[:-1], lat[1:])

    @property
    def cell_area_m2(self) -> float:
        """Ground area of one cell in m2 (1 on a geographic grid, whose row weights carry it)."""
        if self.crs.is_geographic:
            return 1.0  # row weights carry the area
        return abs(self.t.a * self.t.e) * linear_unit_m(self.crs) ** 2


def lookup_classes(codes: Mapping[int, str], nodata: float | None) -> CodeLookup:
    """Codes -> 0 outside, 1 nodata, 2.. labels (sorted)."""
    return CodeLookup(codes, sorted(set(codes.values())), nodata, first=2,
                      nodata_index=NODATA_CLASS, outside_index=OUTSIDE_CLASS)


def combined_table(fine: CodeLookup, coarse: CodeLookup, fine_is_soil: bool
                    ) -> NDArray[np.int32]:
    """Class of every (fine index, coarse index) pair, flattened fine-major.

    Real classes are soil-major: (soil - 2) * n_cover + (cover - 2) + 2. A pair
    with an outside cell is outside; otherwise one with a nodata cell is nodata.
    """
    f = np.arange(len(fine.labels) + 2)[:, None]
    c = np.arange(len(coarse.labels) + 2)[None, :]
    soil, cover = (f, c) if fine_is_soil else (c, f)
    n_cover = len(coarse.labels if fine_is_soil else fine.labels)
    out = (soil - 2) * n_cover + (cover - 2) + 2
    out = np.where((soil == NODATA_CLASS) | (cover == NODATA_CLASS), NODATA_CLASS, out)
    out = np.where((soil == OUTSIDE_CLASS) | (cover == OUTSIDE_CLASS), OUTSIDE_CLASS, out)
    return out.astype(np.int32).ravel()


def note_alignment(fine: ClassGrid, coarse: ClassGrid, notes: list[str]) -> None:
    """Add a note when the coarse grid's cells do not nest in the fine grid's."""
    ft, ct = fine.transform, coarse.transform
    if nesting(ft, ct) is not None:
        return
    bound = abs(ft.a / ct.a) + abs(ft.e / ct.e)
    notes.append(f"{coarse.where} is not aligned with {fine.where}: sampled at the finer grid's "
                 f"cell centres; class shares may be off by up to about {bound:.1%} of each area")
