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
order (the key: the place along the ground of the column's first subcatchment, the part's key,
and the column's place among the storm's distinct columns, all of which depend on the inputs
alone), so every engine call, and every figure, is the same however the run was chunked. Each
row's rain is its column of the run's rain matrix, taken for one engine call at a time, times
the part's rain factor: the product the run itself makes
(:func:`gisrun.workflow.rain.unit_rain`).

:func:`storm_runs` gives the storms in turn; an areal storm's table is run in blocks as its
chunks are served (:mod:`gisrun.uncertainty.blocks`), so its sample totals are held for a few
chunks at a time.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..project import UncertaintySettings
from .blocks import chunk_runs
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
    #: Per column of the areal rains, its subcatchment's place along the ground (a Hilbert
    #: curve, as the chunks are cut); an areal storm's table is in this order (None: columns').
    place: FloatArray | None = None


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
               ) -> Iterator[Iterable[StormRows]]:
    """Per storm, in order, one :class:`StormRows` per chunk (in the order of ``parts``).

    ``parts`` are the chunks' :class:`~gisrun.uncertainty.analysis.ChunkParts`. The storms
    of one series run first, together, over the run-wide table of parts; a storm of areal
    rain runs its own table when it is reached, block by block as its chunks are served
    (:func:`gisrun.uncertainty.blocks.chunk_runs`).
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
        table, own_rows = column_rows(parts, columns, rain, storms.place)
        yield (StormRows(rows, 0, unit_row) for rows, unit_row in chunk_runs(
            table, own_rows, rain, storms.dt_s, settings, saturation=storms.saturation))


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


def column_rows(parts: Sequence[object], columns: Sequence[NDArray[np.intp]], rain: FloatArray,
                place: FloatArray | None = None) -> tuple[RowTable, list[NDArray[np.intp]]]:
    """One areal storm's table, one row per (sampled part, distinct column), and unit rows.

    Parameters
    ----------
    parts : sequence of ChunkParts
        Every chunk's distinct parts and ranges.
    columns : sequence of ndarray of int
        Per chunk, the column of ``rain`` of each of its subcatchments (``part.sub_ids``).
    rain : ndarray, shape (steps, columns)
        The storm's rain per step, m.
    place : ndarray, optional
        Each column's place along the ground; rows go by their column's place (the least
        of a shared column's), then part key, then column group (default: column order).

    Returns
    -------
    table : RowTable
        The rows in key order, with ``rain_columns`` (each row's column of ``rain``); its
        ``index`` is empty (the rows are found through ``unit_rows``).
    unit_rows : list of ndarray of int
        Per chunk, each unit's row (-1 where its part has no range).
    """
    first, group = column_groups(rain)
    place = np.arange(rain.shape[1], dtype=np.float64) if place is None else place
    at = np.full(len(first), np.inf)
    np.minimum.at(at, group, place)
    found, entries = [], []
    for c, (part, cols, rank) in enumerate(zip(parts, columns, _part_ranks(parts), strict=True)):
        units, pairs, inverse = _unit_pairs(part, cols, group)
        found.append((units, inverse, len(pairs)))
        entries.append(np.column_stack([rank[pairs[:, 0]], pairs[:, 1],
                                        np.full(len(pairs), c), pairs[:, 0]]))
    entries = np.concatenate(entries).astype(np.intp).reshape(-1, 4)
    order = np.lexsort((entries[:, 1], entries[:, 0], at[entries[:, 1]]))
    ranked = entries[order]  # by place, part key, column group: (part rank, group) is the key
    new = np.ones(len(ranked), dtype=bool)
    new[1:] = (ranked[1:, :2] != ranked[:-1, :2]).any(axis=1)
    row_of = np.empty(len(ranked), dtype=np.intp)
    row_of[order] = np.cumsum(new) - 1
    picks = ranked[new]
    frame, ranges, scale = pick_rows(parts, picks[:, 2], picks[:, 3])
    unit_rows, start = [], 0
    for part, (units, inverse, n_pairs) in zip(parts, found, strict=True):
        unit_row = np.full(len(part.parts.inverse), -1, dtype=np.intp)
        unit_row[units] = row_of[start:start + n_pairs][inverse]
        unit_rows.append(unit_row)
        start += n_pairs
    table = RowTable(frame, ranges, scale, {}, rain_columns=first[picks[:, 1]])
    return table, unit_rows


def _sampled(part: object) -> NDArray[np.bool_]:
    """The chunk's distinct parts that have a range for any sampled column."""
    sampled = np.zeros(len(part.parts.keys), dtype=bool)
    for column in SPREADS:
        sampled |= part.ranges.sampled(column)
    return sampled


def _part_ranks(parts: Sequence[object]) -> list[NDArray[np.intp]]:
    """Per chunk, each distinct part's place among every chunk's sampled part keys, sorted."""
    sampled = [_sampled(part) for part in parts]
    keys = sorted({k for part, on in zip(parts, sampled, strict=True)
                   for k, yes in zip(part.parts.keys, on, strict=True) if yes})
    rank = {k: i for i, k in enumerate(keys)}
    return [np.array([rank.get(k, -1) for k in part.parts.keys], dtype=np.intp)
            for part in parts]


def _unit_pairs(part: object, cols: NDArray[np.intp], group: NDArray[np.intp]
                ) -> tuple[NDArray[np.intp], NDArray[np.intp], NDArray[np.intp]]:
    """A chunk's sampled units, their distinct (part row, column group) pairs, each's pair."""
    sampled = _sampled(part)
    unit_part = part.parts.inverse
    units = np.flatnonzero(sampled[unit_part]) if len(unit_part) else np.zeros(0, np.intp)
    own = np.asarray(cols, dtype=np.intp)[pd.Index(part.sub_ids).get_indexer(part.unit_sub_ids)]
    pairs = np.column_stack([unit_part[units], group[own[units]]]).astype(np.intp)
    distinct, inverse = np.unique(pairs, axis=0, return_inverse=True)
    return units, distinct.reshape(-1, 2), inverse.reshape(-1)
