"""Which sample runs each storm's bands come from, storm by storm.

A storm of one series for every subcatchment gives every unit of a distinct part the same
rain, so one run-wide table of distinct parts (:func:`gisrun.uncertainty.rowsets.gather_rows`)
serves every subcatchment and every such storm: each sample runs it once, whatever the number
of subcatchments.

A storm whose rain differs between subcatchments (rain gauges, a rain grid:
:class:`gisrun.storm.ArealRain`) does not allow that: two units of the same part see the same
rain only where their subcatchments' rain columns are the same. Its table's rows are
therefore distinct per (distinct part, distinct rain column) (:func:`column_rows`): units of
different subcatchments share a row only when their columns are equal bit for bit (a
subcatchment wholly inside one gauge's Thiessen polygon gets that gauge's record, as its
neighbours do). Like the other table it is gathered from every chunk into one table in key
order (the key: the part's key and the column's place among the storm's distinct columns,
which depend on the rain alone), so every engine call, and every figure, is the same however
the run was chunked. Each row's rain is its column of the run's rain matrix, taken for one
engine call at a time, times the part's rain factor: the product the run itself makes
(:func:`gisrun.workflow.rain.unit_rain`).

:func:`storm_runs` gives the storms in turn; an areal storm's table and sample totals
(samples x rows x 16 bytes) are made when the storm is reached and dropped after it.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..project import UncertaintySettings
from .rowsets import RowTable, SampledRows, gather_rows, pick_rows, run_samples
from .spread import SPREADS

__all__ = ["BandStorms", "StormRows", "column_groups", "column_rows", "storm_runs",
           "uniform_rains"]

FloatArray = NDArray[np.float64]

#: Columns compared at once when checking that equal hashes are equal columns.
_CHECK_COLUMNS = 4096


@dataclass(frozen=True)
class BandStorms:
    """The storms the bands are made for (SI)."""

    names: tuple[str, ...]
    #: Per storm, ``(steps,)``, or ``(steps, columns)`` for rain differing between subcatchments.
    rains: tuple[FloatArray, ...]
    dt_s: float
    #: Initial effective saturation (a sampled effective porosity sets the moisture deficit).
    saturation: float
    #: Per chunk, the column of each of its subcatchments in the areal rains; None: the
    #: columns are the chunk's subcatchments in order (one chunk).
    columns: tuple[NDArray[np.intp], ...] | None = None


@dataclass(frozen=True)
class StormRows:
    """One storm's sample totals for a chunk's units."""

    rows: SampledRows
    #: The storm's position in ``rows.samples``, ``rows.at_low`` and ``rows.at_high``.
    storm: int
    #: Each unit's row in ``rows`` (-1 where its part has no range).
    unit_row: NDArray[np.intp]


def uniform_rains(rains: Sequence[FloatArray]) -> list[FloatArray]:
    """The storms of one series for every subcatchment (those the parts' table serves)."""
    return [rain for rain in rains if rain.ndim == 1]


def storm_runs(parts: Sequence[object], settings: UncertaintySettings, storms: BandStorms
               ) -> Iterator[list[StormRows]]:
    """Per storm, in order, one :class:`StormRows` per chunk.

    ``parts`` are the chunks' :class:`~gisrun.uncertainty.analysis.ChunkParts`. The storms
    of one series run first, together, over the run-wide table of parts; a storm of areal
    rain runs its own table when it is reached.
    """
    shared = run_samples(gather_rows(parts), uniform_rains(storms.rains), storms.dt_s,
                         settings, saturation=storms.saturation)
    unit_rows = [_shared_rows(part, shared) for part in parts]
    columns = storms.columns or tuple(np.arange(len(p.sub_ids)) for p in parts)
    uniform = 0
    for rain in storms.rains:
        if rain.ndim == 1:
            yield [StormRows(shared, uniform, rows) for rows in unit_rows]
            uniform += 1
            continue
        table, own_rows = column_rows(parts, columns, rain)
        rows = run_samples(table, [rain], storms.dt_s, settings, saturation=storms.saturation)
        yield [StormRows(rows, 0, unit_row) for unit_row in own_rows]


def _shared_rows(part: object, rows: SampledRows) -> NDArray[np.intp]:
    """Each unit's row in the run-wide table of parts, -1 where its part has no range."""
    of_part = np.array([rows.index.get(k, -1) for k in part.parts.keys], dtype=np.intp)
    return of_part[part.parts.inverse] if len(of_part) else np.full(0, -1, dtype=np.intp)


def column_groups(rain: FloatArray) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    """The distinct columns of ``rain`` (steps x columns): one column of each, each's group.

    Groups are numbered in the order of a hash of the columns' values, so the numbering
    depends on the rain alone; equal hashes are checked to be equal columns.
    """
    hashed = pd.util.hash_pandas_object(pd.DataFrame(rain.T), index=False).to_numpy()
    _, first, group = np.unique(hashed, return_index=True, return_inverse=True)
    group = group.reshape(-1).astype(np.intp)
    for start in range(0, rain.shape[1], _CHECK_COLUMNS):
        block = slice(start, start + _CHECK_COLUMNS)
        if not np.array_equal(rain[:, block], np.take(rain, first[group[block]], axis=1)):
            every = np.arange(rain.shape[1], dtype=np.intp)  # a hash collision: none shared
            return every, every
    return first.astype(np.intp), group


def column_rows(parts: Sequence[object], columns: Sequence[NDArray[np.intp]], rain: FloatArray
                ) -> tuple[RowTable, list[NDArray[np.intp]]]:
    """One areal storm's table, one row per (sampled part, distinct column), and unit rows.

    Parameters
    ----------
    parts : sequence of ChunkParts
        Every chunk's distinct parts and ranges.
    columns : sequence of ndarray of int
        Per chunk, the column of ``rain`` of each of its subcatchments (``part.sub_ids``).
    rain : ndarray, shape (steps, columns)
        The storm's rain per step, m.

    Returns
    -------
    table : RowTable
        The rows in key order, with ``rain_columns`` (each row's column of ``rain``).
    unit_rows : list of ndarray of int
        Per chunk, each unit's row (-1 where its part has no range).
    """
    first, group = column_groups(rain)
    chosen: dict[tuple, tuple[int, int, int]] = {}
    found = []
    for c, (part, cols) in enumerate(zip(parts, columns, strict=True)):
        units, pairs, inverse = _unit_pairs(part, cols, group)
        keys = [(part.parts.keys[r], g) for r, g in pairs.tolist()]
        for key, (r, g) in zip(keys, pairs.tolist(), strict=True):
            chosen.setdefault(key, (c, r, g))
        found.append((units, keys, inverse))
    order = sorted(chosen)
    index = {k: i for i, k in enumerate(order)}
    picks = np.array([chosen[k] for k in order], dtype=np.intp).reshape(-1, 3)
    frame, ranges, scale = pick_rows(parts, picks[:, 0], picks[:, 1])
    unit_rows = []
    for part, (units, keys, inverse) in zip(parts, found, strict=True):
        unit_row = np.full(len(part.parts.inverse), -1, dtype=np.intp)
        unit_row[units] = np.array([index[k] for k in keys], dtype=np.intp)[inverse]
        unit_rows.append(unit_row)
    table = RowTable(frame, ranges, scale, index, rain_columns=first[picks[:, 2]])
    return table, unit_rows


def _unit_pairs(part: object, cols: NDArray[np.intp], group: NDArray[np.intp]
                ) -> tuple[NDArray[np.intp], NDArray[np.intp], NDArray[np.intp]]:
    """A chunk's sampled units, their distinct (part row, column group) pairs, each's pair."""
    sampled = np.zeros(len(part.parts.keys), dtype=bool)
    for column in SPREADS:
        sampled |= part.ranges.sampled(column)
    unit_part = part.parts.inverse
    units = np.flatnonzero(sampled[unit_part]) if len(unit_part) else np.zeros(0, np.intp)
    own = np.asarray(cols, dtype=np.intp)[pd.Index(part.sub_ids).get_indexer(part.unit_sub_ids)]
    pairs = np.column_stack([unit_part[units], group[own[units]]]).astype(np.intp)
    distinct, inverse = np.unique(pairs, axis=0, return_inverse=True)
    return units, distinct.reshape(-1, 2), inverse.reshape(-1)
