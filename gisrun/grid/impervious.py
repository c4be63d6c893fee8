"""Each unit's impervious share from an impervious-share grid, area-weighted exactly.

A unit (subcatchment x soil class x cover class) covers parts of grid cells; its
impervious share is the mean of the grid's values over its area, each cell
weighted by the area of it the unit covers. The covered areas are the overlay's
exact cell coverage (:func:`gisrun.grid.coverage.cell_coverage`), so a unit
inside one cell of 40 % gets 0.4 whatever its shape.

Grids
-----
The computation runs on the finer of the class grid (the finer of soil and
cover, as in :mod:`gisrun.grid.overlay`) and the impervious grid:

- impervious grid as coarse as the class grid or coarser: the impervious value
  at each class cell's centre (nearest cell, never interpolated); exact when the
  grids nest (coarse cell size and origin offset whole multiples of the fine);
- impervious grid finer: exact coverage on the impervious grid itself, each cell
  taking the soil and cover classes under its centre; exact when the class grids
  nest on it.

Otherwise a fine cell straddling a coarse cell edge takes the value (or class)
at its centre, and a note gives the bound of the area concerned.

Values and nodata
-----------------
``scale = "percent"`` values must lie in 0-100, ``"fraction"`` in 0-1; any other
value under a subcatchment is an error naming the file and value. Nodata cells
(the band's nodata value, NaN) and cells beyond the grid are left out of the
weighting: a unit's share is the mean over its cells with a value. Their share of
a subcatchment's area counts against ``[nodata] max_fraction`` as the class
rasters' nodata does (an error above it, whatever the nodata rule); a unit with
no valued cell takes its subcatchment's mean share (a note says so).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from numpy.typing import NDArray
from pyproj import CRS

from ..crs import geodesic_cell_area_m2, linear_unit_m
from ..errors import CRSError, RasterError
from .classes import CentreSampling, ClassGrid, nesting, read_padded
from .coverage import cell_coverage
from .overlay import _combined_table, _compact_chunks, _Grid, _to_grid_crs

__all__ = ["impervious_shares", "SCALE_TOP"]

#: Largest valid value per ``[impervious] scale`` (and what divides it to a fraction).
SCALE_TOP = {"percent": 100.0, "fraction": 1.0}


def impervious_shares(subcatchments: gpd.GeoDataFrame, soil: ClassGrid, cover: ClassGrid | None,
                      impervious: ClassGrid, units: pd.DataFrame, *,
                      soil_codes: Mapping[int, str], cover_codes: Mapping[int, str] | None,
                      scale: str, max_nodata_fraction: float, chunk_cells: int = 4_000_000,
                      ) -> tuple[pd.DataFrame, list[str]]:
    """Add each unit's ``impervious_fraction`` (0-1) measured on the impervious grid.

    Parameters
    ----------
    subcatchments : GeoDataFrame
        ``subcatchment_id`` and polygons (any CRS; moved to the rasters').
    soil, cover : ClassGrid
        The class rasters of the overlay.
    impervious : ClassGrid
        The impervious-share grid (same CRS as the class rasters).
    units : DataFrame
        The overlay's unit table (``subcatchment_id``, ``soil_class``, ``cover_class``).
    soil_codes, cover_codes : mapping
        The code tables of the overlay.
    scale : {"percent", "fraction"}
        What the grid's values are.
    max_nodata_fraction : float
        Largest share of a subcatchment on nodata of the grid.

    Returns
    -------
    units : DataFrame
        ``units`` with ``impervious_fraction`` added.
    notes : list of str

    Raises
    ------
    RasterError
        A value outside the scale's range, or too much nodata under a subcatchment.
    CRSError
        The grid's CRS is not the class rasters'.
    """
    notes: list[str] = []
    classes = _Grid.build(soil, cover, soil_codes, cover_codes, [])
    if not CRS.from_user_input(impervious.crs).equals(classes.crs):
        raise CRSError(impervious.where, f"CRS differs from the soil raster {soil.where}",
                       "warp the impervious grid to the soil raster's CRS first (average "
                       "resampling keeps the share)")
    calc = _ShareGrid(classes, impervious, scale, notes)
    geoms = _to_grid_crs(subcatchments.geometry, classes.crs, [])
    sums = _weighted_sums(geoms, calc, chunk_cells)
    ids = subcatchments["subcatchment_id"].astype(str).to_numpy()
    shares = _shares(ids, sums, classes.labels, max_nodata_fraction, impervious.where)
    return _attach(units, shares, notes), notes


class _ShareGrid:
    """The computation grid: class index and impervious fraction of each of its cells."""

    def __init__(self, classes: _Grid, impervious: ClassGrid, scale: str,
                 notes: list[str]) -> None:
        self.classes_grid, self.impervious, self.scale = classes, impervious, scale
        self.n_classes = classes.n_classes
        self.crs = classes.crs
        fine, imp = classes.fine.transform, impervious.transform
        self.on_impervious = abs(imp.a * imp.e) < abs(fine.a * fine.e) * (1 - 1e-9)
        self.t = imp if self.on_impervious else fine
        coarse = fine if self.on_impervious else imp
        self._to_imp = None if self.on_impervious else CentreSampling(fine, imp)
        self._to_fine = CentreSampling(imp, fine) if self.on_impervious else None
        self._to_coarse = (CentreSampling(imp, classes.coarse.transform)
                           if self.on_impervious and classes.coarse is not None else None)
        self._combined = (None if classes.coarse_lut is None else _combined_table(
            classes.fine_lut, classes.coarse_lut, classes.fine_is_soil))
        if nesting(self.t, coarse) is None:
            bound = abs(self.t.a / coarse.a) + abs(self.t.e / coarse.e)
            notes.append(f"{impervious.where} is not aligned with {classes.fine.where}: read at "
                         "the finer grid's cell centres; impervious shares may be off by up to "
                         f"about {bound:.1%} of each unit's area")

    def classes(self, r0: int, r1: int, c0: int, c1: int) -> NDArray[np.int32]:
        """Class index of the computation grid's cells (0 outside, 1 nodata, 2.. classes)."""
        grid = self.classes_grid
        if not self.on_impervious:
            return grid.classes(r0, r1, c0, c1)
        fine = self._to_fine.sample(grid.fine, grid.fine_lut, (r0, r1), (c0, c1))
        if self._to_coarse is None:
            return fine
        coarse = self._to_coarse.sample(grid.coarse, grid.coarse_lut, (r0, r1), (c0, c1))
        return self._combined[fine * np.int32(len(grid.coarse_lut.labels) + 2) + coarse]

    def values(self, r0: int, r1: int, c0: int, c1: int) -> NDArray[np.float64]:
        """Impervious fraction of the computation grid's cells (NaN: nodata or beyond)."""
        if self.on_impervious:
            return self._fractions(read_padded(self.impervious, (r0, r1), (c0, c1)))
        window = self._to_imp.window((r0, r1), (c0, c1))
        block = self._fractions(read_padded(self.impervious, *window))
        return self._to_imp.gather(block, (r0, r1), (c0, c1))

    def _fractions(self, block: np.ma.MaskedArray) -> NDArray[np.float64]:
        vals = np.ma.filled(block.astype(np.float64), np.nan)
        nodata = self.impervious.nodata
        if nodata is not None and not np.isnan(nodata):
            vals[np.ma.getdata(block) == nodata] = np.nan
        top = SCALE_TOP[self.scale]
        bad = (vals < 0) | (vals > top)
        if bad.any():
            raise RasterError(self.impervious.where, f"holds the value {vals[bad][0]:g}, outside "
                              f"0-{top:g} for [impervious] scale = {self.scale!r}",
                              "fix the grid, give it a nodata value for such cells, or state "
                              "the scale its values are in")
        return vals / top if top != 1.0 else vals

    def row_weights(self, r0: int, r1: int) -> NDArray[np.float64]:
        """Area of one cell in each row r0:r1, m2 (rows differ on a geographic grid)."""
        t = self.t
        if not self.crs.is_geographic:
            return np.full(r1 - r0, abs(t.a * t.e) * linear_unit_m(self.crs) ** 2)
        lat = np.clip(t.f + t.e * np.arange(r0, r1 + 1), -90.0, 90.0)
        return geodesic_cell_area_m2(self.crs, t.c, t.c + t.a, lat[:-1], lat[1:])


def _weighted_sums(geoms: NDArray[Any], calc: _ShareGrid, chunk_cells: int
                   ) -> tuple[NDArray[np.float64], ...]:
    """Per (polygon, class): area with a value, that area times the value, area without one."""
    t, n_cls = calc.t, calc.n_classes
    px = shapely.transform(geoms, lambda xy: np.column_stack(((xy[:, 0] - t.c) / t.a,
                                                               (xy[:, 1] - t.f) / t.e)))
    b = shapely.bounds(px)
    box = np.column_stack([np.floor(b[:, 1]), np.ceil(b[:, 3]), np.floor(b[:, 0]),
                           np.ceil(b[:, 2])]).astype(np.int64)
    out = np.zeros((3, len(geoms) * n_cls))
    for idx in _compact_chunks(shapely.centroid(px), box, chunk_cells):
        r0, r1 = int(box[idx, 0].min()), int(box[idx, 1].max())
        c0, c1 = int(box[idx, 2].min()), int(box[idx, 3].max())
        cov = cell_coverage(px[idx], origin=(float(c0), float(r0)))
        width = c1 - c0
        band = max(1, chunk_cells // max(width, 1))
        for a in range(0, r1 - r0, band):
            b_ = min(a + band, r1 - r0)
            cls = calc.classes(r0 + a, r0 + b_, c0, c1).ravel()
            val = calc.values(r0 + a, r0 + b_, c0, c1).ravel()
            poly, flat, w = _covered_cells(cov, a, b_, width, calc.row_weights(r0 + a, r0 + b_))
            key = idx[poly] * n_cls + cls[flat]
            v = val[flat]
            ok = np.isfinite(v)
            out[0] += np.bincount(key[ok], w[ok], minlength=out.shape[1])
            out[1] += np.bincount(key[ok], w[ok] * v[ok], minlength=out.shape[1])
            out[2] += np.bincount(key[~ok], w[~ok], minlength=out.shape[1])
    return tuple(part.reshape(len(geoms), n_cls) for part in out)


def _covered_cells(cov: Any, a: int, b: int, width: int, row_area: NDArray[np.float64]
                   ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.float64]]:
    """(polygon, flat cell index in rows a:b, covered area m2) of edge cells and interior runs."""
    e0, e1 = np.searchsorted(cov.row, [a, b])
    col = cov.col[e0:e1]
    ok = (col >= 0) & (col < width)
    rows = cov.row[e0:e1][ok] - a
    edge_poly, edge_flat = cov.poly[e0:e1][ok], rows * width + col[ok]
    edge_w = cov.fraction[e0:e1][ok] * row_area[rows]
    s0, s1 = np.searchsorted(cov.run_row, [a, b])
    run_rows = cov.run_row[s0:s1] - a
    start = np.clip(cov.run_start[s0:s1], 0, width)
    n = np.clip(cov.run_stop[s0:s1], 0, width) - start
    n = np.maximum(n, 0)
    owner = np.repeat(np.arange(n.size), n)
    flat = np.arange(owner.size) + np.repeat(run_rows * width + start - (np.cumsum(n) - n), n)
    w = cov.run_weight[s0:s1][owner] * row_area[run_rows[owner]]
    return (np.concatenate([edge_poly, cov.run_poly[s0:s1][owner]]),
            np.concatenate([edge_flat, flat]), np.concatenate([edge_w, w]))


def _shares(ids: NDArray[Any], sums: tuple[NDArray[np.float64], ...],
            labels: list[tuple[str, str]], max_fraction: float, where: str) -> pd.DataFrame:
    """Share per (subcatchment, soil, cover) with a value; checks the nodata limit."""
    valid, weighted, missing = (s[:, 2:] for s in sums)  # real classes only
    total = valid.sum(axis=1) + missing.sum(axis=1)
    fraction = np.divide(missing.sum(axis=1), total, out=np.zeros_like(total), where=total > 0)
    over = fraction > max_fraction + 1e-9
    if over.any():
        worst = ", ".join(f"{i} ({f:.1%})" for i, f in zip(ids[over][:10], fraction[over][:10],
                                                          strict=True))
        raise RasterError(where, f"has nodata or no cells under a share of subcatchments "
                          f"{worst} above [nodata] max_fraction {max_fraction:.1%}",
                          "fill or extend the impervious grid, or raise [nodata] max_fraction")
    poly, cls = np.nonzero(valid > 0)
    pairs = np.array(labels, dtype=object).reshape(-1, 2)
    out = pd.DataFrame({"subcatchment_id": ids[poly], "soil_class": pairs[cls, 0],
                        "cover_class": pairs[cls, 1],
                        "impervious_fraction": weighted[poly, cls] / valid[poly, cls]})
    mean = np.divide(weighted.sum(axis=1), valid.sum(axis=1), out=np.full(len(ids), np.nan),
                     where=valid.sum(axis=1) > 0)
    out.attrs["subcatchment_mean"] = dict(zip(ids, mean, strict=True))
    return out


def _attach(units: pd.DataFrame, shares: pd.DataFrame, notes: list[str]) -> pd.DataFrame:
    """The unit table with each unit's share (its subcatchment's mean where it has none)."""
    keys = ["subcatchment_id", "soil_class", "cover_class"]
    out = units.drop(columns="impervious_fraction", errors="ignore")
    share = out[keys].astype(str).merge(shares, on=keys, how="left")["impervious_fraction"]
    share = share.to_numpy(dtype=np.float64)
    lacking = np.isnan(share)
    if lacking.any():
        mean = shares.attrs["subcatchment_mean"]
        sub = out["subcatchment_id"].astype(str).to_numpy()[lacking]
        share[lacking] = [mean.get(s, np.nan) for s in sub]
        if np.isnan(share).any():
            first = sub[np.isnan(share[lacking])][0]
            raise RasterError("impervious grid", f"has no value under subcatchment {first}",
                              "extend or fill the impervious grid over every subcatchment")
        notes.append(f"{int(lacking.sum())} unit(s) have no impervious-grid value under them "
                     f"and take their subcatchment's mean share (e.g. subcatchment {sub[0]})")
    return out.assign(impervious_fraction=share)
