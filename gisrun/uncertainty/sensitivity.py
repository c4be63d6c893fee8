"""One-at-a-time sensitivity: each parameter at the ends of its range, the others held.

For every sampled parameter, the distinct unit parts that have a range for it are
set to the range's low end, then to its high end (one standard deviation, the
10th/90th percentile for the curve number, the interval's ends for a uniform),
every other parameter at the run's value, and each subcatchment's runoff depth is
recorded (the runs are :func:`gisrun.uncertainty.rowsets.run_samples`, over the run-wide
table or, for a storm of areal rain, the chunk's own rows; units whose part has no range for
the parameter keep the run's own totals). The
*swing* ``|high - low|`` ranks the parameters per subcatchment and storm: rank 1
moves its runoff most. Draws of the same parameter move together (all textures at
their low end at once), so the swing is the parameter's, not a texture's.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from .spread import SPREADS
from .storm_rows import StormRows

__all__ = ["storm_swings", "ranked_swings", "SENSITIVITY_COLUMNS"]

#: Columns of the sensitivity table (SI).
SENSITIVITY_COLUMNS = ("storm", "subcatchment_id", "parameter", "runoff_depth_m",
                       "runoff_depth_at_low_m", "runoff_depth_at_high_m",
                       "runoff_depth_swing_m", "sensitivity_rank")


def storm_swings(part: object, run: StormRows, agg: object, storm: int, name: str
                 ) -> dict[str, pd.DataFrame]:
    """One storm's rows of the table, per sampled parameter: runoff at each range end.

    ``part`` is the chunk's :class:`~gisrun.uncertainty.analysis.ChunkParts`, ``agg`` its
    :class:`~gisrun.uncertainty.analysis.Aggregator`, ``run`` where the storm's totals are
    and ``storm`` its position among the chunk's storms. Only subcatchments with a part
    that has a range for the parameter get a row.
    """
    out = {}
    for column in SPREADS:
        if column not in run.rows.at_low:
            continue
        on = part.ranges.sampled(column)[part.parts.inverse] & (run.unit_row >= 0)
        if not on.any():
            continue
        has = np.asarray(agg.weights @ on.astype(float)).ravel() > 0
        own = part.run_runoff_m[storm]
        ends = []
        for figures in (run.rows.at_low[column][run.storm], run.rows.at_high[column][run.storm]):
            runoff = own.copy()
            runoff[on] = figures.runoff_depth_m[0, run.unit_row[on]]
            ends.append(agg.depth(runoff)[0])
        out[column] = _rows(name, column, part.sub_ids, has, agg.depth(own)[0], *ends)
    return out


def ranked_swings(swings: dict[tuple[str, int], pd.DataFrame]) -> pd.DataFrame:
    """The long table from ``(parameter, storm position) -> rows``, ranked per storm and id.

    Rows go parameter by parameter (in the order of ``SPREADS``), storm by storm.
    """
    if not swings:
        return pd.DataFrame({c: [] for c in SENSITIVITY_COLUMNS})
    order = list(SPREADS)
    keys = sorted(swings, key=lambda key: (order.index(key[0]), key[1]))
    table = pd.concat([swings[key] for key in keys], ignore_index=True)
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
