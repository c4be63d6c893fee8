"""The run-wide sample runs: every sampled distinct row of every chunk, run once per set.

:func:`gather_rows` collects the rows that have a range from every chunk's
:class:`~gisrun.uncertainty.analysis.ChunkParts` into one table in the order of
their keys (so the table, and therefore every engine call, is the same however the
run was chunked); :func:`run_samples` draws the samples (one Latin hypercube column
per draw), runs them and the one-at-a-time sets over that table.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import partial

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..project import UncertaintySettings
from .ranges import Ranges
from .sampler import draw_columns
from .sampling import LazySets, RowFigures, apply_values, run_row_sets, sampled_values
from .spread import SPREADS

__all__ = ["RowTable", "SampledRows", "gather_rows", "pick_rows", "run_samples"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class RowTable:
    """Distinct rows that have a range, from any number of chunks, in key order."""

    frame: pd.DataFrame
    ranges: Ranges
    rain_scale: FloatArray | None
    #: Key -> position in ``frame``.
    index: dict[tuple, int]
    #: For a storm whose rain differs between subcatchments: each row's column of its rain.
    rain_columns: NDArray[np.intp] | None = None


@dataclass
class SampledRows:
    """Per storm, the totals of every row of a :class:`RowTable` in every sample and end."""

    index: dict[tuple, int]
    samples: list[RowFigures]
    #: Per sampled column, per storm: totals with that column alone at its low / high end.
    at_low: dict[str, list[RowFigures]] = field(default_factory=dict)
    at_high: dict[str, list[RowFigures]] = field(default_factory=dict)


def gather_rows(parts: Sequence[object]) -> RowTable:
    """One table of the sampled distinct rows of the given chunks (first seen wins a key).

    ``parts`` are :class:`~gisrun.uncertainty.analysis.ChunkParts` (their ``parts``
    and ``ranges``).
    """
    chosen: dict[tuple, tuple[int, int]] = {}
    for c, part in enumerate(parts):
        sampled = np.zeros(len(part.parts.keys), dtype=bool)
        for column in SPREADS:
            sampled |= part.ranges.sampled(column)
        for r in np.flatnonzero(sampled):
            chosen.setdefault(part.parts.keys[r], (c, int(r)))
    keys = sorted(chosen)
    picks = np.array([chosen[k] for k in keys], dtype=np.intp).reshape(-1, 2)
    frame, ranges, scale = pick_rows(parts, picks[:, 0], picks[:, 1])
    return RowTable(frame, ranges, scale, {k: i for i, k in enumerate(keys)})


def pick_rows(parts: Sequence[object], chunk_of: NDArray[np.intp], row_of: NDArray[np.intp]
              ) -> tuple[pd.DataFrame, Ranges, FloatArray | None]:
    """Rows ``row_of[i]`` of the distinct parts of chunks ``chunk_of[i]``: frame, ranges, factor.

    Each chunk's rows are taken at once and put in the given order after.
    """
    n = len(chunk_of)
    by_chunk = np.argsort(chunk_of, kind="stable")
    bounds = np.flatnonzero(np.diff(chunk_of[by_chunk])) + 1
    groups = [g for g in np.split(by_chunk, bounds) if g.size]
    if groups:
        pieces = [parts[chunk_of[g[0]]].parts.frame.iloc[row_of[g]] for g in groups]
        joined = pd.concat(pieces, ignore_index=True) if len(pieces) > 1 else pieces[0]
        place = np.empty(n, dtype=np.intp)
        place[by_chunk] = np.arange(n)
        frame = joined.iloc[place].reset_index(drop=True)
    else:
        frame = (parts[0].parts.frame.iloc[:0].reset_index(drop=True) if parts
                 else pd.DataFrame())
    ranges = Ranges()
    for column in SPREADS:
        for source in ("central", "low", "high", "draw", "source"):
            kind = object if source in ("draw", "source") else np.float64
            values = np.empty(n, dtype=kind)
            for g in groups:
                values[g] = getattr(parts[chunk_of[g[0]]].ranges, source)[column][row_of[g]]
            getattr(ranges, source)[column] = values
    scale = None
    if parts and parts[0].parts.rain_scale is not None:
        scale = np.empty(n, dtype=np.float64)
        for g in groups:
            scale[g] = parts[chunk_of[g[0]]].parts.rain_scale[row_of[g]]
    return frame, ranges, scale


def run_samples(table: RowTable, rains: Sequence[FloatArray], dt_s: float,
                settings: UncertaintySettings, *, saturation: float) -> SampledRows:
    """Run every sample, and each sampled column at its ends, over the table's rows.

    ``rains`` are storms of one series ``(steps,)``, or, for a table with ``rain_columns``,
    rain matrices ``(steps, columns)``.
    """
    if table.frame.empty or not rains:
        return SampledRows(table.index, [])
    columns = draw_columns(table.ranges.draw_names(), settings.samples, settings.seed)
    values = sampled_values(table.ranges, columns)
    frames = LazySets(settings.samples, partial(_sample_set, table, values, saturation))
    rain = {"rain_scale": table.rain_scale, "rain_columns": table.rain_columns}
    out = SampledRows(table.index, run_row_sets(frames, rains, dt_s, **rain))
    # every sampled column at its low and its high end, in one engine pass
    ends = [(column, np.flatnonzero(table.ranges.sampled(column)), bound)
            for column in values for bound in (table.ranges.low, table.ranges.high)]
    both = run_row_sets(LazySets(len(ends), partial(_end_set, table, ends, saturation)),
                        rains, dt_s, **rain)
    for i, column in enumerate(values):
        out.at_low[column] = [RowFigures(f.runoff_depth_m[2 * i:2 * i + 1],
                                         f.time_to_ponding_s[2 * i:2 * i + 1]) for f in both]
        out.at_high[column] = [RowFigures(f.runoff_depth_m[2 * i + 1:2 * i + 2],
                                          f.time_to_ponding_s[2 * i + 1:2 * i + 2])
                               for f in both]
    return out


def _sample_set(table: RowTable, values: dict, saturation: float, s: int) -> pd.DataFrame:
    """The table's rows with sample ``s``'s values."""
    return apply_values(table.frame, {c: (rows, v[s]) for c, (rows, v) in values.items()},
                        saturation=saturation)


def _end_set(table: RowTable, ends: list, saturation: float, i: int) -> pd.DataFrame:
    """The table's rows with one column at one end of its ranges (``ends[i]``)."""
    column, rows, bound = ends[i]
    return apply_values(table.frame, {column: (rows, bound[column][rows])},
                        saturation=saturation)
