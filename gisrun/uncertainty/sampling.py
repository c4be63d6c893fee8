"""Run parameter sets through the engine on the distinct unit parts, aggregate to subcatchments.

A chunk's unit parts are reduced once to their distinct rows (same parameters,
method, rain factor, soil, cover and surface; per subcatchment only where an
override names it). A sample changes the values of those rows only, so every
sample costs one engine run over the distinct rows, not over every unit: units
that share a row share its result, exactly as the engine's own deduplication
copies it. Per-unit totals are spread back by index and area-weighted to
subcatchments with the run's own weights (:func:`gisrun.aggregate.area_weights`),
so a sample whose values equal the run's gives the run's figures bit for bit.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..aggregate import area_weights
from ..engine import run_losses
from .ranges import Ranges
from .spread import SPREADS, values_from_uniform

__all__ = ["DistinctParts", "distinct_parts", "SampleRunner", "sampled_values",
           "apply_values", "StormFigures"]

FloatArray = NDArray[np.float64]
_KEYS = ("soil_class", "cover_class", "surface", "hydrologic_soil_group", "loss_method")


@dataclass(frozen=True)
class DistinctParts:
    """The distinct rows of a unit parameter frame and, for every unit, its row."""

    frame: pd.DataFrame
    inverse: NDArray[np.intp]
    #: Rain depth factor of each distinct row (None: every row takes the storm as is).
    rain_scale: FloatArray | None


def distinct_parts(params: pd.DataFrame, *, named: set[str] = frozenset(),
                   rain_scale: FloatArray | None = None) -> DistinctParts:
    """Group unit parts that any sample treats alike (see the module docstring)."""
    params = params.reset_index(drop=True)
    ids = params["subcatchment_id"].astype(str).to_numpy(dtype=object)
    own = np.where(np.isin(ids, list(named)), ids, "") if named else np.full(len(ids), "")
    cols = [pd.factorize(pd.Series(own))[0].astype(np.float64)]
    cols += [pd.factorize(params[k].astype(object), use_na_sentinel=False)[0].astype(np.float64)
             for k in _KEYS if k in params.columns]
    numeric = [c for c in params.columns if c not in (*_KEYS, "subcatchment_id", "area_m2")
               and pd.api.types.is_numeric_dtype(params[c])]
    cols += [params[c].to_numpy(dtype=np.float64) for c in numeric]
    if rain_scale is not None:
        cols.append(np.asarray(rain_scale, dtype=np.float64))
    key = np.ascontiguousarray(np.column_stack(cols))
    _, first, inverse = np.unique(key.view(np.uint64), axis=0, return_index=True,
                                  return_inverse=True)
    order = np.argsort(first, kind="stable")  # distinct rows in order of first appearance
    position = np.empty_like(order)
    position[order] = np.arange(len(order))
    frame = params.iloc[first[order]].reset_index(drop=True)
    frame["subcatchment_id"] = own[first[order]]
    scale = None if rain_scale is None else np.asarray(rain_scale)[first[order]]
    return DistinctParts(frame, position[inverse.reshape(-1)], scale)


@dataclass(frozen=True)
class StormFigures:
    """One storm's subcatchment figures for one parameter set (SI, layer order)."""

    runoff_depth_m: FloatArray
    time_to_ponding_s: FloatArray


#: Most unit rows in one engine call when parameter sets are run together: the engine's
#: step arrays (3 x steps x rows x 8 bytes) stay near 60 MB for a 24 h storm at 5 min.
BATCH_ROWS = 8192


class SampleRunner:
    """Runs parameter sets of the distinct rows through every storm of a chunk.

    Sets are run together, as many as fit in :data:`BATCH_ROWS` rows per engine
    call: the engine's time loop costs per step, so one call over many sets costs
    little more than one over one set. Where every set is the same, the engine's
    deduplication runs the rows once, exactly as the run did.
    """

    def __init__(self, params: pd.DataFrame, parts: DistinctParts, sub_ids: NDArray[np.object_],
                 rains: Sequence[FloatArray], dt_s: float) -> None:
        self.parts, self.rains, self.dt_s = parts, list(rains), float(dt_s)
        self.weights = area_weights(params["subcatchment_id"], params["area_m2"].to_numpy(),
                                    sub_ids)
        rows = pd.Index(np.asarray(sub_ids, dtype=object)).get_indexer(params["subcatchment_id"])
        self.area_m2 = np.bincount(rows, weights=params["area_m2"].to_numpy(),
                                   minlength=len(sub_ids))
        self.sub_ids = np.asarray(sub_ids, dtype=object)
        self._ponding = _PondingGroups(rows, params, self.area_m2, len(sub_ids))

    def run(self, frame: pd.DataFrame) -> list[StormFigures]:
        """Subcatchment runoff depth and time to ponding of every storm for one set."""
        return [StormFigures(f.runoff_depth_m[0], f.time_to_ponding_s[0])
                for f in self.run_many([frame])]

    def run_many(self, frames: Sequence[pd.DataFrame]) -> list[StormFigures]:
        """Per storm, the figures of every set: arrays of shape (sets, subcatchments)."""
        n_rows = len(self.parts.frame)
        per_call = max(1, BATCH_ROWS // max(n_rows, 1))
        depth = [np.empty((len(frames), len(self.sub_ids))) for _ in self.rains]
        ponding = [np.empty((len(frames), len(self.sub_ids))) for _ in self.rains]
        for start in range(0, len(frames), per_call):
            batch = list(frames[start:start + per_call])
            joined = pd.concat(batch, ignore_index=True) if len(batch) > 1 else batch[0]
            for k, rain in enumerate(self.rains):
                runoff, ponded = self._run_storm(joined, rain, len(batch))
                done = slice(start, start + len(batch))
                depth[k][done] = np.asarray(self.weights @ runoff.T).T
                ponding[k][done] = self._ponding.earliest(ponded)
        return [StormFigures(d, p) for d, p in zip(depth, ponding, strict=True)]

    def _run_storm(self, joined: pd.DataFrame, rain: FloatArray, n_sets: int
                   ) -> tuple[FloatArray, FloatArray]:
        """Per-unit runoff depth and ponding time of each set, (sets x units)."""
        if self.parts.rain_scale is not None:
            rain = rain[:, None] * np.tile(self.parts.rain_scale, n_sets)[None, :]
        loss = run_losses(joined, rain, self.dt_s)
        n_rows = len(self.parts.frame)
        runoff = loss.excess_m.sum(axis=0).reshape(n_sets, n_rows)[:, self.parts.inverse]
        ponded = np.asarray(loss.time_to_ponding_s, dtype=np.float64).reshape(n_sets, n_rows)
        return runoff, ponded[:, self.parts.inverse]


class _PondingGroups:
    """The earliest ponding time of each subcatchment's pervious units, for many sets at once.

    The same figure as :func:`gisrun.aggregate.earliest_ponding` (a minimum does not
    depend on order), by one sort and :func:`numpy.minimum.reduceat` per batch.
    """

    def __init__(self, rows: NDArray[np.intp], params: pd.DataFrame, area_m2: FloatArray,
                 n_subs: int) -> None:
        share = (params["area_m2"].to_numpy() > 0) & (area_m2[rows] > 0)
        keep = np.flatnonzero(share & (params["surface"] != "impervious").to_numpy())
        order = keep[np.argsort(rows[keep], kind="stable")]
        self.order, self.n_subs = order, n_subs
        self.groups, self.starts = np.unique(rows[order], return_index=True)

    def earliest(self, ponded: FloatArray) -> FloatArray:
        out = np.full((ponded.shape[0], self.n_subs), np.nan)
        if not self.order.size:
            return out
        values = ponded[:, self.order]
        values = np.where(np.isnan(values), np.inf, values)
        least = np.minimum.reduceat(values, self.starts, axis=1)
        least[np.isinf(least)] = np.nan
        out[:, self.groups] = least
        return out


def sampled_values(ranges: Ranges, columns: dict[str, FloatArray]
                   ) -> dict[str, tuple[NDArray[np.intp], FloatArray]]:
    """Every sample's values of every sampled column: ``column -> (rows, samples x rows)``.

    ``columns`` maps each draw name to its uniform numbers (one per sample).
    """
    out = {}
    for column, spread in SPREADS.items():
        rows = np.flatnonzero(ranges.sampled(column))
        if not rows.size:
            continue
        u = np.column_stack([columns[name] for name in ranges.draw[column][rows]])
        values = values_from_uniform(u, ranges.central[column][rows], ranges.low[column][rows],
                                     ranges.high[column][rows], spread)
        out[column] = (rows, values)
    return out


def apply_values(base: pd.DataFrame, values: dict[str, tuple[NDArray[np.intp], FloatArray]],
                 *, saturation: float) -> pd.DataFrame:
    """``base`` with each column's given rows set to the given values (one set).

    ``effective_porosity`` sets the moisture deficit (effective porosity x (1 -
    initial saturation)); a Horton final capacity is kept at most the initial one.
    """
    frame = base.copy()
    for column, (rows, vals) in values.items():
        target = "moisture_deficit" if column == "effective_porosity" else column
        if column == "effective_porosity":
            vals = vals * (1.0 - saturation)
        data = frame[target].to_numpy(dtype=np.float64, copy=True)
        data[rows] = vals
        frame[target] = data
    if "horton_fc_m_per_s" in values and "horton_f0_m_per_s" in frame.columns:
        frame["horton_fc_m_per_s"] = np.minimum(frame["horton_fc_m_per_s"].to_numpy(),
                                                frame["horton_f0_m_per_s"].to_numpy())
    return frame
