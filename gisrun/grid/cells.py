"""Cell-level runoff and time to ponding on the soil raster's grid (compute only, no I/O).

Every soil cell inside the subcatchments gets the result of the same engine
run as the subcatchment table, so hot spots show inside a subcatchment. Units
with identical parameters give identical results, so nothing is run per cell:
the per-unit results (one per subcatchment x soil class x cover class x
surface, already deduplicated by :func:`gisrun.engine.run_losses`) are put in a
lookup table ``[subcatchment, soil class, cover class]`` and mapped onto cells.

A cell's value is built in two weightings:

1. Inside one subcatchment: the cover classes inside the soil cell, weighted by
   their share of the cell. Where the cover raster is finer than the soil raster
   on an aligned grid (cell size and origin offset whole multiples of the cover
   cell), the shares are exact counts of cover cells; otherwise the cover cell
   nearest the soil cell's centre is taken (:attr:`CellPlan.note` says so).
   The pervious and impervious parts of a (soil, cover) unit are weighted by
   their areas, as in the subcatchment table.
2. Across subcatchments: a cell cut by a boundary mixes the subcatchments'
   values by the exact share of the cell each polygon covers
   (:func:`gisrun.grid.coverage.cell_coverage`).

Time to ponding is the earliest ponding instant of the cell's pervious parts
(NaN where none ponds). Soil or cover nodata follows the run's nodata rule:
``"dominant"`` gives it the subcatchment's largest unit (as the overlay does);
otherwise it is left out of the weighting, and a cell with nothing known is
nodata. Cells outside all subcatchments are nodata.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import shapely
from numpy.typing import NDArray

from .classes import CentreSampling, CodeLookup, nesting
from .coverage import cell_coverage

__all__ = ["UnitLookup", "CellPlan", "unit_lookup", "plan_cells", "band_values", "rows_per_band"]

#: Entries (cells x classes) handled at once; bounds memory per band (about 32 MB of float64).
BAND_BUDGET = 4_000_000


@dataclass(frozen=True)
class UnitLookup:
    """Per-storm unit results indexed ``[storm, subcatchment, soil, cover]``.

    The last soil and cover index is the nodata slot (filled from the
    subcatchment's dominant unit under the ``"dominant"`` rule, NaN otherwise).

    Attributes
    ----------
    runoff_m : ndarray, shape (n_storms, n_subs, n_soil + 1, n_cover + 1)
        Runoff depth, m, area-weighted over the unit's pervious and impervious parts.
    ponding_s : ndarray, same shape
        Time to ponding of the unit's pervious part, s (NaN: never ponds or no such unit).
    soil_labels, cover_labels : tuple of str
        Class labels in index order.
    """

    runoff_m: NDArray[np.float64]
    ponding_s: NDArray[np.float64]
    soil_labels: tuple[str, ...]
    cover_labels: tuple[str, ...]


def unit_lookup(unit_results: Sequence[pd.DataFrame], sub_ids: Sequence[str], *,
                soil_labels: Sequence[str], cover_labels: Sequence[str],
                fill_dominant: bool) -> UnitLookup:
    """Arrange per-unit results of every storm as a lookup table.

    Parameters
    ----------
    unit_results : sequence of DataFrame
        One frame per storm as from :func:`gisrun.aggregate.summarize_units`
        (``subcatchment_id``, ``soil_class``, ``cover_class``, ``surface``,
        ``area_m2``, ``runoff_depth_m``, ``time_to_ponding_s``).
    sub_ids : sequence of str
        Subcatchment ids in the order of the polygons.
    soil_labels, cover_labels : sequence of str
        Every class label (as in the project's code tables).
    fill_dominant : bool
        Fill the nodata slots with each subcatchment's largest unit.
    """
    soil_labels, cover_labels = tuple(soil_labels), tuple(cover_labels)
    shape = (len(unit_results), len(sub_ids), len(soil_labels) + 1, len(cover_labels) + 1)
    runoff, ponding = np.full(shape, np.nan), np.full(shape, np.nan)
    for k, frame in enumerate(unit_results):
        s, i, j, depth, tmin, area = _per_unit(frame, sub_ids, soil_labels, cover_labels)
        runoff[k, s, i, j], ponding[k, s, i, j] = depth, tmin
        if fill_dominant and len(area):
            order = np.lexsort((-area, s))
            first = order[np.r_[True, s[order][1:] != s[order][:-1]]]
            for arr, vals in ((runoff, depth), (ponding, tmin)):
                arr[k, s[first], -1, :] = vals[first, None]
                arr[k, s[first], :, -1] = vals[first, None]
    return UnitLookup(runoff, ponding, soil_labels, cover_labels)


def _per_unit(frame: pd.DataFrame, sub_ids: Sequence[str], soil_labels: tuple[str, ...],
              cover_labels: tuple[str, ...]) -> tuple[NDArray[Any], ...]:
    df = frame.assign(volume=frame["runoff_depth_m"] * frame["area_m2"],
                      perv_ponding=frame["time_to_ponding_s"].where(
                          frame["surface"] != "impervious"))
    g = df.groupby(["subcatchment_id", "soil_class", "cover_class"], sort=False).agg(
        area=("area_m2", "sum"), volume=("volume", "sum"), ponding=("perv_ponding", "min"))
    g = g.reset_index()
    s = pd.Index(list(sub_ids)).get_indexer(g["subcatchment_id"])
    i = pd.Index(soil_labels).get_indexer(g["soil_class"])
    j = pd.Index(cover_labels).get_indexer(g["cover_class"])
    ok = (s >= 0) & (i >= 0) & (j >= 0)
    area = g["area"].to_numpy(float)
    depth = np.divide(g["volume"].to_numpy(float), area, out=np.zeros_like(area), where=area > 0)
    return s[ok], i[ok], j[ok], depth[ok], g["ponding"].to_numpy(float)[ok], area[ok]


@dataclass(frozen=True)
class CellPlan:
    """How the soil grid, the cover grid and the polygons line up.

    Build it with :func:`plan_cells`.

    Attributes
    ----------
    width, height : int
        Soil grid size (cells).
    px : ndarray of shapely geometries
        Subcatchment polygons in soil-grid coordinates (column, row).
    bounds : ndarray, shape (n, 4)
        Their bounds in grid coordinates.
    soil_classes, cover_classes : CodeLookup
        Raster code -> class index in the :class:`UnitLookup`'s label order;
        unknown codes, nodata and cells beyond the raster -> the nodata slot
        (``cover_classes`` None without a cover raster).
    cover_mode : {"none", "aligned", "nearest"}
        How cover classes are found for a soil cell.
    factor : tuple of int
        Cover cells per soil cell (rows, columns) when aligned.
    offset : tuple of int
        Cover (row, column) of soil cell (0, 0)'s first cover cell when aligned.
    sampling : CentreSampling or None
        The cover cell under each soil cell's centre, when ``cover_mode`` is "nearest".
    note : str
        A sentence for the run's warnings, or "".
    """

    width: int
    height: int
    px: NDArray[Any]
    bounds: NDArray[np.float64]
    soil_classes: CodeLookup
    cover_classes: CodeLookup | None
    cover_mode: str
    factor: tuple[int, int]
    offset: tuple[int, int]
    sampling: CentreSampling | None
    note: str = ""

    def cover_window(self, r0: int, r1: int) -> tuple[tuple[int, int], tuple[int, int]]:
        """Cover rows and columns ((r0, r1), (c0, c1)) needed for soil rows r0:r1 (may overhang)."""
        if self.cover_mode == "aligned":
            (fy, fx), (oy, ox) = self.factor, self.offset
            return (oy + r0 * fy, oy + r1 * fy), (ox, ox + self.width * fx)
        if self.sampling is None:
            raise ValueError("this plan has no cover grid; read no cover block")
        return self.sampling.window((r0, r1), (0, self.width))


def plan_cells(px: NDArray[Any], *, soil_grid: Any, cover_grid: Any | None,
               soil_codes: dict[int, str], cover_codes: dict[int, str] | None,
               soil_labels: Sequence[str], cover_labels: Sequence[str]) -> CellPlan:
    """Line up polygons (already in soil-grid coordinates), soil grid and cover grid.

    Parameters
    ----------
    px : ndarray of shapely geometries
        Polygons in soil-grid coordinates: ``((x - t.c) / t.a, (y - t.f) / t.e)``.
    soil_grid, cover_grid : objects with ``transform``, ``width``, ``height``, ``nodata``
        The rasters' grids (same CRS); ``cover_grid`` None when there is no cover raster.
    soil_codes, cover_codes : dict
        Code tables (code -> class label).
    soil_labels, cover_labels : sequence of str
        Label order of the :class:`UnitLookup`.
    """
    common = dict(width=soil_grid.width, height=soil_grid.height, px=px,
                  bounds=shapely.bounds(px),
                  soil_classes=_lookup(soil_codes, soil_labels, soil_grid.nodata))
    if cover_grid is None:
        return CellPlan(cover_classes=None, cover_mode="none", factor=(1, 1), offset=(0, 0),
                        sampling=None, **common)
    cover = _lookup(cover_codes or {}, cover_labels, cover_grid.nodata)
    st, ct = soil_grid.transform, cover_grid.transform
    inside = nesting(ct, st)  # soil cells as whole blocks of cover cells
    if inside is not None and inside[0] >= 1 and inside[1] >= 1:
        fy, fx, oy, ox = inside
        return CellPlan(cover_classes=cover, cover_mode="aligned", factor=(fy, fx),
                        offset=(oy, ox), sampling=None, **common)
    note = "" if nesting(st, ct) is not None else (
        "cell-level rasters: the cover grid is not an integer subdivision of the soil grid, so "
        "each soil cell takes the cover class at its centre (nearest cover cell)")
    return CellPlan(cover_classes=cover, cover_mode="nearest", factor=(1, 1), offset=(0, 0),
                    sampling=CentreSampling(st, ct), note=note, **common)


def _lookup(codes: dict[int, str], labels: Sequence[str], nodata: float | None) -> CodeLookup:
    """Codes -> label index; unknown codes, nodata and cells beyond the raster -> len(labels)."""
    return CodeLookup(codes, labels, nodata, first=0, nodata_index=len(labels),
                      outside_index=len(labels))


def rows_per_band(plan: CellPlan) -> int:
    """Soil rows per band so that one band's work stays within :data:`BAND_BUDGET` entries."""
    per_row = 8 * plan.width * plan.factor[0] * plan.factor[1]
    return int(max(1, min(plan.height, BAND_BUDGET // max(per_row, 1))))


def band_values(plan: CellPlan, lookup: UnitLookup, r0: int, soil_block: NDArray[Any],
                cover_block: NDArray[Any] | None
                ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Runoff depth (m) and time to ponding (s) of soil rows ``r0:r0 + h``, every storm.

    The work runs on the finer of the two grids (the cover grid when it is an
    aligned subdivision of the soil grid): every polygon part of every fine cell
    takes the result of its (subcatchment, soil class, cover class) unit, and a
    soil cell is the area-weighted mean of its parts, exactly as the overlay
    counts unit areas.

    Parameters
    ----------
    plan : CellPlan
    lookup : UnitLookup
    r0 : int
        First soil row of the band.
    soil_block : ndarray, shape (h, width)
        Soil codes of the band (masked cells count as nodata).
    cover_block : ndarray or None
        Cover codes of :meth:`CellPlan.cover_window` (masked beyond the raster).

    Returns
    -------
    runoff_m, ponding_s : ndarray, shape (n_storms, h, width)
        NaN where the cell is outside every subcatchment or nothing is known
        (``runoff_m``), or where no pervious part ponds (``ponding_s``).
    """
    h, w = soil_block.shape
    fy, fx = plan.factor
    soil = plan.soil_classes.index(soil_block)
    cover = _cover_classes(plan, r0, h, cover_block)  # (h * fy, w * fx)
    poly, frow, fcol, share = _band_coverage(plan, r0, r0 + h)
    n_storms = lookup.runoff_m.shape[0]
    runoff = np.full((n_storms, h * w), np.nan)
    ponding = np.full((n_storms, h * w), np.nan)
    srow, scol = frow // fy, fcol // fx
    cell = srow * w + scol
    s_idx, c_idx = soil[srow, scol], cover[frow, fcol]
    for k in range(n_storms):
        v = lookup.runoff_m[k, poly, s_idx, c_idx]
        t = lookup.ponding_s[k, poly, s_idx, c_idx]
        ok = np.isfinite(v)
        weight = np.where(ok, share, 0.0)
        num = np.bincount(cell, weight * np.where(ok, v, 0.0), minlength=h * w)
        tot = np.bincount(cell, weight, minlength=h * w)
        runoff[k] = np.divide(num, tot, out=np.full(h * w, np.nan), where=tot > 0)
        first = np.full(h * w, np.inf)
        pond = ok & np.isfinite(t) & (share > 0)
        np.minimum.at(first, cell[pond], t[pond])
        ponding[k] = np.where(np.isfinite(first) & (tot > 0), first, np.nan)
    return runoff.reshape(n_storms, h, w), ponding.reshape(n_storms, h, w)


def _cover_classes(plan: CellPlan, r0: int, h: int, cover_block: NDArray[Any] | None
                   ) -> NDArray[np.int32]:
    """Cover class index of every fine cell of the band (nodata: the number of cover labels)."""
    fy, fx = plan.factor
    if plan.cover_classes is None or cover_block is None:
        return np.zeros((h * fy, plan.width * fx), dtype=np.int32)
    idx = plan.cover_classes.index(cover_block)
    if plan.sampling is None:  # aligned: the block is the band's cover cells
        return idx
    return plan.sampling.gather(idx, (r0, r0 + h), (0, plan.width))


def _band_coverage(plan: CellPlan, r0: int, r1: int
                   ) -> tuple[NDArray[np.intp], NDArray[np.intp], NDArray[np.intp],
                              NDArray[np.float64]]:
    """(polygon, fine row in band, fine column, covered share) of every part in soil rows r0:r1."""
    b = plan.bounds
    fy, fx = plan.factor
    hit = np.flatnonzero((b[:, 1] < r1) & (b[:, 3] > r0) & (b[:, 0] < plan.width) & (b[:, 2] > 0))
    empty = (np.zeros(0, np.intp),) * 3 + (np.zeros(0),)
    if hit.size == 0:
        return empty
    clipped = shapely.clip_by_rect(plan.px[hit], 0.0, float(r0), float(plan.width), float(r1))
    keep = ~shapely.is_empty(clipped) & (shapely.area(clipped) > 0)
    if not keep.any():
        return empty
    hit, clipped = hit[keep], clipped[keep]
    if (fy, fx) != (1, 1):
        clipped = shapely.transform(clipped, lambda xy: xy * np.array([fx, fy], dtype=float))
    cov = cell_coverage(clipped, origin=(0.0, float(r0 * fy)))
    n = cov.run_stop - cov.run_start
    owner = np.repeat(np.arange(n.size), n)
    run_cols = np.arange(owner.size) - np.repeat(np.cumsum(n) - n, n) + cov.run_start[owner]
    poly = np.concatenate([cov.poly, cov.run_poly[owner]])
    row = np.concatenate([cov.row, cov.run_row[owner]])
    col = np.concatenate([cov.col, run_cols])
    share = np.concatenate([cov.fraction, cov.run_weight[owner]])
    ok = (col >= 0) & (col < plan.width * fx) & (row >= 0) & (row < (r1 - r0) * fy) & (share > 0)
    return (hit[poly[ok]], row[ok].astype(np.intp), col[ok].astype(np.intp), share[ok])
