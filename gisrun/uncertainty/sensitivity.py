"""One-at-a-time sensitivity: each parameter at the ends of its range, the others held.

For every sampled parameter, the distinct unit parts that have a range for it are
set to the range's low end, then to its high end (one standard deviation, the
10th/90th percentile for the curve number, the interval's ends for a uniform),
every other parameter at the run's value, and each subcatchment's runoff depth is
recorded (the run-wide runs are :func:`gisrun.uncertainty.rowsets.run_samples`;
units whose part has no range for the parameter keep the run's own totals). The
*swing* ``|high - low|`` ranks the parameters per subcatchment and storm: rank 1
moves its runoff most. Draws of the same parameter move together (all textures at
their low end at once), so the swing is the parameter's, not a texture's.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from .rowsets import SampledRows
from .spread import SPREADS

__all__ = ["one_at_a_time", "SENSITIVITY_COLUMNS"]

#: Columns of the sensitivity table (SI).
SENSITIVITY_COLUMNS = ("storm", "subcatchment_id", "parameter", "runoff_depth_m",
                       "runoff_depth_at_low_m", "runoff_depth_at_high_m",
                       "runoff_depth_swing_m", "sensitivity_rank")


def one_at_a_time(part: object, rows: SampledRows, agg: object, unit_row: NDArray[np.intp],
                  storm_names: Sequence[str]) -> pd.DataFrame:
    """Long table: per storm, subcatchment and sampled parameter, runoff at each range end.

    ``part`` is the chunk's :class:`~gisrun.uncertainty.analysis.ChunkParts`, ``agg`` its
    :class:`~gisrun.uncertainty.analysis.Aggregator` and ``unit_row`` each unit's row in
    the run-wide table (-1 where its part has no range). Only subcatchments with a part
    that has a range for the parameter get a row.
    """
    frames = []
    for column in SPREADS:
        if column not in rows.at_low:
            continue
        on = part.ranges.sampled(column)[part.parts.inverse] & (unit_row >= 0)
        if not on.any():
            continue
        has = np.asarray(agg.weights @ on.astype(float)).ravel() > 0
        for k, storm in enumerate(storm_names):
            run = part.run_runoff_m[k]
            ends = []
            for figures in (rows.at_low[column][k], rows.at_high[column][k]):
                runoff = run.copy()
                runoff[on] = figures.runoff_depth_m[0, unit_row[on]]
                ends.append(agg.depth(runoff)[0])
            frames.append(_rows(storm, column, part.sub_ids, has, agg.depth(run)[0], *ends))
    if not frames:
        return pd.DataFrame({c: [] for c in SENSITIVITY_COLUMNS})
    table = pd.concat(frames, ignore_index=True)
    rank = table.groupby(["storm", "subcatchment_id"], sort=False)["runoff_depth_swing_m"].rank(
        method="first", ascending=False)
    return table.assign(sensitivity_rank=rank.astype(np.int64))[list(SENSITIVITY_COLUMNS)]


def _rows(storm: str, column: str, sub_ids: NDArray[np.object_], has: NDArray[np.bool_],
          central: NDArray[np.float64], low: NDArray[np.float64], high: NDArray[np.float64]
          ) -> pd.DataFrame:
    at_low, at_high = low[has], high[has]
    return pd.DataFrame({
        "storm": storm, "subcatchment_id": sub_ids[has], "parameter": column,
        "runoff_depth_m": central[has],
        "runoff_depth_at_low_m": at_low, "runoff_depth_at_high_m": at_high,
        "runoff_depth_swing_m": np.abs(at_high - at_low),
    })
