"""One-at-a-time sensitivity: each parameter at the ends of its range, the others held.

For every sampled parameter, the distinct unit parts that have a range for it are
set to the range's low end, then to its high end (one standard deviation, the
10th/90th percentile for the curve number, the interval's ends for a uniform),
every other parameter at the run's value, and each subcatchment's runoff depth is
recorded. The *swing* ``|high - low|`` ranks the parameters per subcatchment and
storm: rank 1 moves its runoff most. Draws of the same parameter move together
(all textures at their low end at once), so the swing is the parameter's, not a
texture's.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from .ranges import Ranges
from .sampling import DistinctParts, SampleRunner, StormFigures, apply_values
from .spread import SPREADS

__all__ = ["one_at_a_time", "SENSITIVITY_COLUMNS"]

#: Columns of the sensitivity table (SI).
SENSITIVITY_COLUMNS = ("storm", "subcatchment_id", "parameter", "runoff_depth_m",
                       "runoff_depth_at_low_m", "runoff_depth_at_high_m",
                       "runoff_depth_swing_m", "sensitivity_rank")


def one_at_a_time(runner: SampleRunner, parts: DistinctParts, ranges: Ranges,
                  storm_names: Sequence[str], *, saturation: float,
                  central: list[StormFigures]) -> pd.DataFrame:
    """Long table: per storm, subcatchment and sampled parameter, runoff at each range end.

    Only subcatchments with a part that has a range for the parameter get a row.
    """
    frames = []
    for column in SPREADS:
        rows = np.flatnonzero(ranges.sampled(column))
        if not rows.size:
            continue
        ends = runner.run_many([apply_values(parts.frame, {column: (rows, bound[column][rows])},
                                             saturation=saturation)
                                for bound in (ranges.low, ranges.high)])
        touched = np.zeros(len(parts.frame), dtype=bool)
        touched[rows] = True
        has = np.asarray(runner.weights @ touched[parts.inverse].astype(float)).ravel() > 0
        for k, storm in enumerate(storm_names):
            frames.append(_rows(storm, column, runner.sub_ids, has, central[k].runoff_depth_m,
                                ends[k].runoff_depth_m[0], ends[k].runoff_depth_m[1]))
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
