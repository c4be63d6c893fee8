"""Each subcatchment as two lumped units: its impervious share and one pervious unit.

The lumped model a drainage model is given: the subcatchment's impervious parts
as one unit and its pervious parts as another, each with parameters averaged
over its parts by area, run side by side through the same engine and combined by
area. :func:`lump_units` builds the two units of every subcatchment;
:class:`LumpedRunner` runs them for many (subcatchment, storm) pairs in one
engine call, with a trial value of one parameter on the pervious unit.

Averaging over the parts of one surface
---------------------------------------
Every declared parameter column (:data:`gisrun.engine.PARAMETERS`) is the
area-weighted arithmetic mean over the surface's parts, except a run option (a
parameter with a fixed set of allowed values, e.g. the curve number's Ia/S),
which takes the value of the surface's largest part. A subcatchment whose parts
use more than one loss method is lumped with the method of its largest area
(the note of its rows says so). A surface a subcatchment does not have gets the
other surface's values; its area is 0, so it adds nothing.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..engine import PARAMETERS, run_losses

__all__ = ["LumpedUnits", "LumpedRunner", "lump_units", "ENGINE_BATCH"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.intp]

#: Most lumped units run in one engine call (bounds its step arrays: 4096 x steps x 8 B x 3).
ENGINE_BATCH = 4096


@dataclass(frozen=True)
class LumpedUnits:
    """The two lumped units of each subcatchment with modelled area (SI).

    Attributes
    ----------
    sub_ids : ndarray of object
        Subcatchments lumped, in the order of the ``sub_ids`` given to :func:`lump_units`.
    rows : ndarray of int
        Position of each in that ``sub_ids``.
    method : ndarray of object
        The loss method each is lumped with.
    mixed : ndarray of bool
        Its parts use more than one loss method.
    area_m2, impervious_area_m2 : ndarray
        Modelled area, and the part of it on impervious parts.
    pervious, impervious : DataFrame
        One row per subcatchment: every declared parameter column present in the
        unit parameters, averaged over the parts of that surface.
    """

    sub_ids: NDArray[np.object_]
    rows: IntArray
    method: NDArray[np.object_]
    mixed: NDArray[np.bool_]
    area_m2: FloatArray
    impervious_area_m2: FloatArray
    pervious: pd.DataFrame
    impervious: pd.DataFrame

    @property
    def impervious_fraction(self) -> FloatArray:
        """Impervious share of the modelled area."""
        return self.impervious_area_m2 / self.area_m2

    @property
    def pervious_area_m2(self) -> FloatArray:
        """Modelled area on pervious parts."""
        return self.area_m2 - self.impervious_area_m2

    def take(self, which: IntArray) -> LumpedUnits:
        """The lumped units of the subcatchments at positions ``which``."""
        return LumpedUnits(self.sub_ids[which], self.rows[which], self.method[which],
                           self.mixed[which], self.area_m2[which],
                           self.impervious_area_m2[which],
                           self.pervious.iloc[which].reset_index(drop=True),
                           self.impervious.iloc[which].reset_index(drop=True))


def lump_units(params: pd.DataFrame, sub_ids: Any, *, default_method: str) -> LumpedUnits:
    """The impervious and pervious lumped unit of every subcatchment with modelled area.

    Parameters
    ----------
    params : DataFrame
        Unit parameters (``subcatchment_id``, ``surface``, ``area_m2``,
        ``loss_method`` and SI parameter columns), one row per unit part.
    sub_ids : array_like
        Subcatchment ids in output order.
    default_method : str
        Method of every part when ``params`` has no ``loss_method`` column.
    """
    index = pd.Index(np.asarray(sub_ids, dtype=object))
    row = index.get_indexer(params["subcatchment_id"].to_numpy(dtype=object))
    area = params["area_m2"].to_numpy(dtype=np.float64)
    impervious = params["surface"].to_numpy() == "impervious"
    n = len(index)
    total = np.bincount(row, weights=area, minlength=n)
    kept = np.flatnonzero(total > 0)
    methods = (params["loss_method"].to_numpy(dtype=object) if "loss_method" in params.columns
               else np.full(len(params), default_method, dtype=object))
    method, mixed = _largest_method(row, area, methods, n)
    columns = [c for c, p in PARAMETERS.items() if p.in_frame and c in params.columns]
    surfaces = {name: _surface_means(params, columns, row, area, mask, n)
                for name, mask in (("pervious", ~impervious), ("impervious", impervious))}
    for name, other in (("pervious", "impervious"), ("impervious", "pervious")):
        surfaces[name] = surfaces[name].fillna(surfaces[other])
    for column in columns:
        fill = PARAMETERS[column].missing
        for frame in surfaces.values():
            frame[column] = frame[column].fillna(0.0 if fill is None else fill)
    return LumpedUnits(
        sub_ids=index.to_numpy()[kept], rows=kept, method=method[kept], mixed=mixed[kept],
        area_m2=total[kept],
        impervious_area_m2=np.bincount(row, weights=area * impervious, minlength=n)[kept],
        pervious=surfaces["pervious"].iloc[kept].reset_index(drop=True),
        impervious=surfaces["impervious"].iloc[kept].reset_index(drop=True))


def _largest_method(row: IntArray, area: FloatArray, methods: NDArray[np.object_], n: int
                    ) -> tuple[NDArray[np.object_], NDArray[np.bool_]]:
    """Per subcatchment, the method of its largest area, and whether its parts mix methods."""
    frame = pd.DataFrame({"row": row, "method": methods, "area": area})
    by = frame.groupby(["row", "method"], sort=False)["area"].sum().reset_index()
    by = by.sort_values(["row", "area"], ascending=[True, False], kind="stable")
    first = by.drop_duplicates("row")
    out = np.full(n, None, dtype=object)
    out[first["row"].to_numpy()] = first["method"].to_numpy()
    counts = np.bincount(by["row"].to_numpy(), minlength=n)
    return out, counts > 1


def _surface_means(params: pd.DataFrame, columns: list[str], row: IntArray, area: FloatArray,
                   mask: NDArray[np.bool_], n: int) -> pd.DataFrame:
    """Area-weighted means of one surface's parts per subcatchment (NaN where it has none)."""
    weight = np.bincount(row, weights=area * mask, minlength=n)
    out: dict[str, FloatArray] = {}
    largest = _largest_part(row, area * mask, n)
    for column in columns:
        values = params[column].to_numpy(dtype=np.float64)
        if PARAMETERS[column].allowed:  # a run option: the largest part's value
            out[column] = np.where(largest >= 0, values[np.maximum(largest, 0)], np.nan)
            continue
        total = np.bincount(row, weights=area * mask * values, minlength=n)
        out[column] = np.divide(total, weight, out=np.full(n, np.nan), where=weight > 0)
    return pd.DataFrame(out)


def _largest_part(row: IntArray, area: FloatArray, n: int) -> IntArray:
    """Position of each subcatchment's largest part of positive area, -1 where none."""
    order = np.lexsort((-area, row))
    first = np.full(n, -1, dtype=np.intp)
    rows_sorted = row[order]
    starts = np.flatnonzero(np.r_[True, rows_sorted[1:] != rows_sorted[:-1]])
    best = order[starts]
    keep = area[best] > 0
    first[rows_sorted[starts][keep]] = best[keep]
    return first


class LumpedRunner:
    """Runs lumped units of one loss method through the engine, many at once.

    Parameters
    ----------
    units : LumpedUnits
        Subcatchments lumped with ``method``.
    method : str
        Their loss method.
    rains : sequence of ndarray
        Each storm's rain per run step, m: ``(steps,)`` for every subcatchment alike, or
        ``(steps, subcatchments)`` (areal rain, one column per subcatchment of ``units``).
        Storms of different lengths are padded with dry steps at the end, which change no
        runoff.
    dt_s : float
        The run's time step, s.
    rain_scale : ndarray, optional
        Factor on storm depth per subcatchment of ``units``.
    """

    def __init__(self, units: LumpedUnits, method: str, rains: list[FloatArray], dt_s: float,
                 rain_scale: FloatArray | None = None) -> None:
        self.units, self.method, self.dt_s = units, method, float(dt_s)
        steps = max(len(r) for r in rains)
        n = len(units.sub_ids)
        self.rain = np.zeros((steps, len(rains)))
        #: Areal storms: their (steps, subcatchments) rain, padded to ``steps``.
        self.areal: dict[int, FloatArray] = {}
        for k, r in enumerate(rains):
            if np.ndim(r) == 2:
                self.areal[k] = np.zeros((steps, n))
                self.areal[k][: len(r)] = r
            else:
                self.rain[: len(r), k] = r
        self.scale = np.ones(n) if rain_scale is None else np.asarray(rain_scale, float)
        totals = np.repeat(self.rain.sum(axis=0)[:, None], n, axis=1)
        for k, matrix in self.areal.items():  # summed in the order numpy sums self.rain (one
            # column: pairwise; several: row by row), so a column of areal rain equal to a
            # storm's series gives the same total to the last bit
            rows_first = self.rain.shape[1] > 1
            totals[k] = (np.cumsum(matrix, axis=0)[-1] if rows_first
                         else matrix.T.copy().sum(axis=1))
        self.rain_total = totals * self.scale[None, :]  # (storms, subs)
        every = np.repeat(np.arange(n), len(rains))
        storms = np.tile(np.arange(len(rains)), n)
        depth = self.run(units.impervious.iloc[every], every, storms)
        self.impervious_depth = depth.reshape(n, len(rains)).T  # (storms, subs)

    def run(self, frame: pd.DataFrame, subs: IntArray, storms: IntArray) -> FloatArray:
        """Runoff depth (m) of each row of ``frame``: subcatchment ``subs``, storm ``storms``."""
        out = np.empty(len(subs))
        for start in range(0, len(subs), ENGINE_BATCH):
            part = slice(start, start + ENGINE_BATCH)
            rain = self._rain(subs[part], storms[part])
            loss = run_losses(frame.iloc[part], rain, self.dt_s, method=self.method,
                              deduplicate=False)
            out[part] = loss.excess_m.sum(axis=0)
        return out

    def _rain(self, subs: IntArray, storms: IntArray) -> FloatArray:
        """Rain per step (steps, rows) of subcatchments ``subs`` under storms ``storms``."""
        rain = self.rain[:, storms] * self.scale[subs][None, :]
        for k, matrix in self.areal.items():
            cols = np.flatnonzero(storms == k)
            if cols.size:
                rain[:, cols] = matrix[:, subs[cols]] * self.scale[subs[cols]][None, :]
        return rain

    def pervious_depth(self, column: str, values: FloatArray, subs: IntArray,
                       storms: IntArray, *, held: Mapping[str, FloatArray] | None = None
                       ) -> FloatArray:
        """Runoff depth (m) of the pervious units ``subs`` with ``column`` set to ``values``.

        ``held`` (column -> values, one per row) sets more columns.
        """
        frame = self.units.pervious.iloc[subs].reset_index(drop=True)
        for other, given in (held or {}).items():
            frame[other] = given
        frame[column] = values
        return self.run(frame, subs, storms)

    def whole_depth(self, pervious_depth: FloatArray, subs: IntArray, storms: IntArray
                    ) -> FloatArray:
        """Subcatchment runoff depth (m): both units combined by area."""
        u = self.units
        imp = u.impervious_area_m2[subs] * self.impervious_depth[storms, subs]
        return (imp + u.pervious_area_m2[subs] * pervious_depth) / u.area_m2[subs]
