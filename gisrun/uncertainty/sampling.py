"""Parameter sets through the engine, once per distinct unit part of the whole run.

A chunk's unit parts are reduced to their distinct rows (same parameters, method,
rain factor, soil, cover and surface; per subcatchment only where an override row
or attribute gives that subcatchment a value), each with a *key* that is the same
in every chunk (:func:`distinct_parts`). A sample changes the values of the rows
that have a range (:func:`sampled_values`, :func:`apply_values`). The sampled rows
of every chunk are gathered into one table in the order of their keys and every
sample is run over it once (:func:`run_row_sets`): a soil x cover part that appears
in a thousand chunks is simulated once per sample, not a thousand times, and the
result does not depend on how the run was cut into chunks or on which worker ran
a chunk. Rows without a range keep the run's own results.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..engine import run_losses
from .ranges import Ranges
from .spread import SPREADS, values_from_uniform

__all__ = ["DistinctParts", "distinct_parts", "sampled_values", "apply_values",
           "run_row_sets", "RowFigures", "BATCH_ROWS", "LazySets"]

FloatArray = NDArray[np.float64]
_KEYS = ("soil_class", "cover_class", "surface", "hydrologic_soil_group", "loss_method")

#: Most rows in one engine call when parameter sets are run together: the engine's step
#: arrays (3 x steps x rows x 8 bytes) stay near 60 MB for a 24 h storm at 5 min.
BATCH_ROWS = 8192


@dataclass(frozen=True)
class DistinctParts:
    """The distinct rows of a unit parameter frame, their keys and every unit's row."""

    frame: pd.DataFrame
    inverse: NDArray[np.intp]
    #: Rain depth factor of each distinct row (None: every row takes the storm as is).
    rain_scale: FloatArray | None
    #: One hashable key per distinct row, the same for the same part in any chunk.
    keys: list[tuple]


def distinct_parts(params: pd.DataFrame, *, named: set[str] = frozenset(),
                   rain_scale: FloatArray | None = None) -> DistinctParts:
    """Group unit parts that every sample treats alike (see the module docstring)."""
    params = params.reset_index(drop=True)
    ids = params["subcatchment_id"].astype(str).to_numpy(dtype=object)
    own = np.where(np.isin(ids, list(named)), ids, "") if named else np.full(len(ids), "")
    cols = [pd.factorize(pd.Series(own))[0].astype(np.float64)]
    cols += [pd.factorize(params[k].astype(object), use_na_sentinel=False)[0].astype(np.float64)
             for k in _KEYS if k in params.columns]
    numeric = _numeric_columns(params)
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
    scale = None if rain_scale is None else np.asarray(rain_scale, dtype=np.float64)[first[order]]
    return DistinctParts(frame, position[inverse.reshape(-1)], scale,
                         _keys(frame, numeric, scale))


def _numeric_columns(params: pd.DataFrame) -> list[str]:
    return [c for c in params.columns if c not in (*_KEYS, "subcatchment_id", "area_m2")
            and pd.api.types.is_numeric_dtype(params[c])]


def _keys(frame: pd.DataFrame, numeric: list[str], scale: FloatArray | None) -> list[tuple]:
    """Row keys from the values themselves (exact bits of every number), not chunk codes."""
    text = [frame[c].astype(str).tolist() for c in ("subcatchment_id", *_KEYS)
            if c in frame.columns]
    bits = np.column_stack([frame[c].to_numpy(dtype=np.float64) for c in numeric]
                           + ([scale] if scale is not None else [])
                           ).view(np.int64) if numeric or scale is not None else None
    numbers = [tuple(row) for row in bits.tolist()] if bits is not None else [()] * len(frame)
    return [(*names, *nums) for names, nums in zip(zip(*text, strict=True), numbers,
                                                   strict=True)]


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


@dataclass(frozen=True)
class RowFigures:
    """One storm's totals per parameter set and row: arrays of shape (sets, rows), SI."""

    runoff_depth_m: FloatArray
    time_to_ponding_s: FloatArray


class LazySets(Sequence):
    """Parameter sets made when an engine call takes them (``make(i)`` gives set ``i``).

    A table of many rows (rain that differs between subcatchments) would not fit in
    memory as every sample's frame at once; the last set made is kept for a second look.
    """

    def __init__(self, count: int, make: Callable[[int], pd.DataFrame]) -> None:
        self._count, self._make, self._last = count, make, (-1, None)

    def __len__(self) -> int:
        return self._count

    def __getitem__(self, i: int) -> pd.DataFrame:
        if self._last[0] != i:
            self._last = (i, self._make(i))
        return self._last[1]


def run_row_sets(frames: Sequence[pd.DataFrame], rains: Sequence[FloatArray], dt_s: float, *,
                 rain_scale: FloatArray | None = None,
                 rain_columns: NDArray[np.intp] | None = None) -> list[RowFigures]:
    """Run parameter sets of the same rows through every storm; per storm, each row's totals.

    A storm's rain is one series for every row ``(steps,)``, or a matrix ``(steps,
    columns)`` of which row ``i`` takes column ``rain_columns[i]`` (rain that differs
    between subcatchments); ``rain_scale`` multiplies each row's rain as the run does
    (:func:`gisrun.workflow.rain.unit_rain`). The sets are concatenated into engine calls
    of up to :data:`BATCH_ROWS` rows: the engine's time loop costs per step, so one call
    over many sets costs little more than one over one set; a table of more rows than that
    runs each set in blocks of rows. Every call is fixed by the table alone, so a row's
    totals are the same however the run was chunked. Ponding times of impervious rows are
    NaN (as in the unit results: ponding describes pervious ground).
    """
    n_rows = len(frames[0]) if len(frames) else 0
    runoff = [np.empty((len(frames), n_rows)) for _ in rains]
    ponding = [np.empty((len(frames), n_rows)) for _ in rains]
    per_call = max(1, BATCH_ROWS // max(n_rows, 1))
    for start in range(0, len(frames), per_call):
        sets = slice(start, min(start + per_call, len(frames)))
        batch = [frames[s] for s in range(sets.start, sets.stop)]
        joined = pd.concat(batch, ignore_index=True) if len(batch) > 1 else batch[0]
        for rows in _row_blocks(n_rows):
            part = joined if rows.stop - rows.start == n_rows else joined.iloc[rows]
            impervious = (part["surface"] == "impervious").to_numpy()
            shape = (len(batch), rows.stop - rows.start)
            for k, rain in enumerate(rains):
                call_rain = _call_rain(rain, rain_scale, rain_columns, rows, len(batch))
                loss = run_losses(part, call_rain, dt_s)
                runoff[k][sets, rows] = loss.excess_m.sum(axis=0).reshape(shape)
                ponded = np.where(impervious, np.nan, loss.time_to_ponding_s)
                ponding[k][sets, rows] = ponded.reshape(shape)
    return [RowFigures(r, p) for r, p in zip(runoff, ponding, strict=True)]


def _row_blocks(n_rows: int) -> Iterator[slice]:
    """The rows of each engine call of one set: all of them, or blocks of :data:`BATCH_ROWS`."""
    for start in range(0, max(n_rows, 1), BATCH_ROWS):
        yield slice(start, min(start + BATCH_ROWS, n_rows))


def _call_rain(rain: FloatArray, scale: FloatArray | None, columns: NDArray[np.intp] | None,
               rows: slice, n_sets: int) -> FloatArray:
    """Rain of one engine call: the given rows of ``n_sets`` sets, each row's rain scaled."""
    if rain.ndim == 1:
        return rain if scale is None else rain[:, None] * np.tile(scale[rows], n_sets)[None, :]
    own = np.take(rain, columns[rows], axis=1)
    if scale is not None:
        own = own * scale[rows][None, :]
    return own if n_sets == 1 else np.tile(own, (1, n_sets))
