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

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ..project import UncertaintySettings
from .ranges import Ranges
from .sampler import draw_columns
from .sampling import RowFigures, apply_values, run_row_sets, sampled_values
from .spread import SPREADS

__all__ = ["RowTable", "SampledRows", "gather_rows", "run_samples"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class RowTable:
    """Distinct rows that have a range, from any number of chunks, in key order."""

    frame: pd.DataFrame
    ranges: Ranges
    rain_scale: FloatArray | None
    #: Key -> position in ``frame``.
    index: dict[tuple, int]


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
    picks = [chosen[k] for k in keys]
    frames = [parts[c].parts.frame.iloc[[r]] for c, r in picks]
    frame = (pd.concat(frames, ignore_index=True) if frames
             else parts[0].parts.frame.iloc[:0].reset_index(drop=True) if parts
             else pd.DataFrame())
    ranges = Ranges()
    for column in SPREADS:
        for target, source in ((ranges.central, "central"), (ranges.low, "low"),
                               (ranges.high, "high"), (ranges.draw, "draw"),
                               (ranges.source, "source")):
            values = [getattr(parts[c].ranges, source)[column][r] for c, r in picks]
            kind = object if source in ("draw", "source") else np.float64
            target[column] = np.array(values, dtype=kind)
    scale = None
    if parts and parts[0].parts.rain_scale is not None:
        scale = np.array([parts[c].parts.rain_scale[r] for c, r in picks], dtype=np.float64)
    return RowTable(frame, ranges, scale, {k: i for i, k in enumerate(keys)})


def run_samples(table: RowTable, rains: Sequence[FloatArray], dt_s: float,
                settings: UncertaintySettings, *, saturation: float) -> SampledRows:
    """Run every sample, and each sampled column at its ends, over the table's rows."""
    if table.frame.empty:
        return SampledRows(table.index, [])
    columns = draw_columns(table.ranges.draw_names(), settings.samples, settings.seed)
    values = sampled_values(table.ranges, columns)
    frames = [apply_values(table.frame, {c: (rows, v[s]) for c, (rows, v) in values.items()},
                           saturation=saturation) for s in range(settings.samples)]
    out = SampledRows(table.index, run_row_sets(frames, rains, dt_s,
                                                rain_scale=table.rain_scale))
    ends = []  # every sampled column at its low and its high end, in one engine pass
    for column in values:
        rows = np.flatnonzero(table.ranges.sampled(column))
        ends += [apply_values(table.frame, {column: (rows, bound[column][rows])},
                              saturation=saturation)
                 for bound in (table.ranges.low, table.ranges.high)]
    both = run_row_sets(ends, rains, dt_s, rain_scale=table.rain_scale)
    for i, column in enumerate(values):
        out.at_low[column] = [RowFigures(f.runoff_depth_m[2 * i:2 * i + 1],
                                         f.time_to_ponding_s[2 * i:2 * i + 1]) for f in both]
        out.at_high[column] = [RowFigures(f.runoff_depth_m[2 * i + 1:2 * i + 2],
                                          f.time_to_ponding_s[2 * i + 1:2 * i + 2])
                               for f in both]
    return out
