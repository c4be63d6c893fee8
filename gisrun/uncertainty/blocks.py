"""A long run-wide table run block by block, chunk by chunk, within the memory budget.

The table of a storm of areal rain (:func:`gisrun.uncertainty.storm_rows.column_rows`) has a
row per distinct part and rain column: up to every unit of the run. Its sample totals
(samples x rows x 16 bytes) would grow with the run, so it is cut into fixed blocks of
:data:`BLOCK_ROWS` rows (the cuts depend on the table alone, so
every engine call, and every figure, is the same however the run was chunked). The chunks
are served in turn (:func:`chunk_runs`): a block is run when the first chunk that needs it
comes, and dropped after the last one that needs it. The table is ordered along the ground
(a Hilbert curve through the subcatchments), as the chunks are, so the blocks held at once are
those of the chunks near the one being served, and of rain shared far and wide (one gauge's
record): the memory is that of a few chunks' rows, whatever the size of the run.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence

import numpy as np
from numpy.typing import NDArray

from ..project import UncertaintySettings
from .ranges import Ranges
from .rowsets import RowTable, SampledRows, run_samples
from .sampling import BATCH_ROWS, RowFigures

__all__ = ["chunk_runs", "BLOCK_ROWS"]

FloatArray = NDArray[np.float64]

#: Rows of a block: one engine call's worth (a block runs its sets in calls of this size).
BLOCK_ROWS = BATCH_ROWS


def chunk_runs(table: RowTable, unit_rows: Sequence[NDArray[np.intp]], rain: FloatArray,
               dt_s: float, settings: UncertaintySettings, *, saturation: float
               ) -> Iterator[tuple[SampledRows, NDArray[np.intp]]]:
    """Per chunk, in order: the totals of its rows, and each unit's row among them.

    ``unit_rows`` give each chunk's units' rows of ``table`` (-1: no range); the rows of a
    chunk's totals are its rows of the table in order.
    """
    size = BLOCK_ROWS
    needed = [np.unique(u[u >= 0]) for u in unit_rows]
    last = {}
    for c, rows in enumerate(needed):
        for b in np.unique(rows // size).tolist():
            last[b] = c
    done: dict[int, SampledRows] = {}
    for c, (rows, unit_row) in enumerate(zip(needed, unit_rows, strict=True)):
        blocks = np.unique(rows // size).tolist()
        for b in blocks:
            if b not in done:
                done[b] = run_samples(_table_slice(table, b * size, (b + 1) * size), [rain],
                                      dt_s, settings, saturation=saturation)
        local = np.full(len(unit_row), -1, dtype=np.intp)
        local[unit_row >= 0] = np.searchsorted(rows, unit_row[unit_row >= 0])
        yield (_gathered(rows, done, size) if rows.size else SampledRows({}, [])), local
        for b in blocks:
            if last[b] == c:
                del done[b]


def _table_slice(table: RowTable, start: int, stop: int) -> RowTable:
    """Rows ``start:stop`` of ``table``."""
    part = slice(start, stop)
    ranges = Ranges()
    for name in ("central", "low", "high", "draw", "source"):
        getattr(ranges, name).update({c: v[part] for c, v in getattr(table.ranges,
                                                                       name).items()})
    scale = None if table.rain_scale is None else table.rain_scale[part]
    columns = None if table.rain_columns is None else table.rain_columns[part]
    return RowTable(table.frame.iloc[part].reset_index(drop=True), ranges, scale, {},
                    rain_columns=columns)


def _gathered(rows: NDArray[np.intp], done: dict[int, SampledRows], size: int) -> SampledRows:
    """The totals of the given rows (in order), from the blocks that hold them."""
    block = rows // size
    at = rows - block * size
    where = [(done[b], at[block == b]) for b in np.unique(block).tolist()]
    out = SampledRows({}, [_figures([s.samples[0] for s, _ in where], where)])
    columns = dict.fromkeys(c for s, _ in where for c in s.at_low)
    for column in columns:
        for ends in (out.at_low, out.at_high):
            source = "at_low" if ends is out.at_low else "at_high"
            ends[column] = [_figures([getattr(s, source).get(column, [None])[0]
                                      for s, _ in where], where)]
    return out


def _figures(figures: list[RowFigures | None], where: list[tuple[SampledRows, NDArray[np.intp]]]
             ) -> RowFigures:
    """One set of totals joined from blocks (NaN from a block without the figures)."""
    sets = next(f.runoff_depth_m.shape[0] for f in figures if f is not None)
    parts = [(f.runoff_depth_m[:, rows], f.time_to_ponding_s[:, rows]) if f is not None
             else (np.full((sets, len(rows)), np.nan),) * 2
             for f, (_, rows) in zip(figures, where, strict=True)]
    return RowFigures(np.concatenate([p[0] for p in parts], axis=1),
                      np.concatenate([p[1] for p in parts], axis=1))
